"""Superposition family against shared/physics-references.md §1 (values DERIVED there from the
closed forms of Bose et al., PRL 119, 240401 (2017); Wootters PRL 80, 2245 (1998); Vidal & Werner
PRA 65, 032314 (2002)). The derived numbers are re-derived here from those formulas, so the
tests compare the simulator against formulas outside the project, not against its own output."""

import numpy as np
import pytest
from scipy.constants import G, hbar
from scipy.optimize import brentq

import gqsim
from gqsim.superposition.model import entangling_rate_estimate, mass_for_entangling_rate
from tests.superposition.helpers import two_body_protocol

PHASE_TOL = 1e-9  # rad; quadrature-free closed form, limited by double round-off


def _bose_phase(mass, r, t):
    """phi = G m^2 t / (hbar r) (Bose et al. 2017, main text; shared §1.2)."""
    return G * mass**2 * t / (hbar * r)


def test_inline_branch_phases_match_bose_closed_form():
    proto = two_body_protocol(style="in_line", distance=450e-6, span=250e-6, hold=2.5, points=2)
    model = gqsim.build(proto)
    phi = model.phases_rad(np.array([2.5]))[0]
    m, t = 1e-14, 2.5
    # Branch 0 = L (-x), branch 1 = R (+x): R(A)-L(B) closest (200 um), L(A)-R(B) farthest (700 um).
    expected = np.array([[_bose_phase(m, 450e-6, t), _bose_phase(m, 700e-6, t)],
                         [_bose_phase(m, 200e-6, t), _bose_phase(m, 450e-6, t)]])
    np.testing.assert_allclose(phi, expected, atol=PHASE_TOL)
    # shared §1.3 (DERIVED): phi_LL = 0.351607, phi_RL = 0.791115, phi_LR = 0.226033, theta = 0.313934.
    np.testing.assert_allclose(phi[0, 0], 0.351607, atol=1e-6)
    np.testing.assert_allclose(phi[1, 0], 0.791115, atol=1e-6)
    np.testing.assert_allclose(phi[0, 1], 0.226033, atol=1e-6)


@pytest.mark.parametrize("style, distance, theta, conc, en_bits", [
    ("in_line", 450e-6, 0.313934, 0.156323, 0.209545),        # shared §1.3 (m = 1e-14 kg)
    ("side_by_side", 200e-6, -0.593819, 0.292566, 0.370238),  # shared §1.6
])
def test_entangling_phase_and_pure_state_measures(style, distance, theta, conc, en_bits):
    proto = two_body_protocol(style=style, distance=distance, span=250e-6, hold=2.5, points=26)
    result = gqsim.simulate(proto)
    assert result.series["entangling_phase"][-1] == pytest.approx(theta, abs=1e-6)
    # Pure states: C = |sin(theta/2)| (Wootters 1998), E_N = log2(1 + C) (Vidal-Werner 2002).
    th = result.series["entangling_phase"]
    np.testing.assert_allclose(result.series["concurrence"], np.abs(np.sin(th / 2)), atol=1e-7)
    np.testing.assert_allclose(result.series["log_negativity"], np.log2(1 + np.abs(np.sin(th / 2))), atol=1e-12)
    assert result.series["concurrence"][-1] == pytest.approx(conc, abs=1e-6)
    assert result.series["log_negativity"][-1] == pytest.approx(en_bits, abs=1e-6)


def test_lab_frame_witness_inline_bose_parameters():
    # shared §1.5 (DERIVED): <XZ> = (cos dphi_RL - cos dphi_LR)/2, <YY> = (cos(dphi_RL - dphi_LR) - 1)/2,
    # |XZ + YY| = 0.121310 for m = 1e-14 kg.
    result = gqsim.simulate(two_body_protocol(points=2))
    assert result.series["witness_lab"][-1] == pytest.approx(0.121310, abs=1e-6)


def test_analytic_rates_inline_and_side_by_side():
    # shared §1.5-1.6: in-line rate 0.125574 rad/s, side-by-side 0.237527 rad/s (magnitude).
    inline = gqsim.build(two_body_protocol(style="in_line", distance=450e-6))
    side = gqsim.build(two_body_protocol(style="side_by_side", distance=200e-6))
    assert inline.analytic_entangling_rate_rad_s() == pytest.approx(0.125574, abs=1e-6)
    assert abs(side.analytic_entangling_rate_rad_s()) == pytest.approx(0.237527, abs=1e-6)
    # Closed form of the side-by-side rate (shared §1.6): 2 G m^2/hbar (1/sqrt(d^2+dx^2) - 1/d).
    d, dx, m = 200e-6, 250e-6, 1e-14
    assert side.analytic_entangling_rate_rad_s() == pytest.approx(
        2 * G * m**2 / hbar * (1 / np.hypot(d, dx) - 1 / d), rel=1e-12)


@pytest.mark.parametrize("style, distance, expected_bits", [
    ("in_line", 450e-6, 0.154972),       # shared §1.7 (DERIVED)
    ("side_by_side", 200e-6, 0.311773),  # shared §1.7 (DERIVED)
])
def test_qutrit_log_negativity(style, distance, expected_bits):
    proto = two_body_protocol(style=style, distance=distance, branch_count=3, points=2)
    result = gqsim.simulate(proto)
    assert result.series["log_negativity"][-1] == pytest.approx(expected_bits, abs=1e-6)
    # Pure states: E_N = log2[(sum of Schmidt coefficients)^2] (Vidal & Werner 2002, pure-state case).
    state = result.states[-1]
    psi = np.linalg.eigh(state)[1][:, -1].reshape(3, 3)
    schmidt = np.linalg.svd(psi, compute_uv=False)
    assert result.series["log_negativity"][-1] == pytest.approx(np.log2(schmidt.sum() ** 2), abs=1e-10)


def test_best_time_with_dephasing_side_by_side():
    # shared §1.8 (DERIVED): gamma = 0.05/s, parallel d = 200 um: t* = 7.61 s, C_max = 0.27063,
    # C(2.5 s) = 0.14759, C(5 s) = 0.23903.
    proto = two_body_protocol(style="side_by_side", distance=200e-6, hold=12.0, points=1201,
                              dephasing={"model": "constant", "rate_per_s": 0.05})
    result = gqsim.simulate(proto)
    c = result.series["concurrence"]
    assert result.summary["concurrence"]["time_of_max_s"] == pytest.approx(7.61, abs=0.01)
    assert c.max() == pytest.approx(0.27063, abs=1e-5)
    t = result.times_s
    assert c[np.argmin(abs(t - 2.5))] == pytest.approx(0.14759, abs=1e-5)
    assert c[np.argmin(abs(t - 5.0))] == pytest.approx(0.23903, abs=1e-5)


def test_dephased_concurrence_closed_form():
    # Dephased phase state: off-diagonals of CZ(theta)|++> damped by e^{-gamma t} per body; its
    # concurrence is max(0, e^{-gt}|sin(theta/2)| - (1 - e^{-2gt})/2)... check against Wootters'
    # formula evaluated by QuTiP on the same matrix instead of a hand formula.
    import qutip
    proto = two_body_protocol(style="side_by_side", distance=200e-6, hold=8.0, points=9,
                              dephasing={"model": "constant", "rate_per_s": 0.05})
    result = gqsim.simulate(proto)
    for rho, c in zip(result.states, result.series["concurrence"]):
        q = qutip.Qobj(rho, dims=[[2, 2], [2, 2]])
        assert c == pytest.approx(qutip.concurrence(q), abs=1e-7)


def _max_concurrence(gamma, omega):
    proto = two_body_protocol(style="side_by_side", distance=200e-6, hold=3 * np.pi / omega, points=400,
                              dephasing={"model": "constant", "rate_per_s": gamma},
                              extra={"output": {"measures": ["concurrence"]}})
    return gqsim.simulate(proto).series["concurrence"].max()


def test_dephasing_threshold_is_half_the_entangling_rate():
    # shared §1.8 (DERIVED): entanglement appears iff gamma < omega_ent/2, from the small-t
    # expansion C ~ (omega_ent/2 - gamma) t. Check on both sides of the threshold and by bisection.
    omega = abs(gqsim.build(two_body_protocol(style="side_by_side", distance=200e-6)).analytic_entangling_rate_rad_s())
    gamma_c = omega / 2
    assert _max_concurrence(0.9 * gamma_c, omega) > 1e-4
    assert _max_concurrence(1.1 * gamma_c, omega) < 1e-7
    found = brentq(lambda g: _max_concurrence(g, omega) - 1e-6, 0.8 * gamma_c, 1.2 * gamma_c, xtol=1e-5)
    assert found / omega == pytest.approx(0.5, abs=0.01)


def test_back_of_envelope_mass_common_practice():
    # Common practice (field sizing rule, no single source): an entangling rate G m^2 dx^2/(hbar d^3)
    # of ~1 /s at d = 1 um and dx/d = 0.1 needs m ~ 1.2e-14 kg, i.e. a density of order 1e4 kg/m^3.
    m = mass_for_entangling_rate(1.0, 0.1e-6, 1e-6)
    assert m == pytest.approx(1.2e-14, rel=0.06)
    assert entangling_rate_estimate(m, 0.1e-6, 1e-6) == pytest.approx(1.0, rel=1e-12)
    radius = 0.5e-6  # spheres that fit in d = 1 um without touching
    density = m / (4 / 3 * np.pi * radius**3)
    assert 1e4 <= density < 1e5


def test_field_phase_is_local_and_leaves_measures_unchanged():
    base = two_body_protocol(points=6)
    tilted = two_body_protocol(points=6, extra={"field": {"acceleration_m_s2": [1e-12, 0.0, 0.0]}})
    a, b = gqsim.simulate(base), gqsim.simulate(tilted)
    for name in ("log_negativity", "concurrence", "witness_optimised", "entangling_phase"):
        np.testing.assert_allclose(a.series[name], b.series[name], atol=1e-9)
    # A tiny field along the split axis does change the lab-frame witness (local phase m g dx t/hbar).
    assert not np.allclose(a.series["witness_lab"][1:], b.series["witness_lab"][1:], atol=1e-6)


def test_split_and_recombine_phase_matches_independent_quadrature():
    from scipy.integrate import quad
    extra = {"timing": {"hold_s": 1.0, "split_s": 0.4, "recombine_s": 0.3}}
    proto = two_body_protocol(points=5, extra=extra, radius=1e-6)
    model = gqsim.build(proto)
    m, d, dx = 1e-14, 450e-6, 250e-6

    def sigma(t):
        return min(t / 0.4, 1.0) if t < 1.4 else max(0.0, 1 - (t - 1.4) / 0.3)

    def rate(t, sa, sb):  # -E/hbar for branch offsets sa, sb (in units of dx/2) along x
        r = d + sigma(t) * (sb - sa) * dx / 2
        return G * m**2 / (hbar * r)

    t_end = 1.7
    expected = quad(rate, 0, t_end, args=(+1, -1), points=[0.4, 1.4], epsabs=1e-13)[0]  # R(A)-L(B)
    ours = model.phases_rad(np.array([t_end]))[0][1, 0]
    assert ours == pytest.approx(expected, abs=1e-10)


def test_earth_gravity_along_the_split_keeps_measures_exact_and_warns():
    # m g dx t / hbar ~ 6e17 rad: far beyond double precision; being local it must not touch
    # any entanglement measure, and the run must say the lab-frame witness is meaningless.
    base = gqsim.simulate(two_body_protocol(points=6))
    tilted = gqsim.simulate(two_body_protocol(points=6, extra={"field": {"acceleration_m_s2": [9.80665, 0, 0]}}))
    for name in ("log_negativity", "concurrence", "witness_optimised", "entangling_phase", "purity"):
        np.testing.assert_allclose(tilted.series[name], base.series[name], atol=1e-9)
    assert any("double precision" in note for note in tilted.notes)


def test_qudit_phase_matrix_generalises_theta():
    # For qubits the matrix entry [0, 1, 0, 1] is theta (Bose et al. 2017 definition); for
    # qutrits every entry is phi_ab' + phi_a'b - phi_ab - phi_a'b' of the 1/r phases.
    qubit = gqsim.build(two_body_protocol())
    assert qubit.entangling_phase_matrix_rad(2.5)[0, 1, 0, 1] == pytest.approx(0.313934, abs=1e-6)
    qutrit = gqsim.build(two_body_protocol(branch_count=3))
    matrix = qutrit.entangling_phase_matrix_rad(2.5)
    xs = np.array([-125e-6, 0.0, 125e-6])
    a_pos, b_pos = -225e-6 + xs, 225e-6 + xs
    phi = _bose_phase(1e-14, np.abs(a_pos[:, None] - b_pos[None, :]), 2.5)
    assert matrix[0, 2, 1, 2] == pytest.approx(phi[0, 2] + phi[2, 1] - phi[0, 1] - phi[2, 2], abs=1e-12)
    result = gqsim.simulate(two_body_protocol(branch_count=3, points=3))
    assert abs(result.summary["entangling_phase"]["largest_pair_phase_rad"]) == pytest.approx(np.abs(matrix).max())


@pytest.mark.parametrize("style", ["in_line", "side_by_side"])
def test_tiny_span_keeps_the_entangling_phase(style):
    # Oscillator-scale numbers: 0.757 mg bodies 1 mm apart, branches 6.66 fm apart. Each branch
    # phase is ~1e15 rad; theta ~ 1e-7 rad must still come out. Reference: the cancellation-free
    # closed forms of the rate, in line (G m^2/hbar) 2 dx^2/(d (d^2 - dx^2)) and side by side
    # (G m^2/hbar) 2 dx^2/(d s (d + s)), s = sqrt(d^2 + dx^2) (algebra on Bose et al. 2017, Eq. (2)).
    m, d, dx, hold = 7.57e-7, 1e-3, 6.66e-15, 3.0
    k = G * m**2 / hbar
    if style == "in_line":
        expected = k * 2 * dx**2 / (d * (d**2 - dx**2))
    else:
        s = np.hypot(d, dx)
        expected = -k * 2 * dx**2 / (d * s * (d + s))
    result = gqsim.simulate(two_body_protocol(style=style, distance=d, span=dx, mass=m, hold=hold, points=4))
    theta = result.summary["entangling_phase"]["simulated_at_hold_end_rad"]
    bound = result.summary["entangling_phase"]["roundoff_estimate_rad"]
    assert abs(theta - expected * hold) <= bound
    assert result.series["concurrence"][-1] == pytest.approx(abs(np.sin(expected * hold / 2)), rel=1e-4)
