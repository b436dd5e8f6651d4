"""Fock engine (QuTiP mesolve/sesolve) against the exact Gaussian engine, plus its own rules."""

import math
import warnings

import numpy as np
import pytest
from scipy.constants import G, hbar, k as k_B

from gqsim.errors import PhysicsError
from gqsim.oscillators import simulate
from gqsim.oscillators.solve_number_basis import TruncationWarning
from gqsim.oscillators.run import build
from tests.oscillators.helpers import pair, protocol

# issue 3 check: "E_N within 1e-6 once the Fock cutoff converges"
AGREEMENT = 1e-6


def both(data):
    gauss = simulate(protocol(data), engine="gaussian")
    fock = simulate(protocol(data), engine="fock")
    return gauss, fock


@pytest.mark.parametrize("lam", [0.01, 0.05, 0.1])
def test_closed_quench_agrees_with_gaussian_engine(lam):
    # dimensionless coupling across the 0.01-0.1 range, product ground state
    data = pair(lam=lam, periods=1.5, points=13)
    gauss, fock = both(data)
    assert np.max(np.abs(gauss["log_negativity"] - fock["log_negativity"])) < AGREEMENT
    assert fock.summary["fock"]["fock_truncation_error_nats"] <= 1e-6
    assert np.allclose(gauss["purity"], fock["purity"], atol=AGREEMENT)
    assert np.allclose(gauss["duan"], fock["duan"], atol=AGREEMENT)


@pytest.mark.slow
@pytest.mark.parametrize("channels, gamma, periods", [
    ({"bath_occupation": 0.0}, 0.05, 0.25),
    ({"damping_model": "brownian", "bath_temperature_k": 5.0}, 0.01, 0.1),
])
def test_open_dynamics_agree_with_gaussian_engine(channels, gamma, periods):
    # g = 0.05 omega, initial occupation 0.01 (below the thermal threshold n* ~ lambda, so entanglement
    # appears): the cross-check regime. Quantum-optical damping (gamma = 0.05 omega) is Lindblad;
    # Caldeira-Leggett adds the non-Lindblad -i gamma/2 [x,{p,rho}], run at k_B T = 5 hbar omega (its
    # high-temperature range, where it keeps states physical) and gamma = 0.01 omega.
    data = pair(lam=0.05, periods=periods, points=6, initial={"occupation": 0.01},
                solver={"fock_tolerance": 1e-7})
    omega = 2 * math.pi * data["bodies"][0]["trap_hz"]
    ch = dict(channels, damping_rate_per_s=gamma * omega)
    if "bath_temperature_k" in ch:
        ch["bath_temperature_k"] = ch["bath_temperature_k"] * hbar * omega / k_B
    for body in data["bodies"]:
        body["channels"] = ch
    gauss, fock = both(data)
    if "damping_model" in channels:
        assert gauss["purity"][-1] < 0.9  # the hot Brownian bath acts (and kills the entanglement)
        assert np.allclose(gauss["covariance"], fock["covariance"], atol=AGREEMENT)
    else:
        assert gauss["log_negativity"].max() > 0.01
    assert not gauss.notes  # no validity warning: every state is physical
    assert np.max(np.abs(gauss["log_negativity"] - fock["log_negativity"])) < AGREEMENT
    assert np.allclose(gauss["purity"], fock["purity"], atol=AGREEMENT)
    # von Neumann entropies from the density matrix vs the symplectic formula
    assert np.allclose(gauss["mutual_information"], fock["mutual_information"], atol=1e-5)


def test_low_temperature_caldeira_leggett_is_flagged():
    # Caldeira-Leggett at k_B T = 0.3 hbar omega is not completely positive (Breuer & Petruccione 2002,
    # from memory): the run says so, and here the covariance indeed violates sigma + i Omega >= 0
    data = pair(lam=0.05, periods=0.25, points=6, initial={"occupation": 0.01})
    omega = 2 * math.pi * data["bodies"][0]["trap_hz"]
    for body in data["bodies"]:
        body["channels"] = {"damping_rate_per_s": 0.05 * omega, "damping_model": "brownian",
                            "bath_temperature_k": 0.3 * hbar * omega / k_B}
    notes = simulate(protocol(data), engine="gaussian").notes
    assert any("not completely positive" in n for n in notes)
    assert any("uncertainty principle" in n for n in notes)


def test_non_gaussian_initial_state_needs_the_fock_engine():
    data = pair(lam=0.05, periods=0.5, points=5, initial={"kind": "cat", "cat_amplitude": 1.0})
    with pytest.raises(PhysicsError, match="fock"):
        simulate(protocol(data), engine="gaussian")
    result = simulate(protocol(data))  # auto picks fock
    assert result.provenance.engine == "fock"
    # an even cat |alpha> + |-alpha> is pure; the product state starts unentangled (Vidal & Werner 2002)
    assert result["purity"][0] == pytest.approx(1.0, abs=1e-9)
    assert result["log_negativity"][0] == pytest.approx(0.0, abs=1e-9)
    assert result["log_negativity"][-1] > 0.01
    # even cat: <n> = alpha^2 tanh(alpha^2) (textbook, from memory)
    assert result["phonons[A.x]"][0] == pytest.approx(math.tanh(1.0), abs=1e-9)


def test_fock_state_input_keeps_its_phonon_number_without_coupling():
    data = pair(distance_m=1e3, trap_hz=1.0, duration_s=1.0, points=3, initial={"kind": "fock", "fock_n": 2})
    result = simulate(protocol(data))
    assert np.allclose(result["phonons[A.x]"], 2.0, atol=1e-9)
    assert np.allclose(result["log_negativity"], 0.0, atol=1e-12)


def test_anharmonic_run_matches_the_quadratic_one_for_tiny_packets():
    # along the axis the terms reduce to V3 s^3/6 + V4 s^4/24 with V3 = 6 G m^2/d^4, V4 = -24 G m^2/d^5
    # (Taylor series of -G m^2/r)
    data = pair(lam=0.05, periods=0.5, points=5, solver={"anharmonic_order": 4})
    model = build(protocol(data))
    (term,) = model.anharmonic
    m, d = 1.0, 0.05
    ell = model.scales.length_m.min()
    unit = hbar * model.scales.omega_unit_rad_s
    assert term.derivatives[2] == pytest.approx(6 * G * m * m / d**4 * ell**3 / unit, rel=1e-12)
    assert term.derivatives[3] == pytest.approx(-24 * G * m * m / d**5 * ell**4 / unit, rel=1e-12)
    assert list(term.s_weights) == [-1.0, 1.0]  # s = x_B - x_A along the axis
    s = np.array([0.3, -1.1, 2.0])
    assert np.allclose(term.energy([np.zeros(3), s]),
                       term.derivatives[2] * s**3 / 6 + term.derivatives[3] * s**4 / 24, rtol=1e-12, atol=0)
    result = simulate(protocol(data))
    quadratic = simulate(protocol(pair(lam=0.05, periods=0.5, points=5)))
    # for a 1 kg pair 5 cm apart, x_zpf/d ~ 1e-16: the anharmonic correction is far below the tolerance
    assert np.max(np.abs(result["log_negativity"] - quadratic["log_negativity"])) < AGREEMENT


def test_anharmonic_terms_match_the_exact_remainder_in_any_direction():
    # V(|R + u|) - [V(d) + V'(d) n.u + u^T Hess u / 2] computed in 60-digit arithmetic (mpmath) for three
    # bodies in general position with all axes active; the order-3 + order-4 polynomial must match it up to
    # the O(u^5) remainder, bounded by 5 (G m_a m_b / d) (|u|/d)^5 (the fifth radial derivative of 1/r is
    # 120/d^6, divided by 5!, times a geometric factor of order one)
    import mpmath

    from gqsim.oscillators.model import build_model
    from gqsim.oscillators.setup import setup_from_protocol

    data = pair(mass_kg=1.0, distance_m=0.1, trap_hz=1.0, solver={"anharmonic_order": 4})
    data["bodies"].append({"label": "C", "mass_kg": 2.0, "position_m": [0.03, 0.08, -0.05], "trap_hz": 1.0})
    for body in data["bodies"]:
        body["modes"] = ["x", "y", "z"]
    model = build_model(setup_from_protocol(protocol(data).data))
    ell = model.scales.length_m.min()
    unit = hbar * model.scales.omega_unit_rad_s
    rng = np.random.default_rng(3)
    scale = 1e-4 * 0.1 / ell  # displacements ~ 1e-4 of the separation, in units of ell
    x = rng.normal(size=9) * scale
    mp = mpmath.mp.clone()
    mp.dps = 60
    pos = [np.array(b.position_m) for b in model.setup.bodies]
    masses = [b.mass_kg for b in model.setup.bodies]
    for term in model.anharmonic:
        ia, ib = ["ABC".index(lbl) for lbl in term.pair]
        lengths = model.scales.length_m  # x_i is in units of each mode's own ell_i
        u = [mp.mpf(float(x[3 * ib + k] * lengths[3 * ib + k])) - mp.mpf(float(x[3 * ia + k] * lengths[3 * ia + k]))
             for k in range(3)]
        rvec = [mp.mpf(float(pos[ib][k] - pos[ia][k])) for k in range(3)]
        d = mp.sqrt(sum(c * c for c in rvec))
        n = [c / d for c in rvec]
        k_g = mp.mpf(G) * masses[ia] * masses[ib]
        exact = -k_g / mp.sqrt(sum((rvec[k] + u[k]) ** 2 for k in range(3)))
        s_ = sum(n[k] * u[k] for k in range(3))
        q_ = sum(c * c for c in u)
        quadratic = -k_g / d + (k_g / d**2) * s_ + ((-2 * k_g / d**3) * s_**2 + (k_g / d**3) * (q_ - s_**2)) / 2
        remainder = float((exact - quadratic) / mp.mpf(float(unit)))
        poly = term.energy(list(x))
        cubic_only = float(type(term)(**{**term.__dict__, "order": 3}).energy(list(x)))
        fifth = float(5 * k_g / d * (mp.sqrt(q_) / d) ** 5 / mp.mpf(float(unit)))
        assert abs(poly - remainder) <= fifth
        assert abs(poly - cubic_only) > 10 * fifth  # the quartic part is resolved, not lost in the remainder


def test_truncation_warning_when_the_top_level_is_populated():
    data = pair(lam=0.05, periods=0.25, points=3, solver={"fock_top_population": 1e-300, "engine": "fock"})
    with pytest.warns(TruncationWarning):
        result = simulate(protocol(data))
    assert any("top level" in note for note in result.notes)


def test_fock_engine_refuses_displaced_states():
    data = pair(lam=0.05, periods=0.25, points=3, initial={"displacement_m": [1e-18, 0.0, 0.0]})
    with pytest.raises(PhysicsError, match="displacement"):
        simulate(protocol(data), engine="fock")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        simulate(protocol(data), engine="gaussian")
