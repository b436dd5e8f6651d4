"""Model stage for trapped oscillators: scaling, Hessian couplings, quadratic Hamiltonians.

Conventions (used by every module of this subpackage)
-----------------------------------------------------
* Each active mode i (one axis of one body) has a reference angular frequency
  omega_i [rad/s], the body's preparation trap on that axis, and a length scale
  ell_i = sqrt(hbar / (m_i omega_i)) = sqrt(2) x_zpf,i.
* Dimensionless quadratures x_i = X_i / ell_i and p_i = P_i ell_i / hbar, so
  [x_i, p_j] = i delta_ij and x = (a + a^dag)/sqrt2, p = -i(a - a^dag)/sqrt2 with a the
  ladder operator of the preparation trap. The vacuum has Var(x) = Var(p) = 1/2.
* Phase-space vector r = (x_1, p_1, x_2, p_2, ...), symplectic form
  Omega = diag([[0, 1], [-1, 0]], ...), so [r_j, r_k] = i Omega_jk.
* Time is measured in units of 1/omega_unit with omega_unit the largest reference
  frequency; energies in units of hbar omega_unit. The Hamiltonian is
  H = 1/2 r^T H r - h^T r  (H the "Hamiltonian matrix", h the linear drive).

This is the one place where SI numbers become unit-free: gravitational couplings,
~20 orders of magnitude below trap energies in joules, become lambda = G m / (omega^2 d^3)
relative to 1 here. Everything downstream (channels, engines, measures) works in these
units and converts back only through :class:`Scales`.

Hessian of a central pair potential (second-order expansion of V(|R + u_b - u_a|)
around the equilibrium separation R = d n; small-oscillation expansion, Ch. 6 of [Goldstein2002]):
    V ~ V(d) + V'(d) n.(u_b - u_a) + 1/2 (u_b - u_a)^T Hess (u_b - u_a),
    Hess = V''(d) n n^T + V'(d)/d (I - n n^T).
For gravity V = -G m_a m_b / r this gives +2 G m_a m_b x_a x_b / d^3 along the axis with
shifts -G m_a m_b x^2 / d^3, and -G m_a m_b x_a x_b / d^3 across it.

Equation numbers cited in this module are recalled, not checked against the papers (from memory).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np
from scipy.constants import hbar

from gqsim.errors import PhysicsError
from gqsim.oscillators.setup import AXES, Body, Setup
from gqsim.physics.potentials import NewtonianGravity, PairPotential, pair_gradient_at, pair_hessian_at

__all__ = [
    "Scales", "StageModel", "AnharmonicTerm", "OscillatorModel", "PairPotentialFactory",
    "gravity_between", "POTENTIAL_FACTORIES", "interactions_between", "pair_hessian", "stiffness_matrix",
    "build_model", "symplectic_form", "radial_derivative", "squeezed_thermal_covariance", "setup_factories",
    "pair_potentials",
]

#: (body_a, body_b) -> one pair potential, or a sequence of them
PairPotentialFactory = Callable[[Body, Body], "PairPotential | Sequence[PairPotential]"]


def gravity_between(a: Body, b: Body) -> NewtonianGravity:
    """Newtonian gravity between bodies ``a`` and ``b`` (the default pair potential)."""
    return NewtonianGravity(mass_a_kg=a.mass_kg, mass_b_kg=b.mass_kg)


#: protocol name -> factory building the pair potential for two bodies (used when a caller asks
#: for potentials by name; protocol files go through ``[interactions]``, see :func:`interactions_between`).
POTENTIAL_FACTORIES: dict[str, PairPotentialFactory] = {"gravity": gravity_between}

_EM_KEYS = ("charge_c", "dipole_c_m", "relative_permittivity", "dispersion_resonance_rad_s", "material")


def interactions_between(table):
    """Factory for the potentials named by a validated ``[interactions]`` table, body pair by body pair.

    Delegates to :func:`gqsim.physics.electromagnetic.potentials_from_tables` (gravity first; Casimir-Polder,
    Coulomb, dipole terms; a conducting screen removes the electromagnetic ones), reading each
    body's mass, radius and electromagnetic keys.
    """
    from gqsim.physics.electromagnetic import potentials_from_tables

    def make(a: Body, b: Body):
        tables = [{k: getattr(body, k) for k in _EM_KEYS if getattr(body, k) is not None} for body in (a, b)]
        return potentials_from_tables(dict(table), tables, masses_kg=[a.mass_kg, b.mass_kg],
                                      radii_m=[a.radius_m, b.radius_m])

    make.__name__ = "interactions"
    return make


def _potentials(factory: PairPotentialFactory, a: Body, b: Body) -> tuple:
    made = factory(a, b)
    return tuple(made) if isinstance(made, (tuple, list)) else (made,)


@functools.lru_cache(maxsize=16)
def symplectic_form(n_modes: int) -> np.ndarray:
    """Omega = direct sum of [[0, 1], [-1, 0]] over ``n_modes`` modes, (2n, 2n); read-only and
    cached (every model build and measure asks for it)."""
    omega = np.zeros((2 * n_modes, 2 * n_modes))
    idx = np.arange(0, 2 * n_modes, 2)
    omega[idx, idx + 1] = 1.0
    omega[idx + 1, idx] = -1.0
    omega.setflags(write=False)
    return omega


def radial_derivative(potential: PairPotential, r_m: float, order: int) -> float:
    """d^n V / dr^n at ``r_m`` [J/m^n] for order 1..4.

    Orders 1 and 2 come from the potential itself. Orders 3 and 4 are asked of the potential
    too; Newtonian gravity, whose shared implementation stops at order 2, gets them from
    successive differentiation of -G m_a m_b / r: (-1)^(n+1) n! G m_a m_b / r^(n+1)
    (elementary calculus).
    """
    try:
        return float(potential.radial_derivative(r_m, order))
    except ValueError:
        if isinstance(potential, NewtonianGravity) and order in (3, 4):
            from scipy.constants import G
            k = G * potential.mass_a_kg * potential.mass_b_kg
            return (-1) ** (order + 1) * math.factorial(order) * k / r_m ** (order + 1)
        raise PhysicsError("solver.anharmonic_order", order,
                           f"pair potential {potential.label!r} gives no radial derivative of order {order}") from None


def pair_hessian(potential: PairPotential, separation_m: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Force and Hessian of a pair potential at separation vector R = r_b - r_a.

    Central potentials: Hess = V''(d) n n^T + V'(d)/d (I - n n^T) (second-order Taylor expansion
    of V(|R + u|), Ch. 6 of [Goldstein2002]); orientation-dependent ones (fixed dipoles) use
    their own gradient and Hessian in the separation vector. Both through
    :func:`gqsim.physics.potentials.pair_gradient_at` / :func:`gqsim.physics.potentials.pair_hessian_at`.

    Parameters
    ----------
    potential : pair potential (``radial_derivative`` of orders 1 and 2, or ``gradient_from_vector``
        and ``hessian_from_vector``)
    separation_m : R = r_b - r_a [m], (3,)

    Returns
    -------
    force_on_b_n : -grad_b V [N], (3,); the force on a is its negative
    hessian_n_per_m : Hess [N/m], (3, 3)
    """
    sep = np.asarray(separation_m, dtype=float)
    return -pair_gradient_at(potential, sep), pair_hessian_at(potential, sep)


def _mode_index(bodies: Sequence[Body]) -> list[tuple[int, int]]:
    """(body index, axis index) of every mode, in mode order."""
    return [(i, AXES.index(a)) for i, b in enumerate(bodies) for a in b.modes]


def stiffness_matrix(bodies: Sequence[Body], factories: Sequence[PairPotentialFactory]
                     ) -> tuple[np.ndarray, np.ndarray]:
    """Pair-potential stiffness between all active modes and the static forces on them.

    Sums, over every pair (a, b) and every potential, the Hessian blocks
    K_aa += Hess, K_bb += Hess, K_ab = K_ba -= Hess (energy 1/2 u^T K u), then keeps the rows
    and columns of active modes (inactive axes are held fixed).

    Returns
    -------
    stiffness_n_per_m : (n_modes, n_modes) K [N/m] (trap terms not included)
    force_n : (n_modes,) static force on every mode at the trap centres [N]
    """
    nb = len(bodies)
    full = np.zeros((3 * nb, 3 * nb))
    force = np.zeros(3 * nb)
    for a in range(nb):
        for b in range(a + 1, nb):
            sep = np.subtract(bodies[b].position_m, bodies[a].position_m)
            for pot in (p for factory in factories for p in _potentials(factory, bodies[a], bodies[b])):
                f_b, hess = pair_hessian(pot, sep)
                sa, sb = slice(3 * a, 3 * a + 3), slice(3 * b, 3 * b + 3)
                full[sa, sa] += hess
                full[sb, sb] += hess
                full[sa, sb] -= hess
                full[sb, sa] -= hess
                force[sb] += f_b
                force[sa] -= f_b
    idx = [3 * i + ax for i, ax in _mode_index(bodies)]
    return full[np.ix_(idx, idx)], force[idx]


@dataclass(frozen=True, kw_only=True)
class Scales:
    """The single conversion between SI and the dimensionless units of the engines.

    Attributes
    ----------
    omega_unit_rad_s : frequency unit omega_unit [rad/s]; dimensionless time tau = omega_unit t
    omega_ref_rad_s : (n_modes,) reference (preparation-trap) angular frequencies [rad/s]
    mass_kg : (n_modes,) mass of the body each mode belongs to [kg]
    length_m : (n_modes,) ell_i = sqrt(hbar / (m_i omega_i)) [m]; X_i = ell_i x_i
    """

    omega_unit_rad_s: float
    omega_ref_rad_s: np.ndarray
    mass_kg: np.ndarray
    length_m: np.ndarray

    @classmethod
    def for_bodies(cls, bodies: Sequence[Body]) -> "Scales":
        omega = np.array([b.omega_rad_s(a) for b in bodies for a in b.modes])
        mass = np.array([b.mass_kg for b in bodies for _ in b.modes])
        return cls(omega_unit_rad_s=float(omega.max()), omega_ref_rad_s=omega, mass_kg=mass,
                   length_m=np.sqrt(hbar / (mass * omega)))

    @property
    def zero_point_m(self) -> np.ndarray:
        """x_zpf = sqrt(hbar / (2 m omega)) of every mode [m], (n_modes,)."""
        return self.length_m / math.sqrt(2.0)

    def stiffness_to_hamiltonian(self, stiffness_n_per_m: np.ndarray) -> np.ndarray:
        """K_ij [N/m] -> K_ij ell_i ell_j / (hbar omega_unit), the x-x block of H."""
        ell = self.length_m
        return stiffness_n_per_m * np.outer(ell, ell) / (hbar * self.omega_unit_rad_s)

    def force_to_drive(self, force_n: np.ndarray) -> np.ndarray:
        """F_i [N] -> F_i ell_i / (hbar omega_unit), the linear drive on x_i."""
        return force_n * self.length_m / (hbar * self.omega_unit_rad_s)

    def position_variance_m2(self, sigma_xx: np.ndarray, mode: int) -> np.ndarray:
        """Var(X_i) [m^2] from covariance entries sigma_{x_i x_i} = 2 Var(x_i)."""
        return 0.5 * sigma_xx * self.length_m[mode] ** 2

    def rate_to_unit(self, rate_per_s: float) -> float:
        """A rate [1/s] in units of omega_unit."""
        return rate_per_s / self.omega_unit_rad_s


@dataclass(frozen=True, kw_only=True)
class StageModel:
    """The quadratic Hamiltonian of one stage in the scaled units of :class:`Scales`.

    Attributes
    ----------
    label : stage name
    duration_s : stage length [s]
    hamiltonian : (2n, 2n) real symmetric H in H = 1/2 r^T H r - h^T r
    drive : (2n,) h (from the static pair forces)
    stiffness_n_per_m : (n, n) total stiffness: traps plus pair Hessian [N/m]
    omega_squared_rad2_s2 : (n,) signed trap omega^2 of each mode (negative when inverted) [rad^2/s^2]
    """

    label: str
    duration_s: float
    hamiltonian: np.ndarray
    drive: np.ndarray
    stiffness_n_per_m: np.ndarray
    omega_squared_rad2_s2: np.ndarray


@dataclass(frozen=True, kw_only=True)
class AnharmonicTerm:
    """Cubic and quartic terms of one pair potential V(|R + u|), u = u_b - u_a, in any direction.

    Lengths are in units of ell_ref (the smallest mode length), energies in hbar omega_unit. With
    s = n.u and q = |u|^2 (active axes only; inactive ones are frozen) and
    |R + u| - d = delta_1 + delta_2 + delta_3 + delta_4 + O(u^5),
    delta_1 = s, delta_2 = (q - s^2)/(2d), delta_3 = (s^3 - s q)/(2 d^2),
    delta_4 = (-q^2/8 + 3 s^2 q/4 - 5 s^4/8)/d^3 (binomial series of d sqrt(1 + (2 d s + q)/d^2)),
    the Taylor series V(d + delta) = sum_n V^(n) delta^n / n! (elementary calculus) gives
    order 3: V1 delta_3 + V2 delta_1 delta_2 + V3 delta_1^3/6,
    order 4: V1 delta_4 + V2 (delta_2^2/2 + delta_1 delta_3) + V3 delta_1^2 delta_2/2 + V4 delta_1^4/24,
    with Vn the n-th radial derivative at d. Along the line of centres (q = s^2) this reduces to
    V3 s^3/6 + V4 s^4/24.

    Attributes
    ----------
    pair, label : the two bodies and the potential's label
    s_weights : (n,) s = sum_i s_weights_i x_i
    axis_weights : (3, n) u_axis = sum_i axis_weights[axis, i] x_i (q = sum over axes of u_axis^2)
    distance : d / ell_ref
    derivatives : (4,) V^(n)(d) ell_ref^n / (hbar omega_unit), n = 1..4
    order : 3 or 4 (the highest order kept)
    """

    pair: tuple[str, str]
    s_weights: np.ndarray
    axis_weights: np.ndarray
    distance: float
    derivatives: np.ndarray
    order: int
    label: str = "gravity"

    def energy(self, x, multiply=None):
        """Order-3 (+ order-4) energy for mode coordinates ``x`` (numbers, arrays or commuting operators).

        ``x`` is a sequence of per-mode dimensionless positions; ``multiply`` multiplies two of them
        (default ``*``; pass ``lambda a, b: a @ b`` for operator matrices).
        """
        mul = multiply or (lambda p, q: p * q)
        s = sum(w * xi for w, xi in zip(self.s_weights, x) if w != 0)
        comps = [sum(w * xi for w, xi in zip(row, x) if w != 0) for row in self.axis_weights if np.any(row)]
        q = sum(mul(c, c) for c in comps)
        d = self.distance
        v1, v2, v3, v4 = self.derivatives
        s2 = mul(s, s)
        d2 = (q - s2) * (1.0 / (2 * d))
        d3 = (mul(s2, s) - mul(s, q)) * (1.0 / (2 * d * d))
        out = v1 * d3 + v2 * mul(s, d2) + (v3 / 6.0) * mul(s2, s)
        if self.order >= 4:
            d4 = (mul(q, q) * (-1.0 / 8) + mul(s2, q) * (3.0 / 4) + mul(s2, s2) * (-5.0 / 8)) * (1.0 / d**3)
            out = (out + v1 * d4 + v2 * (mul(d2, d2) * 0.5 + mul(s, d3)) + (v3 / 2.0) * mul(s2, d2)
                   + (v4 / 24.0) * mul(s2, s2))
        return out


@dataclass(frozen=True, kw_only=True)
class OscillatorModel:
    """Everything the engines need, in scaled units, plus SI facts for the report.

    Attributes
    ----------
    setup : the :class:`~gqsim.oscillators.setup.Setup` it was built from
    mode_names : (n,) names ``"<body>.<axis>"``
    scales : :class:`Scales`
    stages : per-stage :class:`StageModel`
    pair_stiffness_n_per_m : (n, n) pair-potential Hessian between active modes [N/m]
    static_force_n : (n,) static pair force on each mode [N]
    static_displacement_m : (n,) equilibrium shift in the preparation trap [m]
    coupling_rad_s : (n, n) g_ij = K_ij x_zpf,i x_zpf,j / hbar [rad/s] (off-diagonal couplings;
        the diagonal holds the frequency shifts K_ii / (2 m_i omega_i))
    anharmonic : cubic/quartic terms (empty unless ``solver.anharmonic_order`` > 2)
    potentials : labels of the pair potentials used
    """

    setup: Setup
    mode_names: tuple[str, ...]
    scales: Scales
    stages: tuple[StageModel, ...]
    pair_stiffness_n_per_m: np.ndarray
    static_force_n: np.ndarray
    static_displacement_m: np.ndarray
    coupling_rad_s: np.ndarray
    anharmonic: tuple[AnharmonicTerm, ...] = field(default_factory=tuple)
    potentials: tuple[str, ...] = ("gravity",)

    @property
    def n_modes(self) -> int:
        return len(self.mode_names)

    @property
    def is_gaussian(self) -> bool:
        """True when the Gaussian engine represents this model exactly."""
        return not self.anharmonic and all(b.initial.kind == "gaussian" for b in self.setup.bodies)

    def body_modes(self, label: str) -> list[int]:
        """Indices of the modes of body ``label``."""
        return [i for i, name in enumerate(self.mode_names) if name.split(".")[0] == label]

    def stage_boundaries_s(self) -> np.ndarray:
        """Start times of all stages plus the end time [s], (n_stages + 1,)."""
        return np.concatenate(([0.0], np.cumsum([s.duration_s for s in self.stages])))


def _stage_model(stage, bodies, names, scales, pair_k, force) -> StageModel:
    n = len(names)
    mass = scales.mass_kg
    omega = 2.0 * math.pi * np.asarray(stage.trap_hz)
    sign = np.array([-1.0 if name in stage.inverted else 1.0 for name in names])
    omega2 = sign * omega**2
    total = np.diag(mass * omega2) + pair_k
    for i, name in enumerate(names):
        if stage.trap_hz[i] > 0 and name not in stage.inverted and not total[i, i] > 0:
            raise PhysicsError(f"stages[{stage.label}].trap_hz", stage.trap_hz[i],
                               f"mode {name} is left with stiffness {total[i, i]:.3g} N/m <= 0 once the pair "
                               "forces are added; stiffen the trap or list the mode in inverted_modes")
    ham = np.zeros((2 * n, 2 * n))
    ham[0::2, 0::2] = scales.stiffness_to_hamiltonian(total)
    ham[1::2, 1::2] = np.diag(scales.omega_ref_rad_s / scales.omega_unit_rad_s)
    drive = np.zeros(2 * n)
    drive[0::2] = scales.force_to_drive(force)
    return StageModel(label=stage.label, duration_s=stage.duration_s, hamiltonian=ham, drive=drive,
                      stiffness_n_per_m=total, omega_squared_rad2_s2=omega2)


def _anharmonic_terms(bodies, names, scales, factories, order) -> tuple[AnharmonicTerm, ...]:
    if order <= 2:
        return ()
    terms = []
    ell_ref = float(scales.length_m.min())
    unit = hbar * scales.omega_unit_rad_s
    for a in range(len(bodies)):
        for b in range(a + 1, len(bodies)):
            sep = np.subtract(bodies[b].position_m, bodies[a].position_m)
            d = float(np.linalg.norm(sep))
            n_hat = sep / d
            axis_w = np.zeros((3, len(names)))
            for i, (bi, ax) in enumerate(_mode_index(bodies)):
                if bi in (a, b):
                    axis_w[ax, i] = (1.0 if bi == b else -1.0) * scales.length_m[i] / ell_ref
            s_w = n_hat @ axis_w
            for pot in (p for factory in factories for p in _potentials(factory, bodies[a], bodies[b])):
                if hasattr(pot, "hessian_from_vector"):  # the expansion below is in |R| alone
                    raise PhysicsError("solver.anharmonic_order", order,
                                       f"the orientation-dependent potential {pot.label!r} is expanded to second "
                                       "order only; use anharmonic_order = 2")
                derivs = np.array([radial_derivative(pot, d, k) * ell_ref**k / unit for k in (1, 2, 3, 4)])
                terms.append(AnharmonicTerm(pair=(bodies[a].label, bodies[b].label), s_weights=s_w,
                                            axis_weights=axis_w, distance=d / ell_ref, derivatives=derivs,
                                            order=order, label=pot.label))
    return tuple(terms)


def setup_factories(setup: Setup) -> list[PairPotentialFactory]:
    """The pair-potential factories a setup names: its ``[interactions]`` table, or the
    potentials listed by name (gravity by default)."""
    if setup.interactions is not None:
        return [interactions_between(setup.interactions)]
    return [POTENTIAL_FACTORIES[name] for name in setup.potentials]


def pair_potentials(setup: Setup, a: int, b: int) -> tuple:
    """Every pair potential between bodies ``a`` and ``b`` of ``setup``, as :func:`build_model` uses them."""
    return tuple(p for factory in setup_factories(setup) for p in _potentials(factory, setup.bodies[a], setup.bodies[b]))


def build_model(setup: Setup, factories: Sequence[PairPotentialFactory] | None = None) -> OscillatorModel:
    """Build the scaled quadratic model of every stage from a :class:`Setup`.

    Parameters
    ----------
    setup : validated setup
    factories : pair-potential factories (body_a, body_b) -> PairPotential; default: the ones named
        in ``setup.potentials`` (gravity unless the protocol says otherwise)

    Raises
    ------
    PhysicsError
        when a trapped mode is left with non-positive stiffness and is not declared inverted.
    """
    if factories is None:
        factories = setup_factories(setup)
        labels = tuple(setup.potentials)
    else:
        labels = tuple(getattr(f, "__name__", "custom") for f in factories)
    bodies = setup.bodies
    names = setup.mode_names
    scales = Scales.for_bodies(bodies)
    pair_k, force = stiffness_matrix(bodies, factories)
    stages = tuple(_stage_model(s, bodies, names, scales, pair_k, force) for s in setup.stages)
    prep_total = np.diag(scales.mass_kg * scales.omega_ref_rad_s**2) + pair_k
    try:
        static = np.linalg.solve(prep_total, force)
    except np.linalg.LinAlgError:
        raise PhysicsError("bodies.trap_hz", "preparation traps",
                           "the preparation stiffness matrix is singular") from None
    zpf = scales.zero_point_m
    coupling = pair_k * np.outer(zpf, zpf) / hbar
    anharmonic = _anharmonic_terms(bodies, names, scales, factories, setup.solver.anharmonic_order)
    return OscillatorModel(setup=setup, mode_names=names, scales=scales, stages=stages,
                           pair_stiffness_n_per_m=pair_k, static_force_n=force, static_displacement_m=static,
                           coupling_rad_s=coupling, anharmonic=anharmonic, potentials=labels)


def squeezed_thermal_covariance(occupation, squeeze_r, angle_rad) -> np.ndarray:
    """Covariance (..., 2, 2) of a squeezed thermal state of one mode, vacuum sigma = I:
    sigma = (2 n + 1) R(theta) diag(e^{-2r}, e^{2r}) R(theta)^T, written out element by element
    so that scalars and arrays of (n, r, theta) give the same numbers (Eq. (3.x) of
    [Serafini2017], single-mode Gaussian states; equation number from memory).
    """
    n, r, theta = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (occupation, squeeze_r, angle_rad)))
    c, s = np.cos(theta), np.sin(theta)
    lo, hi = np.exp(-2 * r), np.exp(2 * r)
    scale = 2 * n + 1
    out = np.empty(n.shape + (2, 2))
    out[..., 0, 0] = scale * (c * c * lo + s * s * hi)
    out[..., 1, 1] = scale * (s * s * lo + c * c * hi)
    out[..., 0, 1] = out[..., 1, 0] = scale * (c * s * (lo - hi))
    return out


def initial_moments(model: OscillatorModel) -> tuple[np.ndarray, np.ndarray]:
    """Mean (2n,) and covariance (2n, 2n) of the initial Gaussian state in scaled units.

    Each mode starts in a squeezed thermal state of its preparation trap,
    sigma = (2 n + 1) R(theta) diag(e^{-2r}, e^{2r}) R(theta)^T (vacuum sigma = I; theta = 0
    squeezes position), displaced to the static equilibrium plus the protocol's displacement.
    Eq. (3.x) of [Serafini2017] (single-mode Gaussian states; equation number from memory).
    """
    n = model.n_modes
    mean = np.zeros(2 * n)
    cov = np.zeros((2 * n, 2 * n))
    params = np.zeros((n, 3))  # occupation, r, theta of each mode
    scales = model.scales
    i = 0
    for body in model.setup.bodies:
        init = body.initial
        for k, axis in enumerate(body.modes):
            ax = AXES.index(axis)
            occ = init.occupation_at(scales.omega_ref_rad_s[i]) if init.kind == "gaussian" else 0.0
            params[i] = (occ, *init.squeezing(k))
            disp = model.static_displacement_m[i] + init.displacement_m[ax]
            mean[2 * i] = disp / scales.length_m[i]
            mean[2 * i + 1] = body.mass_kg * init.velocity_m_s[ax] * scales.length_m[i] / hbar
            i += 1
    blocks = squeezed_thermal_covariance(*params.T)
    for i in range(n):
        cov[2 * i:2 * i + 2, 2 * i:2 * i + 2] = blocks[i]
    return mean, cov
