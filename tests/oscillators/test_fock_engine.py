"""Fock engine (QuTiP mesolve/sesolve) against the exact Gaussian engine, plus its own rules."""

import math
import warnings

import numpy as np
import pytest
from scipy.constants import G, hbar, k as k_B

from gqsim.errors import PhysicsError
from gqsim.oscillators import simulate
from gqsim.oscillators.engines_fock import TruncationWarning
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
@pytest.mark.parametrize("channels", [
    {"damping_rate_per_s": None, "bath_occupation": 0.0},
    {"damping_rate_per_s": None, "damping_model": "brownian", "bath_temperature_k": None},
])
def test_open_dynamics_agree_with_gaussian_engine(channels):
    # g = 0.05 omega, damping gamma = 0.05 omega, initial occupation 0.01 (below the thermal
    # threshold n* ~ lambda, so entanglement appears): the cross-check regime.
    # Quantum-optical damping is Lindblad; Caldeira-Leggett adds the non-Lindblad -i gamma/2 [x,{p,rho}].
    data = pair(lam=0.05, periods=0.25, points=6, initial={"occupation": 0.01},
                solver={"fock_tolerance": 1e-7})
    omega = 2 * math.pi * data["bodies"][0]["trap_hz"]
    ch = dict(channels, damping_rate_per_s=0.05 * omega)
    if "bath_temperature_k" in ch:
        ch["bath_temperature_k"] = 0.3 * hbar * omega / k_B  # k_B T = 0.3 hbar omega keeps occupations low
    for body in data["bodies"]:
        body["channels"] = ch
    gauss, fock = both(data)
    assert gauss["log_negativity"].max() > 0.01
    assert np.max(np.abs(gauss["log_negativity"] - fock["log_negativity"])) < AGREEMENT
    assert np.allclose(gauss["purity"], fock["purity"], atol=AGREEMENT)


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


def test_anharmonic_coefficients_follow_the_taylor_series_of_gravity():
    # cubic/quartic terms of -G m^2/(d + delta): V'''/6 = G m^2/d^4, V''''/24 = -G m^2/d^5 (Taylor series)
    data = pair(lam=0.05, periods=0.5, points=5, solver={"anharmonic_order": 4})
    model = build(protocol(data))
    (term,) = model.anharmonic
    m, d = 1.0, 0.05
    ell = model.scales.length_m.min()
    unit = hbar * model.scales.omega_unit_rad_s
    assert term.cubic == pytest.approx(G * m * m / d**4 * ell**3 / unit, rel=1e-12)
    assert term.quartic == pytest.approx(-G * m * m / d**5 * ell**4 / unit, rel=1e-12)
    assert list(term.weights) == [-1.0, 1.0]  # delta = x_B - x_A along the axis
    result = simulate(protocol(data))
    quadratic = simulate(protocol(pair(lam=0.05, periods=0.5, points=5)))
    # for a 1 kg pair 5 cm apart, x_zpf/d ~ 1e-16: the anharmonic correction is far below the tolerance
    assert np.max(np.abs(result["log_negativity"] - quadratic["log_negativity"])) < AGREEMENT


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
