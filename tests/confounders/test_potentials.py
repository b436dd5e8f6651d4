"""Confounder pair potentials against published formulas, analytic limits and finite differences."""

import math

import numpy as np
import pytest
from scipy.constants import G, c, e, epsilon_0, hbar
from scipy.constants import k as k_B
from scipy.integrate import quad

from gqsim.physics.electromagnetic import (
    ChargeInducedDipole,
    Coulomb,
    DipoleDipole,
    DipoleInducedDipole,
    LondonVanDerWaals,
    RetardedCasimirPolder,
    ThermalCasimirPolder,
    casimir_polder_gravity_crossover_m,
    clausius_mossotti_factor,
    pair_energy_at,
    pair_hessian_at,
    polarisability_volume_m3,
    smallest_separation_below_m,
)
from gqsim.errors import PhysicsError, ProtocolError
from gqsim.physics.potentials import NewtonianGravity, pair_gradient_at

# Check values are [DERIVED] in ../shared/physics-references.md and quoted to 4 significant
# figures there, so they are compared at half a unit of the 4th figure.
QUOTED_4SF = 5e-4
# Central differences with step h = 1e-4 r have truncation error ~ (h/r)^2 * n^2 / 6 for r^-n
# (n <= 9 here) and round-off ~ 1e-16 r/h: both far below this.
FD_RTOL = 1e-5
ROUNDING = 1e-12  # pure re-arrangements of the same float formula

DIAMOND_EPS, DIAMOND_RHO = 5.7, 3510.0


def diamond_pair(radius_m=1e-6):
    return RetardedCasimirPolder(radius_a_m=radius_m, radius_b_m=radius_m, permittivity_a=DIAMOND_EPS,
                                 permittivity_b=DIAMOND_EPS)


def sphere_mass(radius_m, rho=DIAMOND_RHO):
    return 4.0 / 3.0 * math.pi * radius_m**3 * rho


# ----------------------------------------------------------------------------- Casimir-Polder

def test_casimir_polder_is_the_1948_atom_atom_law_with_clausius_mossotti():
    # Casimir & Polder, Phys. Rev. 73, 360 (1948), abstract: U = -23 hbar c a1 a2 / (4 pi R^7);
    # a = R^3 (eps-1)/(eps+2): Jackson 3rd ed. Eq. (4.56) (from memory).
    r_a, r_b, eps_a, eps_b = 1e-6, 2e-6, 5.7, 3.8
    pot = RetardedCasimirPolder(radius_a_m=r_a, radius_b_m=r_b, permittivity_a=eps_a, permittivity_b=eps_b)
    alpha_a = r_a**3 * (eps_a - 1) / (eps_a + 2)
    alpha_b = r_b**3 * (eps_b - 1) / (eps_b + 2)
    d = np.array([50e-6, 200e-6, 1e-3])
    expected = -23 * hbar * c * alpha_a * alpha_b / (4 * math.pi * d**7)
    np.testing.assert_allclose(pot.energy_j(d), expected, rtol=ROUNDING)


def test_casimir_polder_check_values_of_shared_references_section_4_1():
    # physics-references §4.1 [DERIVED]: diamond R = 1 um at 200 um: U_CP = -1.684e-36 J,
    # U_grav = -7.214e-35 J, ratio 0.02335; 1.494 at 100 um; 0.0505 with m = 1e-14 kg.
    cp = diamond_pair()
    m = sphere_mass(1e-6)
    grav = NewtonianGravity(mass_a_kg=m, mass_b_kg=m)
    assert cp.energy_j(200e-6) == pytest.approx(-1.684e-36, rel=QUOTED_4SF)
    assert grav.energy_j(200e-6) == pytest.approx(-7.214e-35, rel=QUOTED_4SF)
    assert cp.energy_j(200e-6) / grav.energy_j(200e-6) == pytest.approx(0.02335, rel=QUOTED_4SF)
    assert cp.energy_j(100e-6) / grav.energy_j(100e-6) == pytest.approx(1.494, rel=QUOTED_4SF)
    light = NewtonianGravity(mass_a_kg=1e-14, mass_b_kg=1e-14)
    assert cp.energy_j(200e-6) / light.energy_j(200e-6) == pytest.approx(0.0505, rel=2 * QUOTED_4SF)


@pytest.mark.parametrize("eps, rho, f, quoted_um", [
    (5.7, 3510.0, 0.1, 156.9),   # §4.1: diamond, f = 0.1 (van de Kamp 2020 quote ~157 um, from memory)
    (5.7, 3500.0, 0.1, 157.1),   # §4.1: diamond with rho = 3500
    (5.7, 3510.0, 0.01, 230.4),  # §4.1: diamond, f = 0.01
    (3.8, 2200.0, 0.1, 169.6),   # §4.1: silica
])
def test_safe_gap_matches_shared_references(eps, rho, f, quoted_um):
    got = casimir_polder_gravity_crossover_m(relative_permittivity=eps, density_kg_m3=rho, fraction=f)
    assert got * 1e6 == pytest.approx(quoted_um, rel=QUOTED_4SF)


@pytest.mark.parametrize("radius_m", [0.3e-6, 1e-6, 5e-6])
def test_safe_gap_is_radius_independent_and_agrees_with_root_finding(radius_m):
    # Closed form (derived from the CP and Newton laws) against Brent root finding on the two
    # potential objects: independent routes to the same separation.
    closed = casimir_polder_gravity_crossover_m(relative_permittivity=DIAMOND_EPS, density_kg_m3=DIAMOND_RHO,
                                                fraction=0.1)
    m = sphere_mass(radius_m)
    found = smallest_separation_below_m(diamond_pair(radius_m), NewtonianGravity(mass_a_kg=m, mass_b_kg=m),
                                        fraction=0.1)
    assert found == pytest.approx(closed, rel=1e-9)  # brentq run to rtol 1e-12


def _general_casimir_polder(r, alpha_a, alpha_b, w_a, w_b):
    """Full zero-temperature dispersion energy for single-resonance polarisabilities
    a(i xi) = a/(1 + xi^2/W^2): U = -(hbar/(pi r^6)) int_0^inf a_A a_B e^{-2y}(3+6y+5y^2+2y^3+y^4) d xi,
    y = xi r/c (Casimir & Polder 1948; this polynomial form from memory, e.g. Craig &
    Thirunamachandran, Molecular QED, 1984)."""
    def integrand(x):  # x = y, d xi = (c/r) dx
        xi = x * c / r
        return (alpha_a / (1 + (xi / w_a) ** 2)) * (alpha_b / (1 + (xi / w_b) ** 2)) * math.exp(-2 * x) * (
            3 + 6 * x + 5 * x**2 + 2 * x**3 + x**4)
    value, _ = quad(integrand, 0, np.inf, epsabs=0, epsrel=1e-11, limit=400)
    return -hbar * c / (math.pi * r**7) * value


def test_retarded_and_london_laws_are_the_two_limits_of_the_general_casimir_polder_energy():
    r_a, r_b, eps_a, eps_b, w_a, w_b = 1e-6, 2e-6, 5.7, 3.8, 2e16, 3e16
    london = LondonVanDerWaals(radius_a_m=r_a, radius_b_m=r_b, permittivity_a=eps_a, permittivity_b=eps_b,
                               resonance_a_rad_s=w_a, resonance_b_rad_s=w_b)
    retarded = RetardedCasimirPolder(radius_a_m=r_a, radius_b_m=r_b, permittivity_a=eps_a, permittivity_b=eps_b)
    alpha_a, alpha_b = polarisability_volume_m3(r_a, eps_a), polarisability_volume_m3(r_b, eps_b)
    # The first corrections to either limit are O((r W/c)^2) resp. O((c/(r W))^2) = 1e-6 here;
    # 1e-4 leaves a margin of 100.
    limit_rtol = 1e-4
    near = 1e-3 * london.crossover_m
    far = 1e3 * c / min(w_a, w_b)
    assert london.energy_j(near) == pytest.approx(_general_casimir_polder(near, alpha_a, alpha_b, w_a, w_b),
                                                  rel=limit_rtol)
    assert retarded.energy_j(far) == pytest.approx(_general_casimir_polder(far, alpha_a, alpha_b, w_a, w_b),
                                                   rel=limit_rtol)
    # ... and at the crossover neither limit holds (the check can fail).
    mid = london.crossover_m
    full = _general_casimir_polder(mid, alpha_a, alpha_b, w_a, w_b)
    assert abs(london.energy_j(mid) / full - 1) > 0.1
    assert abs(retarded.energy_j(mid) / full - 1) > 0.1


def test_london_formula_for_identical_spheres():
    # London (1937), identical oscillators: U = -(3/4) hbar W a^2 / r^6 (from memory).
    pot = LondonVanDerWaals(radius_a_m=1e-8, radius_b_m=1e-8, permittivity_a=3.8, permittivity_b=3.8,
                            resonance_a_rad_s=1.5e16, resonance_b_rad_s=1.5e16)
    a = polarisability_volume_m3(1e-8, 3.8)
    assert pot.energy_j(5e-8) == pytest.approx(-0.75 * hbar * 1.5e16 * a**2 / 5e-8**6, rel=ROUNDING)


# ----------------------------------------------------------------------------- Coulomb and dipoles

def test_coulomb_one_elementary_charge_each_against_gravity():
    # §4.2 [DERIVED]: e^2/(4 pi eps0 * 200 um) = 1.1535e-24 J, 3.46e10 x G m^2/d for m = 1e-14 kg.
    pot = Coulomb(charge_a_c=e, charge_b_c=e)
    grav = NewtonianGravity(mass_a_kg=1e-14, mass_b_kg=1e-14)
    assert pot.energy_j(200e-6) == pytest.approx(1.1535e-24, rel=QUOTED_4SF)
    assert pot.energy_j(200e-6) / abs(grav.energy_j(200e-6)) == pytest.approx(3.46e10, rel=2e-3)  # 3 s.f.
    # Coulomb's law: opposite charges attract, U < 0.
    assert Coulomb(charge_a_c=e, charge_b_c=-2 * e).energy_j(1e-3) == pytest.approx(
        -2 * e**2 / (4 * math.pi * epsilon_0 * 1e-3), rel=ROUNDING)


def test_coulomb_has_no_safe_distance():
    # Both fall as 1/r, so the ratio never drops: a one-line PhysicsError, not a number.
    with pytest.raises(PhysicsError, match="no safe distance"):
        smallest_separation_below_m(Coulomb(charge_a_c=e, charge_b_c=e),
                                    NewtonianGravity(mass_a_kg=1e-14, mass_b_kg=1e-14))


def test_charge_induced_dipole_is_half_alpha_e_squared():
    # Induced dipole energy -(1/2) alpha_SI E^2 with alpha_SI = 4 pi eps0 a and E = q/(4 pi eps0 r^2)
    # (Jackson Sect. 4.7, from memory), one term per charged body; a conductor has a = R^3.
    r, q, radius = 50e-6, 3 * e, 2e-6
    pot = ChargeInducedDipole(charge_a_c=q, charge_b_c=0.0, radius_a_m=radius, radius_b_m=radius,
                              permittivity_a=3.8, permittivity_b=3.8)
    alpha_si = 4 * math.pi * epsilon_0 * radius**3 * (3.8 - 1) / (3.8 + 2)
    field = q / (4 * math.pi * epsilon_0 * r**2)
    assert pot.energy_j(r) == pytest.approx(-0.5 * alpha_si * field**2, rel=ROUNDING)
    metal = ChargeInducedDipole(charge_a_c=q, charge_b_c=0.0, radius_a_m=radius, radius_b_m=radius,
                                permittivity_a=None, permittivity_b=None)
    assert metal.energy_j(r) == pytest.approx(-0.5 * 4 * math.pi * epsilon_0 * radius**3 * field**2, rel=ROUNDING)
    assert clausius_mossotti_factor(None) == 1.0


def test_dipole_dipole_head_to_tail_and_side_by_side():
    # §4.2: p = 1.602e-23 C m (illustrative), head-to-tail at 200 um: |U| = 2 p^2/(4 pi eps0 d^3) = 5.77e-25 J.
    # Jackson Eq. (4.26) (from memory): head-to-tail attracts (U < 0), parallel side by side repels.
    p = 1.602e-23
    along = DipoleDipole(dipole_a_c_m=[p, 0, 0], dipole_b_c_m=[p, 0, 0])
    assert along.energy_j(200e-6) == pytest.approx(-5.77e-25, rel=1e-3)  # quoted to 3 s.f.
    beside = DipoleDipole(dipole_a_c_m=[0, 0, p], dipole_b_c_m=[0, 0, p])
    assert beside.energy_j(200e-6) == pytest.approx(p**2 / (4 * math.pi * epsilon_0 * 200e-6**3), rel=ROUNDING)
    # The vector form agrees with the radial one along the axis and is even in the separation.
    vec = np.array([[200e-6, 0, 0], [-200e-6, 0, 0]])
    np.testing.assert_allclose(along.energy_from_vector_j(vec), along.energy_j(200e-6), rtol=ROUNDING)
    # Rotating the separation by 90 degrees turns head-to-tail into side-by-side.
    assert along.energy_from_vector_j([0, 200e-6, 0]) == pytest.approx(
        p**2 / (4 * math.pi * epsilon_0 * 200e-6**3), rel=ROUNDING)


# ----------------------------------------------------------------------------- derivatives and Hessians

RADIAL_POTENTIALS = [
    NewtonianGravity(mass_a_kg=1e-14, mass_b_kg=2e-14),
    diamond_pair(),
    LondonVanDerWaals(radius_a_m=1e-6, radius_b_m=1e-6, permittivity_a=5.7, permittivity_b=5.7,
                      resonance_a_rad_s=2e16, resonance_b_rad_s=3e16),
    Coulomb(charge_a_c=e, charge_b_c=-3 * e),
    ChargeInducedDipole(charge_a_c=e, charge_b_c=2 * e, radius_a_m=1e-6, radius_b_m=2e-6,
                        permittivity_a=5.7, permittivity_b=None),
    DipoleDipole(dipole_a_c_m=[1e-23, 2e-23, 0], dipole_b_c_m=[0, 1e-23, -3e-23]),
    DipoleInducedDipole(dipole_a_c_m=[1e-23, -2e-23, 0.5e-23], dipole_b_c_m=[0, 0, 3e-23], radius_a_m=1e-6,
                        radius_b_m=2e-6, permittivity_a=5.7, permittivity_b=None),
]


@pytest.mark.parametrize("pot", RADIAL_POTENTIALS, ids=lambda p: p.label)
def test_radial_derivatives_match_finite_differences_of_the_energy(pot):
    r = np.array([30e-6, 200e-6, 1.5e-3])
    h = 1e-4 * r
    first = (pot.energy_j(r + h) - pot.energy_j(r - h)) / (2 * h)
    second = (pot.energy_j(r + h) - 2 * pot.energy_j(r) + pot.energy_j(r - h)) / h**2
    np.testing.assert_allclose(pot.radial_derivative(r, 1), first, rtol=FD_RTOL)
    # The second difference loses ~ eps/(h/r)^2 = 1e-8 to cancellation: still far below FD_RTOL.
    np.testing.assert_allclose(pot.radial_derivative(r, 2), second, rtol=FD_RTOL)
    with pytest.raises(ValueError, match="order"):
        pot.radial_derivative(r, 5)


@pytest.mark.parametrize("pot", RADIAL_POTENTIALS[1:], ids=lambda p: p.label)
def test_third_and_fourth_derivatives_match_differences_of_the_lower_ones(pot):
    # Orders 3 and 4 (for the oscillators' anharmonic terms) by central differences of orders 2 and 3.
    r = np.array([30e-6, 200e-6, 1.5e-3])
    h = 1e-4 * r
    for order in (3, 4):
        fd = (pot.radial_derivative(r + h, order - 1) - pot.radial_derivative(r - h, order - 1)) / (2 * h)
        np.testing.assert_allclose(pot.radial_derivative(r, order), fd, rtol=FD_RTOL)


def _fd_hessian(pot, vec, rel=1e-4):
    h = rel * np.linalg.norm(vec)
    out = np.zeros((3, 3))
    eye = np.eye(3) * h
    for i in range(3):
        for j in range(3):
            out[i, j] = (pair_energy_at(pot, vec + eye[i] + eye[j]) - pair_energy_at(pot, vec + eye[i] - eye[j])
                         - pair_energy_at(pot, vec - eye[i] + eye[j])
                         + pair_energy_at(pot, vec - eye[i] - eye[j])) / (4 * h * h)
    return out


@pytest.mark.parametrize("pot", RADIAL_POTENTIALS, ids=lambda p: p.label)
def test_hessian_matches_finite_differences_of_the_energy(pot):
    # The check: the Hessian each model builder uses against differences of U itself.
    for vec in (np.array([200e-6, 0.0, 0.0]), np.array([120e-6, -80e-6, 45e-6])):
        fd = _fd_hessian(pot, vec)
        scale = np.max(np.abs(fd))
        np.testing.assert_allclose(pair_hessian_at(pot, vec), fd, rtol=0, atol=FD_RTOL * scale)


@pytest.mark.parametrize("pot", RADIAL_POTENTIALS, ids=lambda p: p.label)
def test_gradient_matches_finite_differences_of_the_energy(pot):
    # The force the oscillator model uses (-gradient) against central differences of U itself;
    # for fixed dipoles the off-axis components are the orientation terms a radial form misses.
    for vec in (np.array([200e-6, 0.0, 0.0]), np.array([120e-6, -80e-6, 45e-6])):
        h = 1e-4 * np.linalg.norm(vec)
        fd = np.array([(pair_energy_at(pot, vec + h * e) - pair_energy_at(pot, vec - h * e)) / (2 * h)
                       for e in np.eye(3)])
        np.testing.assert_allclose(pair_gradient_at(pot, vec), fd, rtol=0, atol=FD_RTOL * np.max(np.abs(fd)))
    stack = np.array([[200e-6, 0, 0], [0, 150e-6, 10e-6]])
    np.testing.assert_allclose(pair_gradient_at(pot, stack)[1], pair_gradient_at(pot, stack[1]), rtol=ROUNDING)


def test_hessian_broadcasts_over_stacks_of_vectors():
    pot = RADIAL_POTENTIALS[-1]
    stack = np.array([[200e-6, 0, 0], [0, 150e-6, 10e-6]])
    out = pair_hessian_at(pot, stack)
    assert out.shape == (2, 3, 3)
    np.testing.assert_allclose(out[1], pair_hessian_at(pot, stack[1]), rtol=ROUNDING)
    np.testing.assert_allclose(out[1], out[1].T, rtol=ROUNDING)  # mixed partials commute


# ----------------------------------------------------------------------------- bad input

@pytest.mark.parametrize("make, field", [
    (lambda: diamond_pair(-1e-6), "radius_m"),
    (lambda: RetardedCasimirPolder(radius_a_m=1e-6, radius_b_m=1e-6, permittivity_a=-2.0, permittivity_b=5.7),
     "relative_permittivity"),
    (lambda: RetardedCasimirPolder(radius_a_m=1e-6, radius_b_m=1e-6, permittivity_a=0.5, permittivity_b=5.7),
     "relative_permittivity"),
    (lambda: Coulomb(charge_a_c=float("nan"), charge_b_c=e), "charge_a_c"),
    (lambda: DipoleDipole(dipole_a_c_m=1e-23, dipole_b_c_m=[0, 0, 1e-23]), "dipole_a_c_m"),
    (lambda: DipoleDipole(dipole_a_c_m=[1e-23, 0], dipole_b_c_m=[0, 0, 1e-23]), "dipole_a_c_m"),
    (lambda: LondonVanDerWaals(radius_a_m=1e-6, radius_b_m=1e-6, permittivity_a=5.7, permittivity_b=5.7,
                               resonance_a_rad_s=-1.0, resonance_b_rad_s=1e16), "resonance_a_rad_s"),
    (lambda: casimir_polder_gravity_crossover_m(relative_permittivity=5.7, density_kg_m3=-1.0), "density_kg_m3"),
    (lambda: casimir_polder_gravity_crossover_m(relative_permittivity=5.7, density_kg_m3=3510, fraction=1.5),
     "share_limit"),
])
def test_bad_input_gives_one_line_error_naming_the_field(make, field):
    with pytest.raises(ProtocolError) as info:
        make()
    assert field in str(info.value) and "\n" not in str(info.value)


def test_dipole_without_orientation_says_so():
    with pytest.raises(ProtocolError, match="orientation"):
        DipoleDipole(dipole_a_c_m=1e-23, dipole_b_c_m=1e-23)


def test_conductors_and_non_positive_separations_are_physics_errors():
    with pytest.raises(PhysicsError, match="conducting"):
        RetardedCasimirPolder(radius_a_m=1e-6, radius_b_m=1e-6, permittivity_a=None, permittivity_b=5.7)
    with pytest.raises(PhysicsError, match="separation_m"):
        diamond_pair().energy_j(np.array([1e-4, 0.0]))


# ----------------------------------------------------------------------------- finite temperature

def _thermal(temperature_k):
    return ThermalCasimirPolder(radius_a_m=1e-6, radius_b_m=2e-6, permittivity_a=5.7, permittivity_b=3.8,
                                temperature_k=temperature_k)


def test_thermal_casimir_polder_limits():
    # T -> 0: the Matsubara sum becomes the frequency integral, i.e. the 1948 law (Euler-Maclaurin
    # error O(a^6) with a = 2 pi r/(thermal length) = 0.05 here: < 1e-7).
    cold = _thermal(0.01)
    r = 0.05 * cold.thermal_length_m / (2 * math.pi)
    zero_t = RetardedCasimirPolder(radius_a_m=1e-6, radius_b_m=2e-6, permittivity_a=5.7, permittivity_b=3.8)
    assert cold.energy_j(r) == pytest.approx(zero_t.energy_j(r), rel=1e-7)
    # r >> hbar c/(k_B T): only the n = 0 term survives, U = -3 k_B T a_A a_B / r^6 (classical
    # zero-frequency limit of Lifshitz theory, from memory); the n = 1 term is ~ e^{-2a} a^4 = 1e-19.
    hot = _thermal(300.0)
    r = 20 * hot.thermal_length_m
    alphas = polarisability_volume_m3(1e-6, 5.7) * polarisability_volume_m3(2e-6, 3.8)
    assert hot.energy_j(r) == pytest.approx(-3 * k_B * 300.0 * alphas / r**6, rel=1e-12)
    # In between the thermal energy is larger than either limit alone would suggest (more attraction).
    mid = _thermal(4.0)
    r = mid.thermal_length_m
    assert mid.energy_j(r) < zero_t.energy_j(r) < 0


@pytest.mark.parametrize("temperature_k", [0.05, 4.0, 300.0])
def test_thermal_derivatives_match_finite_differences(temperature_k):
    pot = _thermal(temperature_k)
    r = np.array([20e-6, 200e-6, 2e-3])
    h = 1e-4 * r
    first = (pot.energy_j(r + h) - pot.energy_j(r - h)) / (2 * h)
    second = (pot.energy_j(r + h) - 2 * pot.energy_j(r) + pot.energy_j(r - h)) / h**2
    np.testing.assert_allclose(pot.radial_derivative(r, 1), first, rtol=FD_RTOL)
    np.testing.assert_allclose(pot.radial_derivative(r, 2), second, rtol=FD_RTOL)
    with pytest.raises(ValueError, match="order"):
        pot.radial_derivative(r, 3)


def test_room_temperature_field_moves_the_safe_distance_out():
    # At 300 K the classical term (~ k_B T / r^6) exceeds the zero-temperature law (~ hbar c / r^7)
    # beyond hbar c/(k_B T) = 7.6 um, so the CP/gravity crossover moves out; the thermal length
    # check is the Lifshitz-theory regime statement (from memory).
    m = sphere_mass(1e-6)
    grav = NewtonianGravity(mass_a_kg=m, mass_b_kg=m)
    hot = ThermalCasimirPolder(radius_a_m=1e-6, radius_b_m=1e-6, permittivity_a=DIAMOND_EPS,
                               permittivity_b=DIAMOND_EPS, temperature_k=300.0)
    d_cold = casimir_polder_gravity_crossover_m(relative_permittivity=DIAMOND_EPS, density_kg_m3=DIAMOND_RHO)
    d_hot = smallest_separation_below_m(hot, grav, fraction=0.1)
    # In the classical regime the crossover is closed form too: 3 k_B T a^2/d^5 = f G m^2.
    a = polarisability_volume_m3(1e-6, DIAMOND_EPS)
    assert d_hot == pytest.approx((3 * k_B * 300.0 * a**2 / (0.1 * G * m * m)) ** 0.2, rel=1e-9)
    assert d_hot > 2 * d_cold


def test_every_cited_key_resolves_in_the_reference_registry():
    import re

    import gqsim.physics.electromagnetic as mod
    from gqsim.references import REFERENCES

    own = [obj for obj in vars(mod).values() if callable(obj) and getattr(obj, "__module__", "") == mod.__name__]
    methods = [m for cls in own if isinstance(cls, type) for m in vars(cls).values() if callable(m)]
    text = " ".join(obj.__doc__ or "" for obj in own + methods) + (mod.__doc__ or "")
    keys = set(re.findall(r"of \[([A-Za-z]+\d{4})\]", text)) | set(re.findall(r"\[([A-Z][a-z]+\d{4})\]", text))
    assert {"CasimirPolder1948", "Jackson1999", "London1937", "Lifshitz1956"} <= keys
    assert keys <= set(REFERENCES), keys - set(REFERENCES)


def test_dipole_induced_dipole_on_and_off_axis():
    # Dipole field on the axis 2kp/r^3, broadside kp/r^3 (Jackson Eq. (4.13), from memory); energy of
    # the induced dipole -(1/2) alpha_SI E^2 (Jackson Sect. 4.7, from memory), alpha_SI = 4 pi eps0 a.
    p, r = 2e-23, 40e-6
    k = 1 / (4 * math.pi * epsilon_0)
    pot = DipoleInducedDipole(dipole_a_c_m=[p, 0, 0], dipole_b_c_m=[0, 0, 0], radius_a_m=1e-6, radius_b_m=2e-6,
                              permittivity_a=5.7, permittivity_b=3.8)
    alpha_si = 4 * math.pi * epsilon_0 * polarisability_volume_m3(2e-6, 3.8)
    assert pot.energy_j(r) == pytest.approx(-0.5 * alpha_si * (2 * k * p / r**3) ** 2, rel=ROUNDING)
    assert pot.energy_from_vector_j([0, r, 0]) == pytest.approx(-0.5 * alpha_si * (k * p / r**3) ** 2,
                                                                rel=ROUNDING)
    with pytest.raises(ProtocolError, match="orientation"):
        DipoleInducedDipole(dipole_a_c_m=p, dipole_b_c_m=[0, 0, 0], radius_a_m=1e-6, radius_b_m=1e-6,
                            permittivity_a=5.7, permittivity_b=5.7)
