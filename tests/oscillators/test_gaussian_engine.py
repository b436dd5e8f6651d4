"""Exact Gaussian engine against closed forms, the shared check tables and scipy's ODE integrator."""

import math

import numpy as np
import pytest
from scipy.constants import hbar, k as k_B
from scipy.integrate import solve_ivp

from gqsim.oscillators import measures, simulate
from gqsim.oscillators.solve_moments import ground_state_covariance, van_loan
from gqsim.oscillators.run import build
from tests.oscillators.helpers import pair, protocol

# Van Loan/expm results carry a few hundred ulps after many steps
EXACT = 1e-10


def omega_of(data):
    return 2 * math.pi * data["bodies"][0]["trap_hz"]


def test_ground_state_of_linearly_coupled_oscillators():
    # Normal modes omega_+-^2 = omega^2 (1 +- k): E_N = 1/2 ln(omega_+/omega_-) = 1/4 ln((1+k)/(1-k));
    # shared §2.2 check value k = 0.1 -> 0.05016767, k = 1e-3 -> 5.0000e-4
    for k, expected in ((0.1, 0.05016767), (1e-3, 5.0000e-4)):
        ham = np.eye(4)
        ham[0, 2] = ham[2, 0] = k
        cov = ground_state_covariance(ham)
        assert measures.log_negativity(cov, [1]) == pytest.approx(0.25 * math.log((1 + k) / (1 - k)), abs=1e-13)
        assert measures.log_negativity(cov, [1]) == pytest.approx(expected, abs=5e-9)
        assert measures.purity(cov) == pytest.approx(1.0, abs=1e-13)  # a ground state is pure


def test_gravitational_ground_state_log_negativity():
    # With the gravitational shifts the relative mode has omega_-^2 = omega^2 (1 - 4 lambda):
    # E_N = -1/4 ln(1 - 4 lambda) (shared §2.2)
    lam = 0.02
    model = build(protocol(pair(lam=lam)))
    cov = ground_state_covariance(model.stages[0].hamiltonian)
    assert measures.log_negativity(cov, [1]) == pytest.approx(-0.25 * math.log(1 - 4 * lam), rel=1e-10)


def test_quench_from_product_ground_state():
    # shared §2.2 [DERIVED, independent code]: lambda = 1e-3, E_N(omega t = pi/2) = 0.0020040, max over
    # omega t in [0, 20] = 0.0020040; first-order law 2 lambda |sin(omega t)| (our derivation, analytic.py)
    lam = 1e-3
    data = pair(lam=lam, points=2001)
    w = omega_of(data)
    data["stages"][0]["duration_s"] = 20 / w
    data["time_grid"] = {"times_s": list(np.linspace(0, 20 / w, 2001)) + []}
    result = simulate(protocol(data))
    en = result["log_negativity"]
    wt = result.times_s * w
    assert en.max() == pytest.approx(0.0020040, abs=5e-8)
    quarter = pair(lam=lam)
    quarter["time_grid"] = {"times_s": [0.0, 0.5 * math.pi / w]}
    quarter["stages"][0]["duration_s"] = 0.5 * math.pi / w
    assert simulate(protocol(quarter))["log_negativity"][-1] == pytest.approx(0.0020040, abs=5e-8)
    # first-order law: error O(lambda) relative plus the O(lambda omega t) phase drift of the shifted modes
    early = wt < 4
    assert np.allclose(en[early], 2 * lam * np.abs(np.sin(wt[early])), atol=4 * lam * (lam * 4 + lam))
    assert result.summary["analytic"]["quench_max_ratio"] == pytest.approx(1.0, abs=0.01)


@pytest.mark.parametrize("n_th, expected", [(1e-4, 0.0018040), (1e-3, 6.0e-6)])
def test_thermal_quench_maximum(n_th, expected):
    # shared §2.2: E_N,max ~ max(0, 2 lambda - ln(1 + 2 n)); lambda = 1e-3: n = 1e-4 -> 0.0018040,
    # n = 1e-3 -> 6.0e-6 (quoted to 5 and 2 significant figures)
    data = pair(lam=1e-3, initial={"occupation": n_th}, points=4001)
    data["stages"][0]["duration_s"] = 20 / omega_of(data)
    result = simulate(protocol(data))
    assert result["log_negativity"].max() == pytest.approx(expected, rel=5e-3 if n_th == 1e-4 else 0.1)


@pytest.mark.parametrize("diameter_m, f_hz, t_s, sigma_m", [
    (200e-9, 1e5, 1e-3, 1.8961e-9), (200e-9, 1e5, 1e-2, 18.961e-9), (200e-9, 2e4, 1e-1, 84.795e-9),
    (1e-6, 1e3, 1e-1, 1.6959e-9)])
def test_free_expansion_table(diameter_m, f_hz, t_s, sigma_m):
    # shared §7 table (silica, rho = 2200): sigma(t) = sigma_0 sqrt(1 + omega^2 t^2) after release
    data = pair(distance_m=1.0, trap_hz=f_hz)
    for body in data["bodies"]:
        del body["mass_kg"]
        body["radius_m"] = diameter_m / 2
        body["material"] = "silica"
    data["stages"] = [{"label": "free", "duration_s": t_s, "trap_hz": 0.0}]
    data["time_grid"] = {"times_s": [0.0, t_s]}
    result = simulate(protocol(data))
    assert result["position_spread_m[A.x]"][-1] == pytest.approx(sigma_m, rel=1e-4)  # table to 5 digits
    m = 4 / 3 * math.pi * (diameter_m / 2) ** 3 * 2200
    w = 2 * math.pi * f_hz
    exact = math.sqrt(hbar / (2 * m * w)) * math.sqrt(1 + (w * t_s) ** 2)
    assert result["position_spread_m[A.x]"][-1] == pytest.approx(exact, rel=1e-9)


def test_quantum_optical_damping_relaxes_to_the_bath_occupation():
    # gamma (n+1) D[a] + gamma n D[a^dag]: <n>(t) = n_b + (n_0 - n_b) e^{-gamma t} exactly
    # (Breuer & Petruccione 2002, Sec. 3.4.6, from memory)
    gamma, n_b, n_0 = 0.3, 3.0, 0.5
    data = pair(distance_m=10.0, trap_hz=1.0, duration_s=20.0, points=41, initial={"occupation": n_0},
                channels={"damping_rate_per_s": gamma, "bath_occupation": n_b})
    result = simulate(protocol(data))
    t = result.times_s
    expected = n_b + (n_0 - n_b) * np.exp(-gamma * t)
    # pair coupling at 10 m for 1 kg is lambda ~ 2e-15: invisible at this tolerance
    assert np.allclose(result["phonons[A.x]"], expected, rtol=1e-9)


def test_localisation_heats_at_the_known_rate():
    # -Lambda [x, [x, rho]]: d<p^2>/dt = 2 Lambda hbar^2, i.e. Lambda hbar / (m omega) phonons per second
    # (Schlosshauer 2007, Sec. 3.4; shared §3.3-3.4), linear in t for a harmonic trap
    lam_loc, m, f = 1e20, 1e-15, 1e4
    data = pair(mass_kg=m, distance_m=1.0, trap_hz=f, duration_s=1e-2, points=11,
                channels={"localisation_per_m2_s": lam_loc})
    result = simulate(protocol(data))
    rate = lam_loc * hbar / (m * 2 * math.pi * f)
    # atol: one step spans ~63 rad of trap rotation; expm's orthogonality error there adds ~6e-13 phonons
    # per step (measured), accumulating linearly over the 10 steps
    assert np.allclose(result["phonons[A.x]"], rate * result.times_s, rtol=1e-8, atol=10 * 1e-12)


def test_heating_rate_in_phonons_per_second():
    data = pair(distance_m=10.0, trap_hz=1.0, duration_s=5.0, points=6, channels={"heating_phonons_per_s": 0.7})
    result = simulate(protocol(data))
    # definition of the phase-insensitive heating channel: d<n>/dt = Gamma (common practice)
    assert np.allclose(result["phonons[A.x]"], 0.7 * result.times_s, rtol=1e-9, atol=1e-12)


def test_brownian_motion_reaches_equipartition():
    # Caldeira-Leggett: the steady state has <p^2> = m k_B T and <x^2> = k_B T/(m omega^2), i.e.
    # <n> = k_B T/(hbar omega) - 1/2 (Breuer & Petruccione 2002, Sec. 3.6, from memory)
    f, gamma = 1.0, 0.5
    temp = 50 * hbar * 2 * math.pi * f / k_B
    data = pair(distance_m=10.0, trap_hz=f, duration_s=80.0, points=3,
                channels={"damping_rate_per_s": gamma, "damping_model": "brownian", "bath_temperature_k": temp})
    result = simulate(protocol(data))
    assert result["phonons[A.x]"][-1] == pytest.approx(50 - 0.5, rel=2e-3)  # CL is exact only to O(gamma/omega)


def test_inverted_potential_spreads_as_cosh():
    # Inverted oscillator: x(t) = x0 cosh(w t) + p0/(m w) sinh(w t); from the ground state of the trap w,
    # Var x = sigma_0^2 cosh(2 w t) (classical equations of motion, Goldstein ch. 6 style)
    data = pair(distance_m=10.0, trap_hz=1.0)
    data["stages"] = [{"label": "invert", "duration_s": 1.0, "inverted_modes": ["A.x", "B.x"]}]
    data["time_grid"] = {"points": 11}
    result = simulate(protocol(data))
    w = 2 * math.pi
    sigma0 = math.sqrt(hbar / (2 * 1.0 * w))
    assert np.allclose(result["position_spread_m[A.x]"], sigma0 * np.sqrt(np.cosh(2 * w * result.times_s)), rtol=1e-9)


def test_van_loan_matches_scipy_ode_integration():
    # Lyapunov ODE dS/dt = A S + S A^T + D integrated by scipy's DOP853 at tight tolerance
    rng = np.random.default_rng(7)
    a = rng.normal(size=(4, 4)) - 2 * np.eye(4)
    b = rng.normal(size=(4, 4))
    d = b @ b.T
    s0 = np.eye(4)
    phi, q = van_loan(a, d, 0.8)
    sol = solve_ivp(lambda t, y: (a @ y.reshape(4, 4) + y.reshape(4, 4) @ a.T + d).ravel(), (0, 0.8), s0.ravel(),
                    method="DOP853", rtol=1e-12, atol=1e-12)
    assert np.allclose(phi @ s0 @ phi.T + q, sol.y[:, -1].reshape(4, 4), rtol=1e-9, atol=1e-10)


def test_uniform_and_explicit_grids_agree():
    # the cached step propagator of a uniform grid gives the same states as explicit times
    data = pair(lam=0.01, points=41, channels={"damping_rate_per_s": 0.001, "bath_occupation": 0.5})
    uniform = simulate(protocol(data))
    data["time_grid"] = {"times_s": [0.0, float(uniform.times_s[17]), float(uniform.times_s[-1])]}
    explicit = simulate(protocol(data))
    assert explicit["log_negativity"][1] == pytest.approx(uniform["log_negativity"][17], abs=EXACT)
    assert explicit["purity"][2] == pytest.approx(uniform["purity"][-1], abs=EXACT)


def test_efficient_conditional_measurement_keeps_pure_states_pure():
    # Continuous measurement with efficiency 1 maps pure states to pure conditional states
    # (Jacobs & Steck, Contemp. Phys. 47, 279 (2006), from memory); eta = 0 recovers the unconditional state
    base = pair(lam=0.01, points=21, channels={"measurement_per_m2_s": 0.0, "measurement_efficiency": 1.0})
    m = base["bodies"][0]["mass_kg"]
    w = omega_of(base)
    strength = 0.05 * m * w / hbar  # k ell^2 = 0.05 omega: measurement rate comparable to the trap
    for body in base["bodies"]:
        body["channels"]["measurement_per_m2_s"] = strength
    cond = dict(base, solver={"conditional": True})
    result = simulate(protocol(cond))
    assert np.allclose(result["purity"], 1.0, atol=1e-9)
    uncond = simulate(protocol(base))
    assert uncond["purity"][-1] < 0.9
    for body in base["bodies"]:
        body["channels"]["measurement_efficiency"] = 0.0
    zero_eff = simulate(protocol(dict(base, solver={"conditional": True})))
    assert np.allclose(zero_eff["purity"], uncond["purity"], atol=1e-12)


def test_two_mode_result_carries_all_series_and_units():
    result = simulate(protocol(pair(lam=0.01)))
    for name in ("log_negativity", "simon", "simon_min_eigenvalue", "duan", "duan_bound", "purity",
                 "mutual_information", "position_spread_m[A.x]", "position_spread_m[B.x]"):
        assert name in result.series
    assert result.units["log_negativity"].startswith("nats")
    assert result.summary["log_negativity"]["signals_entanglement"]
    assert result["covariance"].shape == (result.times_s.size, 4, 4)
    assert np.allclose(result["covariance"][0], np.eye(4))  # product vacuum: sigma = I in vacuum units
    # PPT (Simon 2000) and E_N > 0 must agree point by point for two-mode Gaussian states
    en = result["log_negativity"]
    assert np.array_equal(en > 1e-12, result["simon_min_eigenvalue"] < -1e-12)


from hypothesis import given, settings, strategies as st  # noqa: E402


@settings(derandomize=True, max_examples=25, deadline=None)
@given(lam=st.floats(1e-4, 0.2), gamma=st.floats(0.0, 0.3), n_bath=st.floats(0.0, 5.0), n0=st.floats(0.0, 3.0),
       r=st.floats(0.0, 1.2), angle=st.floats(-3.0, 3.0), heating=st.floats(0.0, 0.5),
       model_name=st.sampled_from(["quantum_optical", "brownian"]))
def test_every_output_state_is_physical(lam, gamma, n_bath, n0, r, angle, heating, model_name):
    # Robertson-Schroedinger uncertainty sigma + i Omega >= 0 (Simon 2000, Eq. (8) form), i.e. every
    # symplectic eigenvalue >= 1 and purity <= 1, for any admissible channel mix. Caldeira-Leggett is not
    # completely positive and may violate it at low temperature (known; Breuer & Petruccione 2002), so
    # the brownian runs use k_B T >= 2 hbar omega, where its diffusion exceeds the quantum minimum.
    from gqsim.oscillators import measures as ms

    data = pair(lam=lam, periods=2.0, points=9, initial={"occupation": n0, "squeeze_r": r, "squeeze_angle_rad": angle})
    omega = omega_of(data)
    ch = {"damping_rate_per_s": gamma * omega, "heating_phonons_per_s": heating * omega, "damping_model": model_name}
    if model_name == "brownian":
        ch["bath_temperature_k"] = (2 + n_bath) * hbar * omega / k_B
    else:
        ch["bath_occupation"] = n_bath
    for body in data["bodies"]:
        body["channels"] = ch
    result = simulate(protocol(data))
    covs = result["covariance"]
    assert np.all(ms.symplectic_eigenvalues(covs) >= 1 - 1e-9)
    assert np.all(result["purity"] <= 1 + 1e-9)


def test_squeezing_per_mode():
    # a body with two active axes: x squeezed (r = 0.5, angle 0), y anti-squeezed in position (angle pi/2):
    # Var(X) = e^{-2r} x_zpf^2 and e^{+2r} x_zpf^2 (single-mode squeezed vacuum, textbook)
    data = pair(distance_m=10.0, trap_hz=1.0, duration_s=1.0, points=2)
    data["bodies"][0]["modes"] = ["x", "y"]
    data["bodies"][0]["initial"] = {"squeeze_r": [0.5, 0.5], "squeeze_angle_rad": [0.0, math.pi / 2]}
    data["time_grid"] = {"times_s": [0.0, 1.0]}
    result = simulate(protocol(data))
    zpf = math.sqrt(hbar / (2 * 1.0 * 2 * math.pi))
    assert result["position_spread_m[A.x]"][0] == pytest.approx(zpf * math.exp(-0.5), rel=1e-12)
    assert result["position_spread_m[A.y]"][0] == pytest.approx(zpf * math.exp(0.5), rel=1e-12)
    data["bodies"][0]["initial"]["squeeze_r"] = [0.5, 0.5, 0.5]
    from gqsim.errors import ProtocolError
    with pytest.raises(ProtocolError, match="one value per active mode"):
        simulate(protocol(data))
