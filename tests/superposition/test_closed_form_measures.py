"""The closed-form measures of dephased phase states against the general linear-algebra route
(gqsim.physics.measures, itself checked against QuTiP) and against QuTiP directly."""

import numpy as np
import pytest
import qutip
from hypothesis import given
from hypothesis import strategies as st

from gqsim.physics.measures import concurrence, log_negativity, negativity, purity
from gqsim.superposition.closed_form_measures import phase_state_measures
from gqsim.physics.witnesses import spin_witness_optimised

EXACT = 1e-12  # both routes are exact; the difference is double round-off


def _state(phases, alpha, beta, qa, qb):
    aa = np.exp(1j * np.array([0.0, alpha])) / np.sqrt(2)
    bb = np.exp(1j * np.array([0.0, beta])) / np.sqrt(2)
    psi = (np.multiply.outer(aa, bb) * np.exp(1j * phases)).ravel()
    rho = np.outer(psi, psi.conj()) * np.kron([[1, qa], [qa, 1]], [[1, qb], [qb, 1]])
    return rho, aa, bb


unit = st.floats(min_value=0.0, max_value=1.0, allow_nan=False)
ang = st.floats(min_value=-7.0, max_value=7.0, allow_nan=False)


@given(st.lists(ang, min_size=4, max_size=4), ang, ang, unit, unit)
def test_closed_form_equals_general_route(phases, alpha, beta, qa, qb):
    phases = np.array(phases).reshape(2, 2)
    rho, aa, bb = _state(phases, alpha, beta, qa, qb)
    theta = phases[0, 1] + phases[1, 0] - phases[0, 0] - phases[1, 1]
    got = {k: v[0] for k, v in phase_state_measures(np.array([theta]), np.array([qa]), np.array([qb])).items()}
    assert got["negativity"] == pytest.approx(negativity(rho, (2, 2)), abs=EXACT)
    assert got["log_negativity"] == pytest.approx(log_negativity(rho, (2, 2)), abs=EXACT)
    # the general concurrence takes square roots of eigenvalues: ~1e-8 near rank deficiency
    assert got["concurrence"] == pytest.approx(concurrence(rho), abs=1e-7)
    assert got["witness_optimised"] == pytest.approx(spin_witness_optimised(rho), abs=EXACT)
    assert got["purity"] == pytest.approx(purity(rho), abs=EXACT)


@pytest.mark.parametrize("theta, qa, qb", [(0.6, 0.9, 0.9), (2.0, 0.7, 0.95), (3.0, 0.5, 1.0), (1.2, 0.0, 0.8)])
def test_closed_form_against_qutip(theta, qa, qb):
    rho, _, _ = _state(np.array([[0, 0], [0, theta]]), 0.0, 0.0, qa, qb)
    q = qutip.Qobj(rho, dims=[[2, 2], [2, 2]])
    got = phase_state_measures(np.array([theta]), np.array([qa]), np.array([qb]))
    assert got["concurrence"][0] == pytest.approx(qutip.concurrence(q), abs=1e-7)
    assert got["negativity"][0] == pytest.approx(qutip.negativity(q, 1), abs=1e-7)


def test_equal_dephasing_concurrence_formula():
    # shared §1.8 (derived there): C = max(0, q|sin(theta/2)| - (1 - q^2)/2) for equal q.
    theta = np.linspace(0, 2 * np.pi, 50)
    q = np.linspace(1, 0.3, 50)
    got = phase_state_measures(theta, q, q)["concurrence"]
    np.testing.assert_allclose(got, np.maximum(0, q * np.abs(np.sin(theta / 2)) - (1 - q**2) / 2), atol=EXACT)


def test_compiled_loop_equals_the_array_formulas():
    # Series of 64 points or more use the compiled loop; shorter ones the numpy formulas.
    rng = np.random.default_rng(11)
    theta, qa, qb = rng.uniform(-7, 7, 500), rng.uniform(0, 1, 500), rng.uniform(0, 1, 500)
    long = phase_state_measures(theta, qa, qb)
    for k in range(0, 500, 50):
        short = phase_state_measures(theta[k:k + 50], qa[k:k + 50], qb[k:k + 50])
        for name in long:
            np.testing.assert_allclose(long[name][k:k + 50], short[name], atol=EXACT)
