"""Model stage: electromagnetic pair potentials that can fake gravity's entanglement, and
how much of the entangling phase (or coupling) each one makes.

Every potential class here implements the central pair-potential interface of
:mod:`gqsim.physics.potentials` (``label``, ``energy_j(r_m)``, ``radial_derivative(r_m, order)``
for order 1 and 2; the power laws also give 3 and 4 for the oscillators' anharmonic
terms), so both model builders can add it next to gravity:

==============================  ==========================  =============================================
class                           label                       U(r)
==============================  ==========================  =============================================
:class:`RetardedCasimirPolder`  ``casimir_polder``          -23 hbar c a1 a2 / (4 pi r^7)  (T = 0)
:class:`ThermalCasimirPolder`   ``casimir_polder``          Matsubara sum; -3 k_B T a1 a2 / r^6 far out
:class:`LondonVanDerWaals`      ``london_van_der_waals``    -(3/2) hbar W1 W2/(W1+W2) a1 a2 / r^6
:class:`Coulomb`                ``coulomb``                 q1 q2 / (4 pi eps0 r)
:class:`ChargeInducedDipole`    ``charge_induced_dipole``   -(q1^2 a2 + q2^2 a1) / (8 pi eps0 r^4)
:class:`DipoleDipole`           ``dipole_dipole``           [p1.p2 - 3 (p1.n)(p2.n)] / (4 pi eps0 r^3)
:class:`DipoleInducedDipole`    ``dipole_induced_dipole``   -(k/2) sum a_t [p_s^2 + 3 (p_s.n)^2] / r^6
==============================  ==========================  =============================================

:class:`ConductingScreen` (an ideal plate between the bodies) is not a pair potential: it
removes the electromagnetic pair terms and gives each body a local image energy
(:func:`screen_energy_j`) whose branch phases never entangle.

``a`` is the static polarisability *volume* [m^3] of a sphere, R^3 (eps-1)/(eps+2)
(Clausius-Mossotti; SI polarisability = 4 pi eps0 a).

Orientation extension (optional)
--------------------------------
A potential whose energy depends on the direction of the separation vector
(:class:`DipoleDipole`, :class:`DipoleInducedDipole`) also provides

``energy_from_vector_j(separation_m)`` : (..., 3) -> (...)
    U at separation vectors r = r_A - r_B [m] (either sign: U is even in r here)
``hessian_from_vector(separation_m)`` : (..., 3) -> (..., 3, 3)
    d^2 U / dr_i dr_j [J/m^2]

and its ``energy_j(r)`` / ``radial_derivative`` are evaluated along a fixed unit
``axis`` (default x, the line joining the body centres in every gqsim arrangement).
Model builders should call :func:`pair_energy_at` and :func:`pair_hessian_at`, which
use the vector methods when present and the central formulas otherwise.

Attribution
-----------
Phases from different potentials add, so each potential's entangling phase is
computed on its own (:func:`superposition_attribution`) and the oscillator coupling
likewise (:func:`oscillator_attribution`). A force's *share* is |its value| divided
by the sum of |values| over all forces (so opposing forces cannot hide each other);
a non-gravitational force whose share exceeds ``share_limit`` (default 0.1) is flagged.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import numpy as np
from scipy.constants import G, c, epsilon_0, hbar
from scipy.constants import k as k_B
from scipy.optimize import brentq

from gqsim.errors import PhysicsError, ProtocolError
from gqsim.physics.potentials import pair_energy_at, pair_hessian_at  # noqa: F401  (re-exported)
from gqsim.physics.potentials import NewtonianGravity

__all__ = [
    "clausius_mossotti_factor",
    "polarisability_volume_m3",
    "RetardedCasimirPolder",
    "ThermalCasimirPolder",
    "LondonVanDerWaals",
    "Coulomb",
    "ChargeInducedDipole",
    "DipoleDipole",
    "DipoleInducedDipole",
    "pair_energy_at",
    "ConductingScreen",
    "screen_energy_j",
    "screen_branch_phases_rad",
    "pair_hessian_at",
    "ForceRow",
    "Attribution",
    "branch_phase_matrix_rad",
    "entangling_phase_matrix_rad",
    "pure_log_negativity_bits",
    "superposition_attribution",
    "oscillator_attribution",
    "casimir_polder_gravity_crossover_m",
    "smallest_separation_below_m",
    "casimir_polder_phase_crossover_m",
    "smallest_centre_distance_for_phase_m",
    "FORCE_LABELS",
    "ELECTROMAGNETIC_LABELS",
    "DEFAULT_SHARE_LIMIT",
    "fragment",
    "with_interaction_keys",
    "potentials_from_tables",
    "potential_factory",
]

DEFAULT_SHARE_LIMIT = 0.1
FORCE_LABELS = ("gravity", "casimir_polder", "london_van_der_waals", "coulomb", "charge_induced_dipole",
                "dipole_dipole", "dipole_induced_dipole")
ELECTROMAGNETIC_LABELS = FORCE_LABELS[1:]

_COULOMB_K = 1.0 / (4.0 * math.pi * epsilon_0)  # 1/(4 pi eps0) [m/F]


# ----------------------------------------------------------------------------- small checks

def _positive(key: str, value: float, unit: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)):
        raise ProtocolError(key, value, f"must be a number > 0 {unit}")
    value = float(value)
    if not (math.isfinite(value) and value > 0):
        raise ProtocolError(key, value, f"must be a finite number > 0 {unit}")
    return value


def _finite(key: str, value: float, unit: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)):
        raise ProtocolError(key, value, f"must be a finite number {unit}")
    value = float(value)
    if not math.isfinite(value):
        raise ProtocolError(key, value, f"must be a finite number {unit}")
    return value


def _vector3(key: str, value: Any, what: str) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise ProtocolError(key, value, f"must be a 3-vector [x, y, z] ({what})") from None
    if arr.shape != (3,) or not np.all(np.isfinite(arr)):
        raise ProtocolError(key, value, f"must be a finite 3-vector [x, y, z] ({what})")
    arr = arr.copy()
    arr.setflags(write=False)
    return arr


def _separation(r_m) -> np.ndarray:
    r = np.asarray(r_m, dtype=float)
    if not np.all(np.isfinite(r)) or np.any(r <= 0):
        bad = r[~(np.isfinite(r) & (r > 0))].ravel()[0]
        raise PhysicsError("separation_m", float(bad), "centre-to-centre distance must be finite and > 0 m")
    return r


def _power_law(coefficient: float, power: int, r: np.ndarray, order: int) -> np.ndarray:
    """d^order/dr^order of coefficient * r**(-power) for order 0..4 (elementary calculus:
    (-1)^k n (n+1) ... (n+k-1) r^-(n+k)). Orders 3 and 4 serve the oscillators' anharmonic terms."""
    if isinstance(order, bool) or order not in (0, 1, 2, 3, 4):
        raise ValueError(f"order must be 1, 2, 3 or 4, got {order}")
    factor = 1.0
    for k in range(order):
        factor *= -(power + k)
    return factor * coefficient * r ** (-power - order)


def clausius_mossotti_factor(relative_permittivity: float | None, key: str = "relative_permittivity") -> float:
    """(eps - 1)/(eps + 2) for a homogeneous dielectric sphere in a uniform static field.

    Eq. (4.56) of [Jackson1999] (dielectric sphere in a uniform field; equation number
    from memory): p = 4 pi eps0 R^3 (eps-1)/(eps+2) E0, the Clausius-Mossotti form of
    Eq. (4.70) there. ``None`` means a perfect conductor, whose limit eps -> inf gives 1
    (conducting sphere, p = 4 pi eps0 R^3 E0, Sect. 2.5 of [Jackson1999]).
    """
    if relative_permittivity is None:
        return 1.0
    eps = _finite(key, relative_permittivity, "(static relative permittivity)")
    if eps < 1.0:
        raise ProtocolError(key, relative_permittivity,
                            "must be >= 1 (static relative permittivity of a passive material)")
    return (eps - 1.0) / (eps + 2.0)


def polarisability_volume_m3(radius_m: float, relative_permittivity: float | None,
                             key: str = "body") -> float:
    """Static polarisability volume a = R^3 (eps-1)/(eps+2) of a sphere [m^3].

    Gaussian-units polarisability as used by [CasimirPolder1948]; the SI polarisability
    is 4 pi eps0 a. Source: Eq. (4.56) of [Jackson1999] (from memory).
    """
    radius = _positive(f"{key}.radius_m", radius_m, "m")
    return radius**3 * clausius_mossotti_factor(relative_permittivity, f"{key}.relative_permittivity")


def _point_dipole_note(label: str, r_min_m: float, radius_m: float) -> tuple[str, ...]:
    # Common practice: the point-polarisability laws need r >> R; flag below 10 R.
    if r_min_m < 10.0 * radius_m:
        return (f"{label}: closest approach {r_min_m:.3g} m is below 10 x the sphere radius {radius_m:.3g} m; "
                "the point-dipole law is marginal there (proximity regime not modelled)",)
    return ()


# ----------------------------------------------------------------------------- potentials

@dataclass(frozen=True, kw_only=True)
class RetardedCasimirPolder:
    """Retarded (long-distance) Casimir-Polder attraction of two dielectric spheres.

    U(r) = -23 hbar c a_A a_B / (4 pi r^7), the atom-atom result of [CasimirPolder1948]
    (quoted in its abstract; Eq. (56) there, number from memory), with each sphere's
    static polarisability volume a = R^3 (eps-1)/(eps+2) (Clausius-Mossotti, Eq. (4.56)
    of [Jackson1999], from memory).

    Regime: valid for r >> R (dipole approximation) and r >> c/W, W the material's
    lowest strong absorption frequency (so r >> ~0.1 um for UV-absorbing dielectrics);
    below c/W use :class:`LondonVanDerWaals`. Zero temperature: beyond r ~ hbar c/(k_B T)
    (0.57 mm at 4 K) the thermal term -3 k_B T a_A a_B / r^6 takes over (from memory;
    not modelled). Conductors (eps = None) are rejected: their magnetic polarisability
    changes the coefficient.

    Parameters
    ----------
    radius_a_m, radius_b_m : sphere radii [m]
    permittivity_a, permittivity_b : static relative permittivities (>= 1)
    """

    radius_a_m: float
    radius_b_m: float
    permittivity_a: float
    permittivity_b: float
    label: str = "casimir_polder"

    def __post_init__(self):
        for side in "ab":
            if getattr(self, f"permittivity_{side}") is None:
                raise PhysicsError(f"permittivity_{side}", None,
                                   "Casimir-Polder here needs a dielectric (finite permittivity); "
                                   "conducting spheres are not modelled")
            polarisability_volume_m3(getattr(self, f"radius_{side}_m"), getattr(self, f"permittivity_{side}"),
                                     key=f"body_{side}")

    @property
    def coefficient_j_m7(self) -> float:
        """C7 = 23 hbar c a_A a_B / (4 pi) [J m^7], so that U = -C7 / r^7."""
        a_a = polarisability_volume_m3(self.radius_a_m, self.permittivity_a)
        a_b = polarisability_volume_m3(self.radius_b_m, self.permittivity_b)
        return 23.0 * hbar * c * a_a * a_b / (4.0 * math.pi)

    def energy_j(self, r_m):
        """U(r) = -C7 / r^7 [J] (Eq. (56) of [CasimirPolder1948], number from memory)."""
        return _power_law(-self.coefficient_j_m7, 7, _separation(r_m), 0)

    def radial_derivative(self, r_m, order: int):
        """d^n U/dr^n of -C7 r^-7 [J/m^n], n = 1..4."""
        return _power_law(-self.coefficient_j_m7, 7, _separation(r_m), order)

    def regime_notes(self, r_min_m: float) -> tuple[str, ...]:
        """Warnings when the closest approach ``r_min_m`` [m] leaves the law's regime."""
        return _point_dipole_note(self.label, r_min_m, max(self.radius_a_m, self.radius_b_m))


# Below this value of a = 2 pi k_B T r/(hbar c) the Matsubara sum equals the zero-temperature
# integral to relative O(a^6) < 1e-12 (Euler-Maclaurin: the integrand's odd derivatives at 0
# vanish up to the fifth), so the closed form is used there.
_MATSUBARA_SWITCH = 0.01
_MATSUBARA_SPAN = 45.0  # stop the sum at n a = 45: e^{-90} (n a)^4 is far below double precision


def _dispersion_shape(y: np.ndarray, order: int) -> np.ndarray:
    """r^(6+order) d^order/dr^order [r^-6 g(y)], y proportional to r, g = e^{-2y}(3+6y+5y^2+2y^3+y^4)."""
    p = 3 + 6 * y + 5 * y**2 + 2 * y**3 + y**4
    p1 = 6 + 10 * y + 6 * y**2 + 4 * y**3
    p2 = 10 + 12 * y + 12 * y**2
    damp = np.exp(-2 * y)
    g, g1, g2 = damp * p, damp * (p1 - 2 * p), damp * (p2 - 4 * p1 + 4 * p)
    if order == 0:
        return g
    if order == 1:
        return y * g1 - 6 * g
    if order == 2:
        return y**2 * g2 - 12 * y * g1 + 42 * g
    raise ValueError(f"order must be 1 or 2, got {order}")


@dataclass(frozen=True, kw_only=True)
class ThermalCasimirPolder:
    """Casimir-Polder attraction of two dielectric spheres at temperature T (static polarisabilities).

    U(r) = -(2 k_B T a_A a_B / r^6) sum'_{n>=0} g(n a), a = 2 pi k_B T r/(hbar c),
    g(y) = e^{-2y}(3 + 6y + 5y^2 + 2y^3 + y^4), the n = 0 term halved: the zero-temperature
    dispersion energy -(hbar/(pi r^6)) int_0^inf a_A a_B e^{-2y}(...) d xi of
    [CasimirPolder1948] with the frequency integral replaced by the Matsubara sum
    (hbar/pi) int d xi -> 2 k_B T sum'_n at xi_n = 2 pi n k_B T/hbar (Lifshitz theory,
    [Lifshitz1956], from memory; the polynomial form from memory). Limits: T -> 0 gives
    :class:`RetardedCasimirPolder`; r >> hbar c/(k_B T) gives the classical
    -3 k_B T a_A a_B / r^6 (the n = 0 term). Same regime otherwise as the zero-temperature
    class (r >> R, r >> c/W). Radial derivatives of order 1 and 2 only.

    Parameters
    ----------
    radius_a_m, radius_b_m : sphere radii [m]
    permittivity_a, permittivity_b : static relative permittivities (>= 1)
    temperature_k : temperature of the field between the spheres [K] (> 0)
    """

    radius_a_m: float
    radius_b_m: float
    permittivity_a: float
    permittivity_b: float
    temperature_k: float
    label: str = "casimir_polder"

    def __post_init__(self):
        RetardedCasimirPolder(radius_a_m=self.radius_a_m, radius_b_m=self.radius_b_m,
                              permittivity_a=self.permittivity_a, permittivity_b=self.permittivity_b)
        _positive("temperature_k", self.temperature_k, "K")

    @property
    def thermal_length_m(self) -> float:
        """hbar c/(k_B T) [m]: beyond a few times this the classical -3 k_B T a_A a_B/r^6 rules."""
        return hbar * c / (k_B * self.temperature_k)

    def _evaluate(self, r_m, order: int):
        r = _separation(r_m)
        zero_t = RetardedCasimirPolder(radius_a_m=self.radius_a_m, radius_b_m=self.radius_b_m,
                                       permittivity_a=self.permittivity_a, permittivity_b=self.permittivity_b)
        alphas = zero_t.coefficient_j_m7 * 4.0 * math.pi / (23.0 * hbar * c)  # a_A a_B [m^6]
        step = 2.0 * math.pi * r / self.thermal_length_m
        out = np.empty_like(r, dtype=float)
        flat_r, flat_a, flat_out = r.ravel(), step.ravel(), out.ravel()
        for i, (ri, ai) in enumerate(zip(flat_r, flat_a)):
            if ai < _MATSUBARA_SWITCH:
                flat_out[i] = zero_t.radial_derivative(ri, order) if order else zero_t.energy_j(ri)
                continue
            n = np.arange(int(math.ceil(_MATSUBARA_SPAN / ai)) + 1)
            terms = _dispersion_shape(n * ai, order)
            total = terms.sum() - 0.5 * terms[0]
            flat_out[i] = -2.0 * k_B * self.temperature_k * alphas * total / ri ** (6 + order)
        return out.reshape(r.shape) if r.ndim else float(out)

    def energy_j(self, r_m):
        """U(r, T) [J] (Matsubara form of [CasimirPolder1948], [Lifshitz1956]; from memory)."""
        return self._evaluate(r_m, 0)

    def radial_derivative(self, r_m, order: int):
        """d^n U/dr^n at fixed T [J/m^n], n = 1, 2 (term-by-term differentiation)."""
        if isinstance(order, bool) or order not in (1, 2):
            raise ValueError(f"order must be 1 or 2, got {order}")
        return self._evaluate(r_m, order)

    def regime_notes(self, r_min_m: float) -> tuple[str, ...]:
        """Warnings when the closest approach ``r_min_m`` [m] leaves the law's regime."""
        return _point_dipole_note(self.label, r_min_m, max(self.radius_a_m, self.radius_b_m))


@dataclass(frozen=True, kw_only=True)
class LondonVanDerWaals:
    """Non-retarded (short-range) London-van der Waals attraction of two dielectric spheres.

    U(r) = -(3/2) hbar W_A W_B/(W_A + W_B) a_A a_B / r^6: London's formula for two
    single-resonance polarisabilities a(i xi) = a/(1 + xi^2/W^2) (Eq. (11) of [London1937],
    from memory), equal to the short-distance limit -(3 hbar/(pi r^6)) int_0^inf
    a_A(i xi) a_B(i xi) d xi of [CasimirPolder1948]. For a sphere of a one-oscillator
    dielectric, W is the sphere's own resonance (for eps(i xi) = 1 + (eps-1)/(1 + xi^2/w0^2)
    it is w0 sqrt((eps+2)/3)); the user supplies it.

    Regime: R << r << c/W (for W ~ 1e16 rad/s, r << 30 nm), i.e. almost never at the
    separations of a gravity experiment; it is here to show why the retarded law is
    the right one there. The crossover length c/W is :attr:`crossover_m`.

    Parameters
    ----------
    radius_a_m, radius_b_m : sphere radii [m]
    permittivity_a, permittivity_b : static relative permittivities (>= 1)
    resonance_a_rad_s, resonance_b_rad_s : polarisability resonance W of each sphere [rad/s]
    """

    radius_a_m: float
    radius_b_m: float
    permittivity_a: float
    permittivity_b: float
    resonance_a_rad_s: float
    resonance_b_rad_s: float
    label: str = "london_van_der_waals"

    def __post_init__(self):
        for side in "ab":
            if getattr(self, f"permittivity_{side}") is None:
                raise PhysicsError(f"permittivity_{side}", None,
                                   "London-van der Waals here needs a dielectric (finite permittivity)")
            polarisability_volume_m3(getattr(self, f"radius_{side}_m"), getattr(self, f"permittivity_{side}"),
                                     key=f"body_{side}")
            _positive(f"resonance_{side}_rad_s", getattr(self, f"resonance_{side}_rad_s"), "rad/s")

    @property
    def coefficient_j_m6(self) -> float:
        """C6 = (3/2) hbar W_A W_B/(W_A+W_B) a_A a_B [J m^6], so that U = -C6 / r^6."""
        wa, wb = self.resonance_a_rad_s, self.resonance_b_rad_s
        a_a = polarisability_volume_m3(self.radius_a_m, self.permittivity_a)
        a_b = polarisability_volume_m3(self.radius_b_m, self.permittivity_b)
        return 1.5 * hbar * wa * wb / (wa + wb) * a_a * a_b

    @property
    def crossover_m(self) -> float:
        """c / max(W_A, W_B) [m]: beyond a few times this the retarded law applies."""
        return c / max(self.resonance_a_rad_s, self.resonance_b_rad_s)

    def energy_j(self, r_m):
        """U(r) = -C6 / r^6 [J] (Eq. (11) of [London1937], from memory)."""
        return _power_law(-self.coefficient_j_m6, 6, _separation(r_m), 0)

    def radial_derivative(self, r_m, order: int):
        """d^n U/dr^n of -C6 r^-6 [J/m^n], n = 1..4."""
        return _power_law(-self.coefficient_j_m6, 6, _separation(r_m), order)

    def regime_notes(self, r_min_m: float) -> tuple[str, ...]:
        """Warnings when the closest approach ``r_min_m`` [m] leaves the law's regime."""
        notes = _point_dipole_note(self.label, r_min_m, max(self.radius_a_m, self.radius_b_m))
        if r_min_m > 0.1 * self.crossover_m:
            notes += (f"{self.label}: closest approach {r_min_m:.3g} m exceeds 0.1 c/W = {0.1 * self.crossover_m:.3g} m;"
                      " retardation weakens the force there, use casimir_polder",)
        return notes


@dataclass(frozen=True, kw_only=True)
class Coulomb:
    """Coulomb energy of two charged bodies, U(r) = q_A q_B / (4 pi eps0 r).

    Coulomb's law, Eq. (1.1) of [Jackson1999] (from memory); exact outside two
    spherically symmetric charge distributions (Gauss's law), and the leading term
    for any charged body at r >> its size. Repulsive (U > 0) for like charges.

    Parameters
    ----------
    charge_a_c, charge_b_c : net charges [C] (either sign, or zero)
    """

    charge_a_c: float
    charge_b_c: float
    label: str = "coulomb"

    def __post_init__(self):
        for side in "ab":
            _finite(f"charge_{side}_c", getattr(self, f"charge_{side}_c"), "C")

    @property
    def coefficient_j_m(self) -> float:
        """q_A q_B / (4 pi eps0) [J m]."""
        return _COULOMB_K * self.charge_a_c * self.charge_b_c

    def energy_j(self, r_m):
        """U(r) = q_A q_B / (4 pi eps0 r) [J] (Eq. (1.1) of [Jackson1999], from memory)."""
        return _power_law(self.coefficient_j_m, 1, _separation(r_m), 0)

    def radial_derivative(self, r_m, order: int):
        """d^n U/dr^n of k q_A q_B / r [J/m^n], n = 1..4."""
        return _power_law(self.coefficient_j_m, 1, _separation(r_m), order)


@dataclass(frozen=True, kw_only=True)
class ChargeInducedDipole:
    """Attraction of each body's charge to the dipole it induces in the other sphere.

    U(r) = -(q_A^2 a_B + q_B^2 a_A) / (8 pi eps0 r^4): the energy -(1/2) alpha E^2 of an
    induced dipole (alpha = 4 pi eps0 a, the 1/2 from building the dipole up; Sect. 4.7
    of [Jackson1999], from memory) in the Coulomb field q/(4 pi eps0 r^2). Leading term
    in R/r; the charge-charge part is :class:`Coulomb`. A conducting sphere
    (permittivity None) has a = R^3 (its image-charge dipole, from memory).

    Parameters
    ----------
    charge_a_c, charge_b_c : net charges [C]
    radius_a_m, radius_b_m : sphere radii [m]
    permittivity_a, permittivity_b : static relative permittivities (>= 1) or None (conductor)
    """

    charge_a_c: float
    charge_b_c: float
    radius_a_m: float
    radius_b_m: float
    permittivity_a: float | None
    permittivity_b: float | None
    label: str = "charge_induced_dipole"

    def __post_init__(self):
        for side in "ab":
            _finite(f"charge_{side}_c", getattr(self, f"charge_{side}_c"), "C")
            polarisability_volume_m3(getattr(self, f"radius_{side}_m"), getattr(self, f"permittivity_{side}"),
                                     key=f"body_{side}")

    @property
    def coefficient_j_m4(self) -> float:
        """(q_A^2 a_B + q_B^2 a_A)/(8 pi eps0) [J m^4], so that U = -C4 / r^4."""
        a_a = polarisability_volume_m3(self.radius_a_m, self.permittivity_a)
        a_b = polarisability_volume_m3(self.radius_b_m, self.permittivity_b)
        return 0.5 * _COULOMB_K * (self.charge_a_c**2 * a_b + self.charge_b_c**2 * a_a)

    def energy_j(self, r_m):
        """U(r) = -C4 / r^4 [J] (induced-dipole energy, Sect. 4.7 of [Jackson1999], from memory)."""
        return _power_law(-self.coefficient_j_m4, 4, _separation(r_m), 0)

    def radial_derivative(self, r_m, order: int):
        """d^n U/dr^n of -C4 r^-4 [J/m^n], n = 1..4."""
        return _power_law(-self.coefficient_j_m4, 4, _separation(r_m), order)

    def regime_notes(self, r_min_m: float) -> tuple[str, ...]:
        """Warnings when the closest approach ``r_min_m`` [m] leaves the law's regime."""
        return _point_dipole_note(self.label, r_min_m, max(self.radius_a_m, self.radius_b_m))


@dataclass(frozen=True, kw_only=True)
class DipoleDipole:
    """Energy of two permanent electric dipoles with fixed orientations.

    U(r) = [p_A.p_B - 3 (p_A.n)(p_B.n)] / (4 pi eps0 r^3), n = r/|r|: Eq. (4.26) of
    [Jackson1999] (from memory). Orientation dependent: the vector methods
    :meth:`energy_from_vector_j` and :meth:`hessian_from_vector` give the full answer;
    ``energy_j``/``radial_derivative`` evaluate it along the fixed unit ``axis``
    (default x, the line joining the body centres in gqsim's arrangements).

    Parameters
    ----------
    dipole_a_c_m, dipole_b_c_m : (3,) dipole moments [C m] in the lab frame
    axis : (3,) direction of the separation for the radial interface (normalised here)
    """

    dipole_a_c_m: np.ndarray
    dipole_b_c_m: np.ndarray
    axis: np.ndarray = field(default_factory=lambda: np.array([1.0, 0.0, 0.0]))
    label: str = "dipole_dipole"

    def __post_init__(self):
        for side in "ab":
            name = f"dipole_{side}_c_m"
            value = getattr(self, name)
            if np.ndim(value) == 0:
                raise ProtocolError(name, value, "a dipole needs an orientation: give a 3-vector [px, py, pz] in C m")
            object.__setattr__(self, name, _vector3(name, value, "dipole moment in C m"))
        axis = _vector3("axis", self.axis, "direction of the separation")
        norm = float(np.linalg.norm(axis))
        if norm == 0:
            raise ProtocolError("axis", self.axis, "must be a non-zero 3-vector")
        unit = axis / norm
        unit.setflags(write=False)
        object.__setattr__(self, "axis", unit)

    def _along_axis_coefficient(self) -> float:
        n = self.axis
        pa, pb = self.dipole_a_c_m, self.dipole_b_c_m
        return _COULOMB_K * (float(pa @ pb) - 3.0 * float(pa @ n) * float(pb @ n))

    def energy_j(self, r_m):
        """U along ``axis`` at distance r [J] (Eq. (4.26) of [Jackson1999], from memory)."""
        return _power_law(self._along_axis_coefficient(), 3, _separation(r_m), 0)

    def radial_derivative(self, r_m, order: int):
        """d^n U/dr^n along ``axis`` (orientation held fixed) [J/m^n], n = 1..4."""
        return _power_law(self._along_axis_coefficient(), 3, _separation(r_m), order)

    def energy_from_vector_j(self, separation_m):
        """U at separation vectors ``separation_m`` (..., 3) [m] -> (...) [J].

        Eq. (4.26) of [Jackson1999] (from memory); even in the separation, so r_A - r_B
        and r_B - r_A give the same energy.
        """
        r_vec = np.asarray(separation_m, dtype=float)
        r = _separation(np.linalg.norm(r_vec, axis=-1))
        pa, pb = self.dipole_a_c_m, self.dipole_b_c_m
        return _COULOMB_K * (float(pa @ pb) / r**3 - 3.0 * (r_vec @ pa) * (r_vec @ pb) / r**5)

    def gradient_from_vector(self, separation_m):
        """dU/dr_i at separation vectors (..., 3) [m] -> (..., 3) [J/m]:
        k [-3 (a.b) r/r^5 - 3 (a (b.r) + b (a.r))/r^5 + 15 (a.r)(b.r) r/r^7], Eq. (4.26) of
        [Jackson1999] (from memory) differentiated once (checked by finite differences in the tests)."""
        r_vec = np.asarray(separation_m, dtype=float)
        r = _separation(np.linalg.norm(r_vec, axis=-1))[..., None]
        a, b = self.dipole_a_c_m, self.dipole_b_c_m
        ar, br = (r_vec @ a)[..., None], (r_vec @ b)[..., None]
        return _COULOMB_K * (-3.0 * float(a @ b) * r_vec / r**5 - 3.0 * (a * br + b * ar) / r**5
                             + 15.0 * ar * br * r_vec / r**7)

    def hessian_from_vector(self, separation_m):
        """d^2 U/dr_i dr_j at separation vectors (..., 3) [m] -> (..., 3, 3) [J/m^2].

        Differentiates Eq. (4.26) of [Jackson1999] twice with respect to the separation
        vector (derivation in tests, checked by finite differences).
        """
        r_vec = np.asarray(separation_m, dtype=float)
        r = _separation(np.linalg.norm(r_vec, axis=-1))[..., None, None]
        a, b = self.dipole_a_c_m, self.dipole_b_c_m
        ar = (r_vec @ a)[..., None, None]
        br = (r_vec @ b)[..., None, None]
        ri = r_vec[..., :, None]
        rj = r_vec[..., None, :]
        eye = np.eye(3)
        ab_sym = np.outer(a, b) + np.outer(b, a)
        mixed = (a[:, None] * br + b[:, None] * ar) * rj + ri * (a[None, :] * br + b[None, :] * ar)
        out = (-3.0 * float(a @ b) * (eye / r**5 - 5.0 * ri * rj / r**7)
               - 3.0 * ab_sym / r**5
               + 15.0 * mixed / r**7
               + 15.0 * ar * br * eye / r**7
               - 105.0 * ar * br * ri * rj / r**9)
        return _COULOMB_K * out


@dataclass(frozen=True, kw_only=True)
class DipoleInducedDipole:
    """Attraction of each body's permanent dipole to the dipole it induces in the other sphere.

    U(r) = -(k/2) sum over (source s, polarised sphere t) a_t [p_s^2 + 3 (p_s.n)^2] / r^6,
    k = 1/(4 pi eps0): the induced-dipole energy -(1/2) alpha E^2 (alpha = 4 pi eps0 a; Sect. 4.7
    of [Jackson1999], from memory) in the dipole field E = k [3 n (n.p) - p] / r^3 (Eq. (4.13) of
    [Jackson1999], from memory). Orientation dependent: same vector extension and ``axis``
    convention as :class:`DipoleDipole`. Needs r >> R. A body without a permanent dipole
    gives ``[0, 0, 0]``; conductors (permittivity None) have a = R^3.

    Parameters
    ----------
    dipole_a_c_m, dipole_b_c_m : (3,) permanent dipoles [C m]
    radius_a_m, radius_b_m : sphere radii [m]
    permittivity_a, permittivity_b : static relative permittivities (>= 1) or None (conductor)
    axis : (3,) direction of the separation for the radial interface (normalised here)
    """

    dipole_a_c_m: np.ndarray
    dipole_b_c_m: np.ndarray
    radius_a_m: float
    radius_b_m: float
    permittivity_a: float | None
    permittivity_b: float | None
    axis: np.ndarray = field(default_factory=lambda: np.array([1.0, 0.0, 0.0]))
    label: str = "dipole_induced_dipole"

    def __post_init__(self):
        shape = DipoleDipole(dipole_a_c_m=self.dipole_a_c_m, dipole_b_c_m=self.dipole_b_c_m, axis=self.axis)
        for name in ("dipole_a_c_m", "dipole_b_c_m", "axis"):
            object.__setattr__(self, name, getattr(shape, name))
        for side in "ab":
            polarisability_volume_m3(getattr(self, f"radius_{side}_m"), getattr(self, f"permittivity_{side}"),
                                     key=f"body_{side}")

    def _pairs(self):
        """(source dipole, polarisability volume of the other sphere) for both directions."""
        a_a = polarisability_volume_m3(self.radius_a_m, self.permittivity_a)
        a_b = polarisability_volume_m3(self.radius_b_m, self.permittivity_b)
        return ((self.dipole_a_c_m, a_b), (self.dipole_b_c_m, a_a))

    def _along_axis_coefficient(self) -> float:
        n = self.axis
        return -0.5 * _COULOMB_K * sum(alpha * (float(p @ p) + 3.0 * float(p @ n) ** 2) for p, alpha in self._pairs())

    def energy_j(self, r_m):
        """U along ``axis`` at distance r [J] (-C/r^6 form of the class formula)."""
        return _power_law(self._along_axis_coefficient(), 6, _separation(r_m), 0)

    def radial_derivative(self, r_m, order: int):
        """d^n U/dr^n along ``axis`` (orientation held fixed) [J/m^n], n = 1..4."""
        return _power_law(self._along_axis_coefficient(), 6, _separation(r_m), order)

    def energy_from_vector_j(self, separation_m):
        """U at separation vectors (..., 3) [m] -> (...) [J]; even in the separation."""
        r_vec = np.asarray(separation_m, dtype=float)
        r = _separation(np.linalg.norm(r_vec, axis=-1))
        total = 0.0
        for p, alpha in self._pairs():
            total = total + alpha * (float(p @ p) / r**6 + 3.0 * (r_vec @ p) ** 2 / r**8)
        return -0.5 * _COULOMB_K * total

    def gradient_from_vector(self, separation_m):
        """dU/dr_i at separation vectors (..., 3) [m] -> (..., 3) [J/m]: the class formula
        differentiated once, -(k/2) sum a_t [-6 p^2 r/r^8 + 6 (p.r) p/r^8 - 24 (p.r)^2 r/r^10]
        (checked by finite differences in the tests)."""
        r_vec = np.asarray(separation_m, dtype=float)
        r = _separation(np.linalg.norm(r_vec, axis=-1))[..., None]
        out = 0.0
        for p, alpha in self._pairs():
            pr = (r_vec @ p)[..., None]
            out = out + alpha * (-6.0 * float(p @ p) * r_vec / r**8 + 6.0 * pr * p / r**8
                                 - 24.0 * pr**2 * r_vec / r**10)
        return -0.5 * _COULOMB_K * out

    def hessian_from_vector(self, separation_m):
        """d^2 U/dr_i dr_j at separation vectors (..., 3) [m] -> (..., 3, 3) [J/m^2]
        (the class formula differentiated twice; checked by finite differences in the tests)."""
        r_vec = np.asarray(separation_m, dtype=float)
        r = _separation(np.linalg.norm(r_vec, axis=-1))[..., None, None]
        ri, rj = r_vec[..., :, None], r_vec[..., None, :]
        eye = np.eye(3)
        out = 0.0
        for p, alpha in self._pairs():
            pr = (r_vec @ p)[..., None, None]
            term_iso = -6.0 * float(p @ p) * (eye / r**8 - 8.0 * ri * rj / r**10)
            term_dir = (2.0 * np.outer(p, p) / r**8
                        - 16.0 * pr * (p[:, None] * rj + ri * p[None, :]) / r**10
                        - 8.0 * pr**2 * eye / r**10
                        + 80.0 * pr**2 * ri * rj / r**12)
            out = out + alpha * (term_iso + 3.0 * term_dir)
        return -0.5 * _COULOMB_K * out


# ----------------------------------------------------------------------------- attribution

@dataclass(frozen=True, kw_only=True)
class ForceRow:
    """One line of an attribution table.

    Parameters
    ----------
    label : the potential's label (``"all"`` for everything together)
    value : entangling phase theta [rad] (superpositions) or coupling kappa [N/m] (oscillators)
    share : |value| / sum of |value| over forces (1 for ``"all"``)
    log_negativity : entanglement this force alone would make (superpositions: exact pure-state
        E_N in bits; oscillators: weak-coupling estimate in nats, or None)
    exceeds_limit : True for a non-gravitational force whose share exceeds the limit
    extra : further named numbers (e.g. ``coupling_rate_rad_s``)
    """

    label: str
    value: float
    share: float
    log_negativity: float | None
    exceeds_limit: bool = False
    extra: Mapping[str, float] = field(default_factory=dict)


@dataclass(frozen=True, kw_only=True)
class Attribution:
    """Per-force entangling phase (or coupling), share and flag; see the module docstring.

    ``rows`` has one :class:`ForceRow` per potential then one labelled ``"all"``;
    ``local_phases_rad`` maps a body label to its local (non-entangling) branch phases [rad],
    e.g. from a conducting screen's image terms.
    """

    family: str
    value_name: str
    value_unit: str
    entanglement_unit: str
    rows: tuple[ForceRow, ...]
    share_limit: float
    non_gravitational_share: float
    flagged: bool
    notes: tuple[str, ...] = ()
    local_phases_rad: Mapping[str, Sequence[float]] = field(default_factory=dict)

    def row(self, label: str) -> ForceRow:
        """The row with ``label``; ProtocolError listing the labels if absent."""
        for r in self.rows:
            if r.label == label:
                return r
        raise ProtocolError("label", label, f"must be one of {[r.label for r in self.rows]}")

    def to_json_dict(self) -> dict:
        """Plain JSON-ready dictionary (floats, strings, booleans, None)."""
        return {
            "family": self.family, "value_name": self.value_name, "value_unit": self.value_unit,
            "entanglement_unit": self.entanglement_unit, "share_limit": self.share_limit,
            "non_gravitational_share": self.non_gravitational_share, "flagged": self.flagged,
            "notes": list(self.notes),
            "local_phases_rad": {k: [float(x) for x in v] for k, v in self.local_phases_rad.items()},
            "rows": [{"label": r.label, "value": r.value, "share": r.share, "log_negativity": r.log_negativity,
                      "exceeds_limit": r.exceeds_limit, **{k: float(v) for k, v in r.extra.items()}}
                     for r in self.rows],
        }

    def as_text(self) -> str:
        """Fixed-width table for terminals."""
        head = f"{'force':<22} {self.value_name + ' [' + self.value_unit + ']':>26} {'share':>8} " \
               f"{'E_N [' + self.entanglement_unit + ']':>14}  flag"
        lines = [head, "-" * len(head)]
        for r in self.rows:
            en = "-" if r.log_negativity is None else f"{r.log_negativity:.6g}"
            flag = "OVER LIMIT" if r.exceeds_limit else ""
            lines.append(f"{r.label:<22} {r.value:>26.6g} {r.share:>8.3%} {en:>14}  {flag}")
        verdict = ("non-gravitational share {:.3%} exceeds the limit {:.1%}" if self.flagged
                   else "non-gravitational share {:.3%} is within the limit {:.1%}")
        lines.append(verdict.format(self.non_gravitational_share, self.share_limit))
        lines.extend(f"note: {n}" for n in self.notes)
        return "\n".join(lines)


def _shares(labels: Sequence[str], sizes: Sequence[float], share_limit: float):
    total = float(sum(abs(s) for s in sizes))
    shares = [abs(s) / total if total > 0 else 0.0 for s in sizes]
    non_grav = float(sum(sh for lab, sh in zip(labels, shares) if lab != "gravity"))
    flags = [lab != "gravity" and sh > share_limit for lab, sh in zip(labels, shares)]
    return shares, non_grav, flags


def _check_limit(share_limit: float) -> float:
    value = _finite("share_limit", share_limit, "")
    if not 0 < value <= 1:
        raise ProtocolError("share_limit", share_limit, "must be a fraction in (0, 1]")
    return value


# Above ~1e12 rad a double-precision phase has lost its value modulo 2 pi to ~1e-4 rad.
_PHASE_PRECISION_LIMIT_RAD = 1e12
_GL_X, _GL_W = np.polynomial.legendre.leggauss(48)


def branch_phase_matrix_rad(potential, centre_a_m, offsets_a_m, centre_b_m, offsets_b_m, *, hold_s: float,
                            split_s: float = 0.0, recombine_s: float = 0.0) -> np.ndarray:
    """(n_A, n_B) phases phi_ab = -(1/hbar) int E_ab dt [rad] accumulated over a whole sequence.

    Branch a of body A sits at centre_A + sigma offset_a, sigma rising linearly 0 -> 1 during
    ``split_s``, 1 during ``hold_s``, falling to 0 during ``recombine_s`` (gqsim's path
    convention, :mod:`gqsim.superposition.setup`). Diagonal-Hamiltonian branch phases as in Eq. (2) of
    [Bose2017] (from memory), with a 48-point Gauss-Legendre rule along the straight paths.
    Uses :func:`pair_energy_at`, so orientation-dependent potentials are handled.

    Parameters
    ----------
    centre_a_m, centre_b_m : (3,) body centres [m]
    offsets_a_m, offsets_b_m : (n_A, 3), (n_B, 3) branch offsets [m]
    hold_s, split_s, recombine_s : durations [s]
    """
    ca, cb = np.asarray(centre_a_m, float), np.asarray(centre_b_m, float)
    oa, ob = np.asarray(offsets_a_m, float), np.asarray(offsets_b_m, float)
    base = ca - cb
    q = oa[:, None, :] - ob[None, :, :]

    def energies(sigma):
        return pair_energy_at(potential, base[None, None, :] + sigma * q)

    integral = hold_s * energies(1.0)
    ramp = split_s + recombine_s
    if ramp > 0:
        sig = (_GL_X + 1.0) / 2.0
        integral = integral + ramp * sum(w / 2.0 * energies(s) for s, w in zip(sig, _GL_W))
    return -np.asarray(integral) / hbar


def entangling_phase_matrix_rad(phases_rad) -> np.ndarray:
    """(n_A, n_B) theta_ab = phi_a0 + phi_0b - phi_00 - phi_ab: the part of the branch phases
    that no local unitary removes (zero in row/column 0).

    For two branches theta_11 = phi_LR + phi_RL - phi_LL - phi_RR, the entangling phase of
    [Bose2017] (shared physics references §1.2) with L = branch 0, R = branch 1.
    """
    phi = np.asarray(phases_rad, dtype=float)
    # grouped so that row and column 0 come out exactly zero
    return (phi[:, :1] - phi[:1, :1]) - (phi - phi[:1, :])


def pure_log_negativity_bits(amplitudes_a, amplitudes_b, phases_rad) -> float:
    """E_N = log2 (sum_k s_k)^2 of the pure state sum_ab a_a b_b e^{i phi_ab} |a>|b> [ebits].

    s_k are the Schmidt coefficients (singular values of the normalised coefficient
    matrix); for pure states ||rho^{T_B}||_1 = (sum_k s_k)^2 ([VidalWerner2002], from memory
    for the equation number).
    """
    a = np.asarray(amplitudes_a, complex)
    b = np.asarray(amplitudes_b, complex)
    coeff = np.outer(a, b) * np.exp(1j * np.asarray(phases_rad, float))
    coeff = coeff / np.linalg.norm(coeff)
    s = np.linalg.svd(coeff, compute_uv=False)
    return float(max(0.0, 2.0 * np.log2(np.sum(s))))


def _representative(theta: np.ndarray) -> float:
    """Signed entry of largest magnitude (theta_11 for qubits)."""
    flat = theta.ravel()
    return float(flat[np.argmax(np.abs(flat))])


def superposition_attribution(potentials: Sequence, bodies: Sequence, *, hold_s: float, split_s: float = 0.0,
                              recombine_s: float = 0.0, share_limit: float = DEFAULT_SHARE_LIMIT,
                              notes: Sequence[str] = ()) -> Attribution:
    """Entangling phase and entanglement from each pair potential alone and all together.

    Each force's branch phases come from :func:`branch_phase_matrix_rad`; its entangling
    phase matrix from :func:`entangling_phase_matrix_rad` (``value`` = its entry of largest
    magnitude, theta itself for qubits); its entanglement is the exact pure-state E_N of
    :func:`pure_log_negativity_bits` (no decoherence; the full run adds it). Shares use
    the Frobenius norm of each theta matrix (|theta| for qubits).

    Parameters
    ----------
    potentials : pair potentials, gravity labelled ``"gravity"``
    bodies : two objects with ``centre_m`` (3,), ``offsets_m`` (n, 3), ``amplitudes`` (n,)
        (e.g. :class:`gqsim.superposition.setup.Body`)
    hold_s, split_s, recombine_s : durations [s]
    share_limit : flag a non-gravitational share above this fraction
    """
    limit = _check_limit(share_limit)
    if len(potentials) == 0:
        raise ProtocolError("interactions.include", [], "needs at least one force")
    a, b = bodies
    geometry = (a.centre_m, a.offsets_m, b.centre_m, b.offsets_m)
    phase_mats = [branch_phase_matrix_rad(p, *geometry, hold_s=hold_s, split_s=split_s, recombine_s=recombine_s)
                  for p in potentials]
    labels = [p.label for p in potentials]
    thetas = [entangling_phase_matrix_rad(m) for m in phase_mats]
    sizes = [float(np.linalg.norm(t)) for t in thetas]
    shares, non_grav, flags = _shares(labels, sizes, limit)
    rows = [ForceRow(label=lab, value=_representative(t), share=sh,
                     log_negativity=pure_log_negativity_bits(a.amplitudes, b.amplitudes, m), exceeds_limit=fl)
            for lab, t, m, sh, fl in zip(labels, thetas, phase_mats, shares, flags)]
    sigmas = np.linspace(0.0, 1.0, 201) if (split_s + recombine_s) > 0 else np.array([1.0])
    base = np.asarray(a.centre_m, float) - np.asarray(b.centre_m, float)
    q = np.asarray(a.offsets_m, float)[:, None, :] - np.asarray(b.offsets_m, float)[None, :, :]
    r_min = float(min(np.min(np.linalg.norm(base + s * q, axis=-1)) for s in sigmas))
    for p in potentials:
        check = getattr(p, "regime_notes", None)
        if check is not None:
            notes = (*notes, *check(r_min))
    total = sum(phase_mats)
    scale = max(float(np.max(np.abs(m))) for m in phase_mats)
    if scale > _PHASE_PRECISION_LIMIT_RAD:
        notes = (*notes, f"branch phases reach {scale:.3g} rad: beyond {_PHASE_PRECISION_LIMIT_RAD:g} rad their value "
                         "modulo 2 pi (hence E_N) is not meaningful in double precision")
    rows.append(ForceRow(label="all", value=_representative(entangling_phase_matrix_rad(total)), share=1.0,
                         log_negativity=pure_log_negativity_bits(a.amplitudes, b.amplitudes, total)))
    return Attribution(family="superposition", value_name="entangling_phase", value_unit="rad",
                       entanglement_unit="ebit", rows=tuple(rows), share_limit=limit,
                       non_gravitational_share=non_grav, flagged=any(flags), notes=tuple(notes))


def oscillator_attribution(potentials: Sequence, *, separation_m, mass_a_kg: float, mass_b_kg: float,
                           omega_a_rad_s: float, omega_b_rad_s: float, direction_a=(1.0, 0.0, 0.0),
                           direction_b=(1.0, 0.0, 0.0), share_limit: float = DEFAULT_SHARE_LIMIT,
                           notes: Sequence[str] = ()) -> Attribution:
    """Coupling of two trapped oscillators from each pair potential alone and together.

    With displacements x_A along ``direction_a`` and x_B along ``direction_b`` about the
    rest separation r0 = r_A - r_B, V = U(r0 + x_A n_A - x_B n_B) contains kappa x_A x_B with
    kappa = -n_A . H(r0) . n_B (H the Hessian of U; in line, kappa = -U''(d): for gravity
    2 G m_A m_B / d^3, shared physics references §2.1). The rate
    g = kappa x_zpf,A x_zpf,B / hbar, x_zpf = sqrt(hbar/(2 m omega)) (§2.1). When the two
    frequencies are equal, ``log_negativity`` is the weak-coupling quench estimate
    E_N,max ~ 2|g|/omega [nats] (§2.2, derived for identical oscillators; the Gaussian
    engine gives the exact value); otherwise None.

    Parameters
    ----------
    separation_m : (3,) rest separation r_A - r_B [m], or a scalar distance along x
    mass_a_kg, mass_b_kg : masses [kg]
    omega_a_rad_s, omega_b_rad_s : trap angular frequencies [rad/s]
    direction_a, direction_b : (3,) displacement directions (normalised here)
    """
    limit = _check_limit(share_limit)
    r0 = np.asarray(separation_m, dtype=float)
    if r0.ndim == 0:
        r0 = np.array([float(_positive("separation_m", float(r0), "m")), 0.0, 0.0])
    r0 = _vector3("separation_m", r0, "rest separation in m")
    ma, mb = _positive("mass_a_kg", mass_a_kg, "kg"), _positive("mass_b_kg", mass_b_kg, "kg")
    wa, wb = _positive("omega_a_rad_s", omega_a_rad_s, "rad/s"), _positive("omega_b_rad_s", omega_b_rad_s, "rad/s")
    na = _vector3("direction_a", direction_a, "displacement direction")
    nb = _vector3("direction_b", direction_b, "displacement direction")
    for name, v in (("direction_a", na), ("direction_b", nb)):
        if np.linalg.norm(v) == 0:
            raise ProtocolError(name, v.tolist(), "must be a non-zero 3-vector")
    na, nb = na / np.linalg.norm(na), nb / np.linalg.norm(nb)
    zpf = math.sqrt(hbar / (2 * ma * wa)) * math.sqrt(hbar / (2 * mb * wb))
    labels = [p.label for p in potentials]
    kappas = [float(-(na @ pair_hessian_at(p, r0) @ nb)) for p in potentials]
    total = float(sum(kappas))
    shares, non_grav, flags = _shares(labels, kappas, limit)
    resonant = math.isclose(wa, wb, rel_tol=1e-12)

    def row(label, kappa, share, flag):
        g = kappa * zpf / hbar
        estimate = 2.0 * abs(g) / wa if resonant else None
        return ForceRow(label=label, value=kappa, share=share, log_negativity=estimate, exceeds_limit=flag,
                        extra={"coupling_rate_rad_s": g})

    rows = [row(*args) for args in zip(labels, kappas, shares, flags)]
    rows.append(row("all", total, 1.0, False))
    return Attribution(family="oscillators", value_name="coupling", value_unit="N/m", entanglement_unit="nat",
                       rows=tuple(rows), share_limit=limit, non_gravitational_share=non_grav,
                       flagged=any(flags), notes=tuple(notes))


# ----------------------------------------------------------------------------- conducting screen

@dataclass(frozen=True, kw_only=True)
class ConductingScreen:
    """An ideal (infinite, grounded, perfectly conducting) plate between the two bodies.

    It cancels every electromagnetic field across it, so no electromagnetic pair potential acts
    between bodies on opposite sides; each body interacts only with its own image, which
    depends on that body's position alone: a local branch phase, never an entangling one.

    Parameters
    ----------
    point_m : (3,) a point on the plate's mid-plane [m]
    normal : (3,) plate normal (normalised here)
    thickness_m : plate thickness [m]; each body sees the face on its side
    """

    point_m: np.ndarray
    normal: np.ndarray
    thickness_m: float = 0.0

    def __post_init__(self):
        object.__setattr__(self, "point_m", _vector3("screen.point_m", self.point_m, "point on the plate in m"))
        normal = _vector3("screen.normal", self.normal, "plate normal")
        if np.linalg.norm(normal) == 0:
            raise ProtocolError("screen.normal", normal.tolist(), "must be a non-zero 3-vector")
        unit = normal / np.linalg.norm(normal)
        unit.setflags(write=False)
        object.__setattr__(self, "normal", unit)
        thickness = _finite("screen.thickness_m", self.thickness_m, "m")
        if thickness < 0:
            raise ProtocolError("screen.thickness_m", self.thickness_m, "must be >= 0 m")

    def gap_m(self, positions_m, radius_m: float = 0.0) -> np.ndarray:
        """Distance from each centre (..., 3) [m] to the nearest face [m]; PhysicsError when a
        sphere of ``radius_m`` touches or crosses the plate."""
        z = np.abs((np.asarray(positions_m, float) - self.point_m) @ self.normal) - 0.5 * self.thickness_m
        if np.any(z <= radius_m):
            raise PhysicsError("screen", f"gap {float(np.min(z)):.3g} m",
                               f"a body (radius {radius_m:g} m) touches or crosses the conducting plate")
        return z

    def side(self, positions_m) -> np.ndarray:
        """+1 or -1: which side of the plate each position (..., 3) is on."""
        return np.sign((np.asarray(positions_m, float) - self.point_m) @ self.normal)


def screen_energy_j(screen: ConductingScreen, positions_m, *, radius_m: float | None = None,
                    permittivity: float | None = None, charge_c: float = 0.0) -> np.ndarray:
    """Energy of one body with its own image in the plate at centre positions (..., 3) [J].

    Sum of the retarded Casimir-Polder sphere-plate term -3 hbar c a / (8 pi z^4) (the
    atom-conducting-plane result of [CasimirPolder1948], quoted in its abstract; a = R^3
    (eps-1)/(eps+2); needs z >> R and a dielectric) and the image-charge term
    -q^2 / (16 pi eps0 z) (method of images, Sect. 2.1 of [Jackson1999], from memory).
    Either term is skipped when its inputs are absent (no radius/permittivity, zero charge).
    """
    z = screen.gap_m(positions_m, radius_m or 0.0)
    energy = np.zeros_like(z)
    if radius_m is not None and permittivity is not None:
        alpha = polarisability_volume_m3(radius_m, permittivity)
        energy = energy - 3.0 * hbar * c * alpha / (8.0 * math.pi * z**4)
    q = _finite("charge_c", charge_c, "C")
    if q:
        energy = energy - 0.25 * _COULOMB_K * q * q / z
    return energy


def screen_branch_phases_rad(screen: ConductingScreen, centre_m, offsets_m, *, hold_s: float, split_s: float = 0.0,
                             recombine_s: float = 0.0, radius_m: float | None = None,
                             permittivity: float | None = None, charge_c: float = 0.0) -> np.ndarray:
    """(n,) local branch phases -(1/hbar) int U_image dt [rad] over split-hold-recombine.

    Same path convention and quadrature as :func:`branch_phase_matrix_rad`. The phases are
    local (one body's branches only), so they leave the entangling phase untouched; their
    spread is what plate-distance jitter would turn into dephasing.
    """
    centre = np.asarray(centre_m, float)
    offsets = np.asarray(offsets_m, float)

    def energies(sigma):
        return screen_energy_j(screen, centre + sigma * offsets, radius_m=radius_m, permittivity=permittivity,
                               charge_c=charge_c)

    integral = hold_s * energies(1.0)
    ramp = split_s + recombine_s
    if ramp > 0:
        sig = (_GL_X + 1.0) / 2.0
        integral = integral + ramp * sum(w / 2.0 * energies(s) for s, w in zip(sig, _GL_W))
    return -np.asarray(integral) / hbar


# ----------------------------------------------------------------------------- safe distances

def casimir_polder_gravity_crossover_m(*, relative_permittivity: float, density_kg_m3: float,
                                       fraction: float = DEFAULT_SHARE_LIMIT, temperature_k: float = 0.0) -> float:
    """Separation d* below which Casimir-Polder exceeds ``fraction`` of gravity [m].

    Two equal homogeneous spheres (m = 4/3 pi R^3 rho): at T = 0, setting
    23 hbar c R^6 beta^2/(4 pi d^7) = f G m^2/d gives the radius-independent
    d* = [207 hbar c beta^2/(64 pi^3 f G rho^2)]^(1/6), beta = (eps-1)/(eps+2)
    (derived from Eq. (56) of [CasimirPolder1948], number from memory, and Newton's law;
    shared physics references §4.1). For ``temperature_k`` > 0 the ratio of
    :class:`ThermalCasimirPolder` to gravity is still radius independent (both scale as
    R^6) and d* is found numerically with :func:`smallest_separation_below_m`.
    """
    beta = clausius_mossotti_factor(relative_permittivity)
    rho = _positive("density_kg_m3", density_kg_m3, "kg/m^3")
    f = _check_limit(fraction)
    if beta == 0:
        raise PhysicsError("relative_permittivity", relative_permittivity,
                           "eps = 1 has no Casimir-Polder force, so every separation is safe")
    cold = (207.0 * hbar * c * beta**2 / (64.0 * math.pi**3 * f * G * rho**2)) ** (1.0 / 6.0)
    temperature = _finite("temperature_k", temperature_k, "K")
    if temperature < 0:
        raise ProtocolError("temperature_k", temperature_k, "must be >= 0 K")
    if temperature == 0:
        return cold
    radius = 1e-6  # any radius gives the same answer
    mass = 4.0 / 3.0 * math.pi * radius**3 * rho
    warm = ThermalCasimirPolder(radius_a_m=radius, radius_b_m=radius, permittivity_a=relative_permittivity,
                                permittivity_b=relative_permittivity, temperature_k=temperature)
    # The thermal force is never weaker than the T = 0 one, so d* >= cold; search above it.
    return smallest_separation_below_m(warm, NewtonianGravity(mass_a_kg=mass, mass_b_kg=mass), fraction=f,
                                       lower_m=0.5 * cold, upper_m=1e4 * cold)


def _last_crossing(ratio, lower: float, upper: float, fraction: float, what: str, points: int = 400) -> float:
    grid = np.geomspace(lower, upper, points)
    excess = np.array([math.log(ratio(x)) for x in grid]) - math.log(fraction)
    if excess[-1] > 0:
        raise PhysicsError(what, f"{ratio(upper):.3g} at {upper:.3g} m",
                           f"stays above the fraction {fraction:g} of gravity up to the search limit; "
                           "a force falling no faster than gravity has no safe distance")
    above = np.flatnonzero(excess > 0)
    if above.size == 0:
        return float(lower)
    i = int(above[-1])
    return float(brentq(lambda x: math.log(ratio(x)) - math.log(fraction), grid[i], grid[i + 1], xtol=1e-15,
                        rtol=1e-12))


def smallest_separation_below_m(confounder, gravity: NewtonianGravity, *, fraction: float = DEFAULT_SHARE_LIMIT,
                                lower_m: float = 1e-7, upper_m: float = 1.0) -> float:
    """Smallest distance d with |U_conf(r)| <= fraction |U_grav(r)| for all r in [d, upper_m] [m].

    Scans a logarithmic grid and refines the last crossing with Brent's method.
    Returns ``lower_m`` when the condition already holds there; raises PhysicsError
    when it fails at ``upper_m`` (e.g. Coulomb, whose ratio to gravity is constant).
    """
    f = _check_limit(fraction)
    lo, hi = _positive("lower_m", lower_m, "m"), _positive("upper_m", upper_m, "m")
    if hi <= lo:
        raise ProtocolError("upper_m", upper_m, f"must exceed lower_m = {lo:g} m")

    def ratio(r):
        return float(abs(confounder.energy_j(r)) / abs(gravity.energy_j(r))) or 1e-300

    return _last_crossing(ratio, lo, hi, f, confounder.label)


def _arranged_branches(style: str, centre_distance_m: float, branch_span_m: float, branch_count: int):
    axis = {"in_line": np.array([1.0, 0.0, 0.0]), "side_by_side": np.array([0.0, 1.0, 0.0])}[style]
    offsets = np.linspace(-branch_span_m / 2, branch_span_m / 2, branch_count)[:, None] * axis[None, :]
    ca = np.array([-0.5 * centre_distance_m, 0.0, 0.0])
    return ca, offsets, -ca, offsets


def smallest_centre_distance_for_phase_m(confounder, gravity: NewtonianGravity, *, style: str,
                                         branch_span_m: float, fraction: float = DEFAULT_SHARE_LIMIT,
                                         branch_count: int = 2, upper_m: float = 1.0,
                                         contact_m: float = 0.0) -> float:
    """Smallest centre distance d at which |theta_conf| <= fraction |theta_grav| for all larger d [m].

    Geometry as gqsim's ``[arrangement]`` table (:mod:`gqsim.superposition.setup`): centres d apart along
    x, ``branch_count`` branches spanning ``branch_span_m`` along x (``in_line``) or y
    (``side_by_side``), static branches (the hold time cancels in the ratio). Compares
    Frobenius norms of the entangling-phase matrices (|theta| for qubits). ``contact_m`` is
    the sum of radii: the closest branch approach must exceed it.
    """
    if style not in ("in_line", "side_by_side"):
        raise ProtocolError("style", style, "must be 'in_line' or 'side_by_side'")
    f = _check_limit(fraction)
    span = _positive("branch_span_m", branch_span_m, "m")
    if isinstance(branch_count, bool) or not isinstance(branch_count, int) or branch_count < 2:
        raise ProtocolError("branch_count", branch_count, "must be an integer >= 2")
    contact = max(0.0, float(contact_m))
    lower = (span + contact) * (1 + 1e-9) if style == "in_line" else max(contact, span * 1e-3) * (1 + 1e-9)

    def ratio(d):
        geometry = _arranged_branches(style, d, span, branch_count)
        tc = entangling_phase_matrix_rad(branch_phase_matrix_rad(confounder, *geometry, hold_s=1.0))
        tg = entangling_phase_matrix_rad(branch_phase_matrix_rad(gravity, *geometry, hold_s=1.0))
        return float(np.linalg.norm(tc) / np.linalg.norm(tg)) or 1e-300

    return _last_crossing(ratio, lower, _positive("upper_m", upper_m, "m"), f, confounder.label)


def casimir_polder_phase_crossover_m(*, relative_permittivity: float, density_kg_m3: float, style: str,
                                     branch_span_m: float, fraction: float = DEFAULT_SHARE_LIMIT,
                                     temperature_k: float = 0.0, branch_count: int = 2) -> float:
    """Centre distance below which Casimir-Polder's entangling phase exceeds ``fraction`` of gravity's [m].

    Two equal homogeneous spheres in gqsim's ``[arrangement]`` geometry (see
    :func:`smallest_centre_distance_for_phase_m`). Both entangling phases scale as R^6 (a^2 and
    m^2), so the answer does not depend on the radius; it is computed at R = 1 um with the
    closest branch approach kept above the sum of radii.
    """
    radius = 1e-6
    rho = _positive("density_kg_m3", density_kg_m3, "kg/m^3")
    mass = 4.0 / 3.0 * math.pi * radius**3 * rho
    temperature = _finite("temperature_k", temperature_k, "K")
    if temperature < 0:
        raise ProtocolError("temperature_k", temperature_k, "must be >= 0 K")
    spheres = dict(radius_a_m=radius, radius_b_m=radius, permittivity_a=relative_permittivity,
                   permittivity_b=relative_permittivity)
    force = (ThermalCasimirPolder(**spheres, temperature_k=temperature) if temperature > 0
             else RetardedCasimirPolder(**spheres))
    if clausius_mossotti_factor(relative_permittivity) == 0:
        raise PhysicsError("relative_permittivity", relative_permittivity,
                           "eps = 1 has no Casimir-Polder force, so every separation is safe")
    return smallest_centre_distance_for_phase_m(force, NewtonianGravity(mass_a_kg=mass, mass_b_kg=mass),
                                                style=style, branch_span_m=branch_span_m, fraction=fraction,
                                                branch_count=branch_count, contact_m=2 * radius)


# ----------------------------------------------------------------------------- protocol fragment

def fragment() -> dict:
    """The JSON-schema fragment ``gqsim/protocol/schemas/confounders-v1.fragment.json`` as a dict."""
    from gqsim.protocol.reader import read_schema_file

    return read_schema_file("confounders-v1.fragment.json")


def with_interaction_keys(schema: Mapping) -> dict:
    """A copy of a family schema with the fragment's body keys and ``interactions`` table added.

    Inserts ``fragment()["body_properties"]`` into ``properties.bodies.items.properties``
    and ``fragment()["top_level_properties"]`` into ``properties``; idempotent.
    """
    out = json.loads(json.dumps(schema))
    frag = fragment()
    out["properties"]["bodies"]["items"]["properties"].update(frag["body_properties"])
    out["properties"].update(frag["top_level_properties"])
    return out


def _permittivity(key: str, table: Mapping[str, Any]) -> tuple[float | None, bool]:
    """(permittivity or None for a conductor, known?) from relative_permittivity or material."""
    if "relative_permittivity" in table:
        return float(table["relative_permittivity"]), True
    if "material" in table:
        from gqsim.physics.materials import material
        return material(table["material"], f"{key}.material").relative_permittivity, True
    return None, False


def potentials_from_tables(interactions: Mapping[str, Any] | None, body_tables: Sequence[Mapping[str, Any]], *,
                           masses_kg: Sequence[float], radii_m: Sequence[float | None]) -> tuple:
    """Pair potentials (gravity first) named by a validated ``[interactions]`` table.

    Parameters
    ----------
    interactions : the validated table (see the fragment), or None for gravity alone
    body_tables : the two validated ``[[bodies]]`` tables (read: ``charge_c``,
        ``dipole_c_m``, ``relative_permittivity``, ``dispersion_resonance_rad_s``, ``material``)
    masses_kg, radii_m : resolved masses [kg] and radii [m] (None when unknown), from the setup stage

    Returns
    -------
    tuple of potentials in the order of ``interactions.include`` (gravity first if present).
    With ``conducting_screen = true`` the electromagnetic potentials are left out: an ideal
    grounded conducting plane between the bodies cancels every field across it, and each
    body's interaction with its own image depends on that body alone, so it shifts branch
    phases locally but cannot entangle (method of images, Sect. 2.1 of [Jackson1999]).
    """
    if interactions is None:
        return (NewtonianGravity(mass_a_kg=masses_kg[0], mass_b_kg=masses_kg[1]),)
    include = list(interactions.get("include", ["gravity"]))
    for name in include:
        if name not in FORCE_LABELS:
            raise ProtocolError("interactions.include", name, f"must be among {list(FORCE_LABELS)}")
    if interactions.get("conducting_screen", False):
        include = [n for n in include if n not in ELECTROMAGNETIC_LABELS]
        if not include:
            raise ProtocolError("interactions.include", list(interactions.get("include", [])),
                                "the conducting screen removes every force listed; include gravity")
    ordered = sorted(dict.fromkeys(include), key=lambda n: (n != "gravity", include.index(n)))
    keys = [f"bodies[{i}]" for i in range(2)]

    def need(i: int, name: str, force: str):
        if name not in body_tables[i]:
            hint = " (a dipole needs an orientation: [px, py, pz] in C m)" if name == "dipole_c_m" else ""
            raise ProtocolError(f"{keys[i]}.{name}", None, f"is required by '{force}' in interactions.include{hint}")
        return body_tables[i][name]

    def radius(i: int, force: str) -> float:
        if radii_m[i] is None:
            raise ProtocolError(f"{keys[i]}.radius_m", None, f"is required by '{force}' in interactions.include")
        return float(radii_m[i])

    def permittivity(i: int, force: str, conductor_ok: bool):
        eps, known = _permittivity(keys[i], body_tables[i])
        if not known:
            raise ProtocolError(f"{keys[i]}.relative_permittivity", None,
                                f"is required by '{force}' in interactions.include (or name a material)")
        if eps is None and not conductor_ok:
            raise PhysicsError(f"{keys[i]}.material", body_tables[i].get("material"),
                               f"'{force}' is modelled for dielectric spheres only, not conductors")
        return eps

    def charge(i: int) -> float:
        return float(body_tables[i].get("charge_c", 0.0))

    out = []
    for name in ordered:
        if name == "gravity":
            out.append(NewtonianGravity(mass_a_kg=masses_kg[0], mass_b_kg=masses_kg[1]))
        elif name == "casimir_polder":
            spheres = dict(radius_a_m=radius(0, name), radius_b_m=radius(1, name),
                           permittivity_a=permittivity(0, name, False), permittivity_b=permittivity(1, name, False))
            temperature = float(interactions.get("field_temperature_k", 0.0))
            out.append(ThermalCasimirPolder(**spheres, temperature_k=temperature) if temperature > 0
                       else RetardedCasimirPolder(**spheres))
        elif name == "london_van_der_waals":
            out.append(LondonVanDerWaals(radius_a_m=radius(0, name), radius_b_m=radius(1, name),
                                         permittivity_a=permittivity(0, name, False),
                                         permittivity_b=permittivity(1, name, False),
                                         resonance_a_rad_s=need(0, "dispersion_resonance_rad_s", name),
                                         resonance_b_rad_s=need(1, "dispersion_resonance_rad_s", name)))
        elif name == "coulomb":
            if not any("charge_c" in t for t in body_tables):
                need(0, "charge_c", name)
            out.append(Coulomb(charge_a_c=charge(0), charge_b_c=charge(1)))
        elif name == "charge_induced_dipole":
            if not any("charge_c" in t for t in body_tables):
                need(0, "charge_c", name)
            out.append(ChargeInducedDipole(charge_a_c=charge(0), charge_b_c=charge(1),
                                           radius_a_m=radius(0, name), radius_b_m=radius(1, name),
                                           permittivity_a=permittivity(0, name, True),
                                           permittivity_b=permittivity(1, name, True)))
        elif name == "dipole_dipole":
            out.append(DipoleDipole(dipole_a_c_m=need(0, "dipole_c_m", name),
                                    dipole_b_c_m=need(1, "dipole_c_m", name)))
        elif name == "dipole_induced_dipole":
            if not any("dipole_c_m" in t for t in body_tables):
                need(0, "dipole_c_m", name)
            out.append(DipoleInducedDipole(dipole_a_c_m=body_tables[0].get("dipole_c_m", [0.0, 0.0, 0.0]),
                                           dipole_b_c_m=body_tables[1].get("dipole_c_m", [0.0, 0.0, 0.0]),
                                           radius_a_m=radius(0, name), radius_b_m=radius(1, name),
                                           permittivity_a=permittivity(0, name, True),
                                           permittivity_b=permittivity(1, name, True)))
    return tuple(out)


_BODY_ATTRIBUTES = ("charge_c", "dipole_c_m", "relative_permittivity", "dispersion_resonance_rad_s", "material")


def _body_table(body) -> dict:
    """The fragment's body keys (and ``material``) of a mapping or a body object; None values dropped."""
    get = body.get if isinstance(body, Mapping) else (lambda k, d=None: getattr(body, k, d))
    return {k: get(k) for k in _BODY_ATTRIBUTES if get(k) is not None}


def potential_factory(name: str):
    """A factory (body_a, body_b) -> pair potential for the force ``name`` (a label in FORCE_LABELS).

    For model builders that build potentials body pair by body pair (the oscillators'
    ``POTENTIAL_FACTORIES``): the bodies may be mappings or objects; ``mass_kg`` and
    ``radius_m`` are read from them, and the fragment's body keys (``charge_c``,
    ``dipole_c_m``, ``relative_permittivity``, ``dispersion_resonance_rad_s``) plus
    ``material`` when present. Errors are those of :func:`potentials_from_tables`.
    """
    if name not in FORCE_LABELS:
        raise ProtocolError("interactions.include", name, f"must be among {list(FORCE_LABELS)}")

    def make(body_a, body_b):
        def read(body, key):
            return body.get(key) if isinstance(body, Mapping) else getattr(body, key, None)

        pots = potentials_from_tables({"include": [name]}, [_body_table(body_a), _body_table(body_b)],
                                      masses_kg=[read(body_a, "mass_kg"), read(body_b, "mass_kg")],
                                      radii_m=[read(body_a, "radius_m"), read(body_b, "radius_m")])
        return pots[0]

    make.__name__ = f"{name}_between"
    return make


def split_interaction_keys(data: Mapping[str, Any]) -> tuple[dict, dict]:
    """Split a protocol mapping into (family part, confounder part).

    The confounder part holds ``interactions`` and, per body, the fragment's body keys;
    the family part is everything else, for :func:`gqsim.protocol.reader.parse_protocol`. Once the
    family schemas include the fragment this split is harmless (the keys validate twice).
    """
    frag = fragment()
    body_keys = set(frag["body_properties"])
    family = json.loads(json.dumps(dict(data)))
    extra: dict = {}
    if "interactions" in family:
        extra["interactions"] = family.pop("interactions")
    bodies = family.get("bodies")
    if isinstance(bodies, list):
        extra["bodies"] = [{k: b.pop(k) for k in sorted(body_keys & set(b))} if isinstance(b, dict) else {}
                           for b in bodies]
    return family, extra


def validate_interaction_keys(extra: Mapping[str, Any]) -> None:
    """Validate the confounder part against the fragment; one-line ProtocolError on failure."""
    import jsonschema

    from gqsim.protocol.reader import _to_protocol_error  # same error wording as every protocol key

    frag = fragment()
    schema = {"type": "object", "properties": {
        **frag["top_level_properties"],
        "bodies": {"type": "array", "items": {"type": "object", "properties": frag["body_properties"]}}}}
    errors = list(jsonschema.Draft202012Validator(schema).iter_errors(dict(extra)))
    if errors:
        worst = max(errors, key=lambda e: len(e.absolute_path))
        raise _to_protocol_error(worst)
