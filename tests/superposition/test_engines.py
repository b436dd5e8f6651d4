"""Closed-form engine vs the Lindblad (QuTiP mesolve) engine where both apply, and the
Lindblad engine alone for spin T1 against analytic amplitude damping."""

import numpy as np
import pytest
import qutip

import gqsim
from tests.superposition.helpers import two_body_protocol

AGREE = 1e-8  # issue #2 requirement; mesolve runs at rtol 1e-10, atol 1e-12


def _pair(proto):
    closed = gqsim.simulate(proto, engine="closed_form")
    lind = gqsim.simulate(proto, engine="lindblad")
    return closed, lind


@pytest.mark.parametrize("dephasing", [
    {"model": "constant", "rate_per_s": 0.05},
    {"model": "separation_squared", "localisation_per_m2_s": 2e5, "saturation_per_s": 0.03},
])
def test_engines_agree_with_dephasing(dephasing):
    proto = two_body_protocol(style="side_by_side", distance=200e-6, hold=6.0, points=31, dephasing=dephasing)
    closed, lind = _pair(proto)
    np.testing.assert_allclose(closed.states, lind.states, atol=AGREE)
    for name in ("log_negativity", "negativity", "concurrence", "witness_lab", "witness_optimised", "purity"):
        np.testing.assert_allclose(closed.series[name], lind.series[name], atol=AGREE)
    # QuTiP's own measures on the mesolve states (reference library, not ours).
    for rho, c, n in zip(lind.states, closed.series["concurrence"], closed.series["negativity"]):
        q = qutip.Qobj(rho, dims=[[2, 2], [2, 2]])
        assert c == pytest.approx(qutip.concurrence(q), abs=1e-7)
        # QuTiP's negativity goes through sqrtm(A^dag A), which halves the significant digits.
        assert n == pytest.approx(qutip.negativity(q, 1), abs=1e-7)


@pytest.mark.slow
def test_engines_agree_during_split_and_recombine():
    extra = {"timing": {"hold_s": 2.0, "split_s": 0.5, "recombine_s": 0.5}}
    proto = two_body_protocol(points=31, radius=1e-6, extra=extra,
                              dephasing={"model": "separation_squared", "localisation_per_m2_s": 5e5,
                                         "saturation_per_s": 0.02})
    closed, lind = _pair(proto)
    np.testing.assert_allclose(closed.states, lind.states, atol=AGREE)


def test_engines_agree_for_qutrits_with_constant_dephasing():
    proto = two_body_protocol(branch_count=3, points=11, dephasing={"model": "constant", "rate_per_s": 0.02})
    closed, lind = _pair(proto)
    np.testing.assert_allclose(closed.states, lind.states, atol=AGREE)


def test_spin_t1_population_relaxes_exponentially():
    # Amplitude damping toward branch 0 (Nielsen & Chuang 2010, Sec. 8.3.5, from memory):
    # the branch-1 population of each body decays as p1(0) e^{-t/T1}; the diagonal gravitational
    # Hamiltonian does not change populations.
    t1 = 3.0
    proto = two_body_protocol(points=11, hold=2.5, spin={"t1_s": t1})
    result = gqsim.simulate(proto)
    assert result.provenance.engine == "lindblad"
    rho = result.states.reshape(-1, 2, 2, 2, 2)
    reduced_a = np.einsum("nabcb->nac", rho)
    reduced_b = np.einsum("nabad->nbd", rho)
    expected = 0.5 * np.exp(-result.times_s / t1)
    np.testing.assert_allclose(reduced_a[:, 1, 1].real, expected, atol=1e-8)
    np.testing.assert_allclose(reduced_b[:, 1, 1].real, expected, atol=1e-8)
    np.testing.assert_allclose(np.trace(result.states, axis1=1, axis2=2).real, 1.0, atol=1e-10)


def test_closed_form_refuses_spin_t1():
    proto = two_body_protocol(points=3, spin={"t1_s": 3.0})
    with pytest.raises(gqsim.PhysicsError, match="T1"):
        gqsim.simulate(proto, engine="closed_form")


def test_spin_t2_alone_is_exact_in_closed_form():
    # Pure dephasing at 1/T2 equals the constant-rate channel (shared §1.8 model).
    a = gqsim.simulate(two_body_protocol(points=6, spin={"t2_s": 10.0}))
    b = gqsim.simulate(two_body_protocol(points=6, dephasing={"model": "constant", "rate_per_s": 0.1}))
    np.testing.assert_allclose(a.states, b.states, atol=1e-14)
    assert a.provenance.engine == "closed_form"
