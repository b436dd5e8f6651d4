"""Hessian model builder against the second-order expansion of -G m1 m2 / r and finite differences."""

import math
from dataclasses import dataclass

import numpy as np
import pytest
from scipy.constants import G, hbar

from gqsim.errors import PhysicsError
from gqsim.oscillators.model import build_model, radial_derivative, stiffness_matrix
from gqsim.oscillators.setup import setup_from_protocol
from gqsim.physics.potentials import NewtonianGravity
from gqsim.protocol.reader import parse_protocol
from tests.oscillators.helpers import pair

# float64 rounding of Hessian sums of O(G m^2 / d^3) terms
REL = 1e-12


def model_of(data):
    return build_model(setup_from_protocol(parse_protocol(data).data))


def test_coupling_along_axis_matches_second_order_expansion():
    # shared physics-references §2.1 (elementary expansion; Krisnanda et al. 2020, from memory):
    # H_int = +2 G m1 m2 x1 x2 / d^3, shifts -G m1 m2 x^2 / d^3 (stiffness -2 G m1 m2 / d^3)
    m, d = 1e-6, 1e-3
    model = model_of(pair(mass_kg=m, distance_m=d, trap_hz=1.0))
    k = G * m * m / d**3
    assert model.pair_stiffness_n_per_m[0, 1] == pytest.approx(2 * k, rel=REL)
    assert model.pair_stiffness_n_per_m[0, 0] == pytest.approx(-2 * k, rel=REL)


def test_coupling_across_axis_matches_second_order_expansion():
    # shared §2.1 / issue 3: across the axis the coupling is -G m1 m2 x1 x2 / d^3 and the trap stiffens
    m, d = 1e-6, 1e-3
    model = model_of(pair(mass_kg=m, distance_m=d, trap_hz=1.0, axis="y", mode="x"))
    k = G * m * m / d**3
    assert model.pair_stiffness_n_per_m[0, 1] == pytest.approx(-k, rel=REL)
    assert model.pair_stiffness_n_per_m[0, 0] == pytest.approx(k, rel=REL)


def test_shared_check_values_for_a_milligram_pair():
    # shared §2.1 [DERIVED]: m = 1 mg, d = 1 mm, omega = 2 pi x 1 Hz: lambda = 1.6906e-9, g = 1.0622e-8 rad/s,
    # x_zpf = 2.897e-15 m (quoted to 5 and 4 significant figures)
    model = model_of(pair(mass_kg=1e-6, distance_m=1e-3, trap_hz=1.0))
    assert model.coupling_rad_s[0, 1] == pytest.approx(1.0622e-8, rel=5e-5)
    assert model.coupling_rad_s[0, 1] / (2 * math.pi) == pytest.approx(1.6906e-9, rel=5e-5)
    assert model.scales.zero_point_m[0] == pytest.approx(2.897e-15, rel=2e-4)


@dataclass(frozen=True, kw_only=True)
class ScreenedAttraction:
    """A non-gravitational central potential V = -c exp(-r/L)/r to test the plug-in interface."""

    c: float
    length_m: float
    label: str = "screened"

    def energy_j(self, r):
        r = np.asarray(r, dtype=float)
        return -self.c * np.exp(-r / self.length_m) / r

    def radial_derivative(self, r, order):
        r = float(r)
        lam = self.length_m
        e = math.exp(-r / lam)
        if order == 1:
            return self.c * e * (1 / r**2 + 1 / (lam * r))
        if order == 2:
            return -self.c * e * (2 / r**3 + 2 / (lam * r**2) + 1 / (lam**2 * r))
        raise ValueError(order)


def test_hessian_matches_finite_differences_of_the_energy_for_any_pair_potential():
    # The Hessian of sum_pairs V(|r_b + u_b - r_a - u_a|) by central finite differences (numerical calculus,
    # independent of the closed-form Hessian), three bodies in general position, all axes active.
    data = pair(mass_kg=1.0, distance_m=0.1, trap_hz=1.0)
    data["bodies"].append({"label": "C", "mass_kg": 2.0, "position_m": [0.03, 0.08, -0.05], "trap_hz": 1.0})
    for body in data["bodies"]:
        body["modes"] = ["x", "y", "z"]
    setup = setup_from_protocol(parse_protocol(data).data)
    factory = lambda a, b: ScreenedAttraction(c=a.mass_kg * b.mass_kg, length_m=0.07)  # noqa: E731
    k, force = stiffness_matrix(setup.bodies, [factory])
    pos = np.array([b.position_m for b in setup.bodies])

    def energy(u):
        disp = pos + u.reshape(3, 3)
        total = 0.0
        for i in range(3):
            for j in range(i + 1, 3):
                total += factory(setup.bodies[i], setup.bodies[j]).energy_j(np.linalg.norm(disp[j] - disp[i]))
        return total

    h = 1e-4
    num = np.zeros((9, 9))
    grad = np.zeros(9)
    for i in range(9):
        ei = np.zeros(9)
        ei[i] = h
        grad[i] = (energy(ei) - energy(-ei)) / (2 * h)
        for j in range(9):
            ej = np.zeros(9)
            ej[j] = h
            num[i, j] = (energy(ei + ej) - energy(ei - ej) - energy(-ei + ej) + energy(-ei - ej)) / (4 * h * h)
    # central differences: error O(h^2 V''''/V'') ~ (h / 0.05)^2 ~ 4e-6 relative
    assert np.allclose(k, num, rtol=1e-4, atol=1e-4 * np.max(np.abs(num)))
    assert np.allclose(force, -grad, rtol=1e-4, atol=1e-4 * np.max(np.abs(grad)))


def test_gravity_higher_radial_derivatives():
    # d^n/dr^n (-k/r) = (-1)^(n+1) n! k / r^(n+1) (elementary calculus); check against finite differences
    pot = NewtonianGravity(mass_a_kg=2.0, mass_b_kg=3.0)
    r, h = 0.5, 1e-3
    e = lambda x: float(pot.energy_j(x))  # noqa: E731
    third = (e(r + 2 * h) - 2 * e(r + h) + 2 * e(r - h) - e(r - 2 * h)) / (2 * h**3)
    fourth = (e(r + 2 * h) - 4 * e(r + h) + 6 * e(r) - 4 * e(r - h) + e(r - 2 * h)) / h**4
    assert radial_derivative(pot, r, 3) == pytest.approx(third, rel=1e-4)
    assert radial_derivative(pot, r, 4) == pytest.approx(fourth, rel=1e-4)


def test_static_displacement_is_force_over_stiffness():
    # Hooke's law with the pair force G m^2 / d^2 pulling B toward A and A toward B (Newton)
    m, d, f = 1.0, 0.05, 0.01
    model = model_of(pair(mass_kg=m, distance_m=d, trap_hz=f))
    force = G * m * m / d**2
    total = m * (2 * math.pi * f) ** 2 * np.eye(2) + model.pair_stiffness_n_per_m
    expected = np.linalg.solve(total, [force, -force])
    assert np.allclose(model.static_displacement_m, expected, rtol=REL)
    assert model.static_displacement_m[0] > 0 > model.static_displacement_m[1]


def test_unstable_mode_is_an_error_naming_the_mode():
    # lambda > 1/2 makes the shifted stiffness m omega^2 - 2 G m^2 / d^3 negative
    data = pair(lam=0.6)
    with pytest.raises(PhysicsError, match=r"mode A\.x"):
        model_of(data)


def test_declared_inverted_stage_is_accepted():
    data = pair(lam=1e-3)
    data["stages"] = [{"label": "hold", "duration_s": 1.0},
                      {"label": "invert", "duration_s": 0.1, "inverted_modes": ["A.x", "B.x"]}]
    model = model_of(data)
    assert model.stages[1].omega_squared_rad2_s2[0] < 0


def test_scaling_makes_the_coupling_dimensionless_lambda():
    # the x-x block of H in units of hbar omega: off-diagonal = kappa ell^2 / (hbar omega) = 2 lambda
    lam = 1e-9
    model = model_of(pair(mass_kg=1e-6, distance_m=1e-3, lam=lam))
    h = model.stages[0].hamiltonian
    assert h[0, 2] == pytest.approx(2 * lam, rel=1e-9)
    assert h[0, 0] == pytest.approx(1 - 2 * lam, rel=1e-12)
    assert h[1, 1] == 1.0
    assert model.scales.length_m[0] == pytest.approx(math.sqrt(hbar / (1e-6 * model.scales.omega_ref_rad_s[0])))


def test_coulomb_pair_through_the_interactions_table():
    # [interactions] include = ["gravity", "coulomb"] (gqsim.physics.electromagnetic): along the axis the Coulomb
    # Hessian gives |g| = q^2 / (4 pi eps0 d^3 m omega) (Coulomb's law, Jackson 1999 ch. 1; the pair-Hessian
    # expansion above); gravity adds 2 G m^2 x_zpf^2/(hbar d^3), negligible for ions
    from scipy.constants import e, epsilon_0

    m, d, f = 6.6359e-26, 50e-6, 1e6
    data = pair(mass_kg=m, distance_m=d, trap_hz=f)
    for body in data["bodies"]:
        body["charge_c"] = e
    data["interactions"] = {"include": ["gravity", "coulomb"]}
    model = model_of(data)
    omega = 2 * math.pi * f
    coulomb = e**2 / (4 * math.pi * epsilon_0 * d**3 * m * omega)
    gravity = G * m / (omega * d**3)
    assert abs(model.coupling_rad_s[0, 1]) == pytest.approx(coulomb - gravity, rel=1e-9)
    assert model.potentials == ("gravity", "coulomb")


def test_fixed_dipoles_couple_transverse_modes_through_their_full_hessian():
    """Fixed permanent dipoles (Eq. (4.26) of Jackson 1999, from memory) are orientation dependent:
    the stiffness between a mode along the separation (A.x) and one across it (B.y), and the
    static forces, must be the second and first derivatives of U(R) in the separation vector.
    Checked against central differences of the total energy (gravity + dipole-dipole); the
    central-potential form V'' n n^T + V'/d (I - n n^T) misses the angular terms."""
    from gqsim.oscillators.run import build
    from gqsim.physics.potentials import pair_energy_at

    m, d, f = 1e-12, 30e-6, 2e3
    data = pair(mass_kg=m, distance_m=d, trap_hz=f)
    data["bodies"][1]["modes"] = ["y"]
    dipoles = ([2e-23, 1e-23, 0.0], [0.5e-23, -1.5e-23, 1e-23])
    for body, p in zip(data["bodies"], dipoles):
        body["dipole_c_m"] = p
    data["interactions"] = {"include": ["gravity", "dipole_dipole"]}
    model = build(parse_protocol(data))
    from gqsim.physics.electromagnetic import DipoleDipole

    dipole = DipoleDipole(dipole_a_c_m=dipoles[0], dipole_b_c_m=dipoles[1])
    gravity = NewtonianGravity(mass_a_kg=m, mass_b_kg=m)

    def energy(vec):
        return float(pair_energy_at(gravity, vec) + pair_energy_at(dipole, vec))

    sep, h, eye = np.array([d, 0.0, 0.0]), 1e-4 * d, np.eye(3)
    grad = np.array([(energy(sep + h * e) - energy(sep - h * e)) / (2 * h) for e in eye])
    hess = np.array([[(energy(sep + h * (ei + ej)) - energy(sep + h * (ei - ej)) - energy(sep - h * (ei - ej))
                       + energy(sep - h * (ei + ej))) / (4 * h * h) for ej in eye] for ei in eye])
    # modes A.x (u_a along x) and B.y (u_b along y); R = r_b - r_a: K_aa = H_xx, K_bb = H_yy, K_ab = -H_xy
    expected = np.array([[hess[0, 0], -hess[0, 1]], [-hess[1, 0], hess[1, 1]]])
    scale = np.abs(expected).max()
    np.testing.assert_allclose(model.pair_stiffness_n_per_m, expected, rtol=0, atol=1e-5 * scale)
    assert abs(expected[0, 1]) > 1e-3 * scale  # the transverse coupling is really there
    np.testing.assert_allclose(model.static_force_n, [grad[0], -grad[1]], rtol=0, atol=1e-5 * np.abs(grad).max())
    # beyond second order the model expands in |R| alone, which these potentials are not
    data["solver"] = {"engine": "fock", "anharmonic_order": 4}
    with pytest.raises(PhysicsError, match="orientation-dependent"):
        build(parse_protocol(data))
