"""Entanglement measures against closed forms and QuTiP's own implementations."""

import numpy as np
import pytest
import qutip
from hypothesis import given
from hypothesis import strategies as st

from gqsim.physics.measures import concurrence, log_negativity, negativity, partial_transpose, purity
from gqsim.physics.witnesses import correlation_matrix, spin_witness_lab, spin_witness_optimised
from tests.superposition.helpers import cz_phase_state, werner

ROUNDOFF = 1e-12  # double-precision eigen-solver accuracy on 4x4 / 9x9 matrices, with margin


def test_bell_state_has_one_ebit_and_negativity_half():
    # Bell state: E_N = 1 ebit, N = 1/2 (shared §1.4; Vidal & Werner, PRA 65, 032314, Eq. (4)).
    psi = np.array([1, 0, 0, 1]) / np.sqrt(2)
    rho = np.outer(psi, psi)
    assert log_negativity(rho, (2, 2)) == pytest.approx(1.0, abs=ROUNDOFF)
    assert log_negativity(rho, (2, 2), base="e") == pytest.approx(np.log(2), abs=ROUNDOFF)
    assert negativity(rho, (2, 2)) == pytest.approx(0.5, abs=ROUNDOFF)
    assert concurrence(rho) == pytest.approx(1.0, abs=1e-7)


@pytest.mark.parametrize("p", np.linspace(0, 1, 11))
def test_werner_concurrence(p):
    # Werner states: C = max(0, (3p - 1)/2) (Wootters, PRL 80, 2245 (1998), applied to Werner 1989 states).
    assert concurrence(werner(p)) == pytest.approx(max(0.0, (3 * p - 1) / 2), abs=1e-7)


def test_product_states_are_unentangled():
    a = qutip.rand_ket(2, seed=1).full().ravel()
    b = qutip.rand_ket(3, seed=2).full().ravel()
    rho = np.outer(np.kron(a, b), np.kron(a, b).conj())
    assert log_negativity(rho, (2, 3)) == pytest.approx(0.0, abs=ROUNDOFF)
    assert negativity(rho, (2, 3)) == pytest.approx(0.0, abs=ROUNDOFF)


@pytest.mark.parametrize("theta", [0.1, 0.313934, 1.0, 2.5, np.pi])
def test_pure_phase_state_identities(theta):
    # C = |sin(theta/2)|, N = C/2, E_N = log2(1 + C) for pure two-qubit states (shared §1.4).
    rho = cz_phase_state(theta)
    c = abs(np.sin(theta / 2))
    assert concurrence(rho) == pytest.approx(c, abs=1e-7)
    assert negativity(rho, (2, 2)) == pytest.approx(c / 2, abs=ROUNDOFF)
    assert log_negativity(rho, (2, 2)) == pytest.approx(np.log2(1 + c), abs=ROUNDOFF)
    # Witness in the CZ frame: <XZ> + <YY> = 1 - cos(theta) (shared §1.5, derived), optimised 1 + C.
    assert spin_witness_lab(rho) == pytest.approx(1 - np.cos(theta), abs=ROUNDOFF)
    assert spin_witness_optimised(rho) == pytest.approx(1 + c, abs=ROUNDOFF)


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("dims", [(2, 2), (2, 3), (3, 3)])
def test_against_qutip_partial_transpose_and_negativity(seed, dims):
    rho_q = qutip.rand_dm(dims[0] * dims[1], seed=seed)
    rho_q.dims = [list(dims), list(dims)]
    rho = rho_q.full()
    ours = partial_transpose(rho, dims)
    theirs = qutip.partial_transpose(rho_q, [0, 1]).full()
    np.testing.assert_allclose(ours, theirs, atol=ROUNDOFF)
    # qutip.negativity returns (||rho^TB||_1 - 1)/2 in QuTiP 5.
    assert negativity(rho, dims) == pytest.approx(qutip.negativity(rho_q, 1), abs=1e-10)
    if dims == (2, 2):
        assert concurrence(rho) == pytest.approx(qutip.concurrence(rho_q), abs=1e-7)


def test_correlation_matrix_against_qutip_expect():
    rho_q = qutip.rand_dm(4, seed=7)
    rho_q.dims = [[2, 2], [2, 2]]
    paulis = [qutip.sigmax(), qutip.sigmay(), qutip.sigmaz()]
    expected = np.array([[qutip.expect(qutip.tensor(a, b), rho_q) for b in paulis] for a in paulis])
    np.testing.assert_allclose(correlation_matrix(rho_q.full()), expected, atol=ROUNDOFF)


def test_purity_limits():
    assert purity(np.eye(4) / 4) == pytest.approx(0.25)
    assert purity(cz_phase_state(0.7)) == pytest.approx(1.0)


def _haar_unitary(angles):
    # Z-Y-Z Euler rotation built from QuTiP's Pauli operators; reaches every SU(2) element.
    a, b, c = angles
    rz = lambda phi: (-1j * phi / 2 * qutip.sigmaz()).expm()  # noqa: E731
    ry = (-1j * b / 2 * qutip.sigmay()).expm()
    return rz(a) * ry * rz(c)


angle = st.floats(min_value=-np.pi, max_value=np.pi, allow_nan=False)


@given(st.tuples(angle, angle, angle), st.tuples(angle, angle, angle), st.integers(min_value=0, max_value=50))
def test_measures_invariant_under_local_unitaries(u_angles, v_angles, seed):
    # Property: entanglement measures are local-unitary invariant (Vidal & Werner 2002, Sec. II).
    rho = qutip.rand_dm(4, seed=seed).full()
    u = np.kron(_haar_unitary(u_angles).full(), _haar_unitary(v_angles).full())
    rotated = u @ rho @ u.conj().T
    for f in (lambda r: log_negativity(r, (2, 2)), lambda r: negativity(r, (2, 2)), concurrence, purity,
              spin_witness_optimised):
        assert f(rotated) == pytest.approx(f(rho), abs=1e-7)


@given(st.integers(min_value=0, max_value=10_000))
def test_log_negativity_bounded_by_log_dimension(seed):
    rho = qutip.rand_dm(9, seed=seed).full()
    value = log_negativity(rho, (3, 3))
    assert 0.0 <= value <= np.log2(3) + ROUNDOFF


def test_witness_separable_bound_holds_for_random_product_states():
    # x1 z2 + y1 y2 <= 1 for product states (Cauchy-Schwarz on Bloch vectors, shared §1.5).
    rng = np.random.default_rng(3)
    for _ in range(200):
        a = rng.normal(size=2) + 1j * rng.normal(size=2)
        b = rng.normal(size=2) + 1j * rng.normal(size=2)
        psi = np.kron(a / np.linalg.norm(a), b / np.linalg.norm(b))
        rho = np.outer(psi, psi.conj())
        assert spin_witness_lab(rho) <= 1 + ROUNDOFF
        assert spin_witness_optimised(rho) <= 1 + ROUNDOFF
