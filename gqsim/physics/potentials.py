"""Model stage: pair potentials between two bodies.

Both model builders (branch phases for superposed masses, the Hessian for trapped
oscillators) take a sequence of pair potentials. A pair potential is central: it
depends only on the centre-to-centre distance ``r`` [m] and returns energies in
joules. Gravity is :class:`NewtonianGravity`; non-gravitational confounders
(Casimir-Polder, Coulomb, dipole-dipole) implement the same interface.

Interface (duck-typed, see :class:`PairPotential`):

``label`` : str
    short name used in reports (``"gravity"``, ``"casimir_polder"`` ...)
``energy_j(r_m)`` : ndarray -> ndarray
    U(r) [J]
``radial_derivative(r_m, order)`` : ndarray, int -> ndarray
    d^n U / dr^n [J/m^n] for order 1 and 2 (needed by the Hessian builder)
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol, runtime_checkable

import numpy as np
from scipy.constants import G

from gqsim.errors import ProtocolError

__all__ = ["PairPotential", "NewtonianGravity", "pair_energy_at", "pair_gradient_at", "pair_hessian_at"]


@runtime_checkable
class PairPotential(Protocol):
    """What a model builder needs from a central pair potential."""

    label: str

    def energy_j(self, r_m: np.ndarray) -> np.ndarray: ...

    def radial_derivative(self, r_m: np.ndarray, order: int) -> np.ndarray: ...


@dataclass(frozen=True, kw_only=True)
class NewtonianGravity:
    """Newtonian attraction U(r) = -G m1 m2 / r.

    Exact for non-overlapping homogeneous (or spherically layered) spheres by the
    shell theorem (Book I Prop. 71 of [Newton1687]); ``G`` from scipy.constants.

    Parameters
    ----------
    mass_a_kg, mass_b_kg : the two masses [kg]
    """

    mass_a_kg: float
    mass_b_kg: float
    label: str = "gravity"

    def __post_init__(self):
        for name in ("mass_a_kg", "mass_b_kg"):
            value = getattr(self, name)
            if not (np.isfinite(value) and value > 0):
                raise ProtocolError(name, value, "must be a finite mass > 0 kg")

    def energy_j(self, r_m):
        """U(r) = -G m_a m_b / r [J]."""
        return -G * self.mass_a_kg * self.mass_b_kg / np.asarray(r_m, dtype=float)

    def energy_difference_j(self, r_m, r_ref_m, delta_m):
        """U(r) - U(r_ref) = G m_a m_b (r - r_ref) / (r r_ref) [J], exact and free of cancellation
        when ``delta_m`` = r - r_ref is supplied accurately."""
        return G * self.mass_a_kg * self.mass_b_kg * np.asarray(delta_m) / (np.asarray(r_m) * np.asarray(r_ref_m))

    def radial_derivative(self, r_m, order: int):
        """d^n U/dr^n = (-1)^(n+1) n! G m_a m_b / r^(n+1) [J/m^n]."""
        r = np.asarray(r_m, dtype=float)
        k = G * self.mass_a_kg * self.mass_b_kg
        if order == 1:
            return k / r**2
        if order == 2:
            return -2.0 * k / r**3
        raise ValueError(f"order must be 1 or 2, got {order}")


def pair_energy_at(potential, separation_m) -> np.ndarray:
    """U at separation vectors (..., 3) [m] -> (...) [J] for any pair potential.

    Uses the optional ``energy_from_vector_j`` of orientation-dependent potentials
    (e.g. fixed permanent dipoles), otherwise ``energy_j(|r|)``.
    """
    vectors = np.asarray(separation_m, dtype=float)
    method = getattr(potential, "energy_from_vector_j", None)
    if method is not None:
        return method(vectors)
    return potential.energy_j(np.linalg.norm(vectors, axis=-1))


def _own_or_distances(potential, separation_m, method_name: str):
    """(vectors, the potential's own ``method_name`` at them or None, distances or None): an
    orientation-dependent potential answers itself; a central one needs finite distances > 0."""
    vectors = np.asarray(separation_m, dtype=float)
    method = getattr(potential, method_name, None)
    if method is not None:
        return vectors, method(vectors), None
    r = np.linalg.norm(vectors, axis=-1)
    if np.any(r <= 0) or not np.all(np.isfinite(r)):
        raise ValueError("pair separations must be finite and > 0 m")
    return vectors, None, r


def pair_gradient_at(potential, separation_m) -> np.ndarray:
    """dU/dr_i at separation vectors (..., 3) [m] -> (..., 3) [J/m]; the force on the second
    body is its negative.

    Central potentials: U'(r) n, n = r/|r| (chain rule, common practice); otherwise the
    potential's own ``gradient_from_vector``.
    """
    vectors, own, r = _own_or_distances(potential, separation_m, "gradient_from_vector")
    if own is not None:
        return own
    return np.asarray(potential.radial_derivative(r, 1))[..., None] * vectors / r[..., None]


def pair_hessian_at(potential, separation_m) -> np.ndarray:
    """d^2 U/dr_i dr_j at separation vectors (..., 3) [m] -> (..., 3, 3) [J/m^2].

    Central potentials: H = U'' n n^T + (U'/r)(I - n n^T), n = r/|r| (chain rule,
    common practice); otherwise the potential's own ``hessian_from_vector``.
    """
    vectors, own, r = _own_or_distances(potential, separation_m, "hessian_from_vector")
    if own is not None:
        return own
    n = vectors / r[..., None]
    nn = n[..., :, None] * n[..., None, :]
    d1 = np.asarray(potential.radial_derivative(r, 1))[..., None, None]
    d2 = np.asarray(potential.radial_derivative(r, 2))[..., None, None]
    return d2 * nn + (d1 / r[..., None, None]) * (np.eye(3) - nn)
