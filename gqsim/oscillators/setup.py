"""Setup stage for trapped oscillators: frozen parameter objects built from a protocol.

Everything here is SI and validated in ``__post_init__``; nothing here knows about
Hamiltonians. A *mode* is one active axis of one body, named ``"<body label>.<axis>"``
(``"A.x"``). Mode order everywhere in the subpackage is: bodies in protocol order,
and within a body the axes in the order x, y, z.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np
from scipy.constants import hbar, k as k_B

from gqsim.errors import PhysicsError, ProtocolError
from gqsim.physics.materials import material as lookup_material

__all__ = [
    "AXES", "InitialState", "BodyChannels", "Body", "Stage", "SolverOptions", "Setup",
    "setup_from_protocol", "initial_state_from_table", "mode_names",
]

AXES = ("x", "y", "z")
ENGINES = ("auto", "gaussian", "fock")


def _finite(key: str, value: float, *, minimum: float | None = None, strict: bool = False) -> None:
    if not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value):
        raise ProtocolError(key, value, "must be a finite number")
    if minimum is not None and (value <= minimum if strict else value < minimum):
        raise ProtocolError(key, value, f"must be {'>' if strict else '>='} {minimum}")


def _vec3(key: str, value) -> tuple[float, float, float]:
    arr = tuple(float(v) for v in value)
    if len(arr) != 3 or not all(math.isfinite(v) for v in arr):
        raise ProtocolError(key, value, "must be three finite numbers [x, y, z]")
    return arr


def _occupation(occupation: float | None, temperature_k: float | None, omega_rad_s: float) -> float:
    """The given occupation, or the Bose-Einstein n = 1/(e^{hbar omega/k_B T} - 1) at
    ``temperature_k`` (0 at T = 0) when a temperature is given instead (textbook statistical
    mechanics, common practice)."""
    if temperature_k is not None:
        if temperature_k == 0:
            return 0.0
        return 1.0 / math.expm1(hbar * omega_rad_s / (k_B * temperature_k))
    return float(occupation or 0.0)


@dataclass(frozen=True, kw_only=True)
class InitialState:
    """Initial state of every active mode of one body (prepared in the body's own trap).

    Parameters
    ----------
    kind : ``"gaussian"`` (squeezed displaced thermal), ``"fock"`` or ``"cat"`` (Fock engine only)
    occupation : mean thermal phonon number before squeezing [1], >= 0
    temperature_k : alternative to ``occupation``: Bose-Einstein occupation at the trap frequency [K]
    squeeze_r : squeezing parameter r >= 0 (position variance e^{-2r} times the thermal one at angle 0);
        one number for every active mode of the body, or one per active mode (axis order x, y, z)
    squeeze_angle_rad : squeezing angle; 0 squeezes position, pi/2 squeezes momentum [rad]; one
        number or one per active mode
    displacement_m : mean displacement from the trap centre [m], (3,)
    velocity_m_s : mean velocity [m/s], (3,)
    fock_n : phonon number of a Fock initial state
    cat_amplitude : coherent amplitude alpha of a cat state (a|alpha> = alpha|alpha>), dimensionless
    cat_parity : ``"even"`` (|alpha> + |-alpha>) or ``"odd"``
    """

    kind: str = "gaussian"
    occupation: float | None = None
    temperature_k: float | None = None
    squeeze_r: float | tuple[float, ...] = 0.0
    squeeze_angle_rad: float | tuple[float, ...] | None = None
    displacement_m: tuple[float, float, float] = (0.0, 0.0, 0.0)
    velocity_m_s: tuple[float, float, float] = (0.0, 0.0, 0.0)
    fock_n: int = 0
    cat_amplitude: float = 0.0
    cat_parity: str = "even"

    def __post_init__(self):
        if self.kind not in ("gaussian", "fock", "cat"):
            raise ProtocolError("initial.kind", self.kind, "must be one of gaussian, fock, cat")
        if self.occupation is not None and self.temperature_k is not None:
            raise ProtocolError("initial.temperature_k", self.temperature_k,
                                "give either occupation or temperature_k, not both")
        if self.occupation is not None:
            _finite("initial.occupation", self.occupation, minimum=0.0)
        if self.temperature_k is not None:
            _finite("initial.temperature_k", self.temperature_k, minimum=0.0)
        rs = self.squeeze_r if isinstance(self.squeeze_r, (list, tuple)) else (self.squeeze_r,)
        for r in rs:
            _finite("initial.squeeze_r", r, minimum=0.0)
        if isinstance(self.squeeze_r, (list, tuple)):
            object.__setattr__(self, "squeeze_r", tuple(float(r) for r in rs))
        if any(r > 0 for r in rs) and self.squeeze_angle_rad is None:
            raise ProtocolError("initial.squeeze_angle_rad", None,
                                "is required when squeeze_r > 0 (0 squeezes position, pi/2 momentum)")
        if self.squeeze_angle_rad is not None:
            angles = (self.squeeze_angle_rad if isinstance(self.squeeze_angle_rad, (list, tuple))
                      else (self.squeeze_angle_rad,))
            for angle in angles:
                _finite("initial.squeeze_angle_rad", angle)
            if isinstance(self.squeeze_angle_rad, (list, tuple)):
                object.__setattr__(self, "squeeze_angle_rad", tuple(float(a) for a in angles))
        object.__setattr__(self, "displacement_m", _vec3("initial.displacement_m", self.displacement_m))
        object.__setattr__(self, "velocity_m_s", _vec3("initial.velocity_m_s", self.velocity_m_s))
        if isinstance(self.fock_n, bool) or not isinstance(self.fock_n, int) or self.fock_n < 0:
            raise ProtocolError("initial.fock_n", self.fock_n, "must be an integer >= 0")
        _finite("initial.cat_amplitude", self.cat_amplitude, minimum=0.0)
        if self.cat_parity not in ("even", "odd"):
            raise ProtocolError("initial.cat_parity", self.cat_parity, "must be even or odd")
        if self.kind == "cat" and self.cat_amplitude == 0 and self.cat_parity == "odd":
            raise ProtocolError("initial.cat_amplitude", 0.0, "an odd cat needs cat_amplitude > 0")

    def squeezing(self, k: int) -> tuple[float, float]:
        """(r, angle [rad]) of the body's k-th active mode."""
        r = self.squeeze_r[k] if isinstance(self.squeeze_r, tuple) else self.squeeze_r
        angle = self.squeeze_angle_rad
        angle = angle[k] if isinstance(angle, tuple) else (angle or 0.0)
        return float(r), float(angle)

    def occupation_at(self, omega_rad_s: float) -> float:
        """Thermal occupation [1] at angular frequency ``omega_rad_s`` [rad/s] (Bose-Einstein)."""
        return _occupation(self.occupation, self.temperature_k, omega_rad_s)


@dataclass(frozen=True, kw_only=True)
class BodyChannels:
    """Open-system rates acting on every active mode of one body (numbers from the protocol).

    Parameters
    ----------
    damping_rate_per_s : energy damping rate gamma [1/s] (amplitude decays at gamma/2)
    damping_model : ``"quantum_optical"`` gamma(n+1)D[a] + gamma n D[a^dag], or ``"brownian"``
        (Caldeira-Leggett, velocity damping rate gamma)
    bath_occupation : bath phonon number n at the body's trap frequency [1]
    bath_temperature_k : bath temperature [K] (alternative to ``bath_occupation``; required for brownian)
    localisation_per_m2_s : Lambda in d rho/dt = -Lambda [x,[x,rho]] [1/(m^2 s)]
    heating_phonons_per_s : phase-insensitive heating rate [phonons/s]
    measurement_per_m2_s : continuous position measurement strength k [1/(m^2 s)]
        (backaction d rho/dt = -k [x,[x,rho]])
    measurement_efficiency : detection efficiency eta in [0, 1] (used by the conditional update)
    """

    damping_rate_per_s: float = 0.0
    damping_model: str = "quantum_optical"
    bath_occupation: float | None = None
    bath_temperature_k: float | None = None
    localisation_per_m2_s: float = 0.0
    heating_phonons_per_s: float = 0.0
    measurement_per_m2_s: float = 0.0
    measurement_efficiency: float = 1.0

    def __post_init__(self):
        for name in ("damping_rate_per_s", "localisation_per_m2_s", "heating_phonons_per_s",
                     "measurement_per_m2_s"):
            _finite(f"channels.{name}", getattr(self, name), minimum=0.0)
        if self.damping_model not in ("quantum_optical", "brownian"):
            raise ProtocolError("channels.damping_model", self.damping_model,
                                "must be quantum_optical or brownian")
        if self.bath_occupation is not None and self.bath_temperature_k is not None:
            raise ProtocolError("channels.bath_temperature_k", self.bath_temperature_k,
                                "give either bath_occupation or bath_temperature_k, not both")
        if self.bath_occupation is not None:
            _finite("channels.bath_occupation", self.bath_occupation, minimum=0.0)
        if self.bath_temperature_k is not None:
            _finite("channels.bath_temperature_k", self.bath_temperature_k, minimum=0.0)
        if self.damping_model == "brownian" and self.damping_rate_per_s > 0 and self.bath_temperature_k is None:
            raise ProtocolError("channels.bath_temperature_k", None,
                                "is required for damping_model = brownian (Lambda = m gamma k_B T / hbar^2)")
        _finite("channels.measurement_efficiency", self.measurement_efficiency, minimum=0.0)
        if self.measurement_efficiency > 1:
            raise ProtocolError("channels.measurement_efficiency", self.measurement_efficiency,
                                "must lie in [0, 1]")

    def bath_occupation_at(self, omega_rad_s: float) -> float:
        """Bath occupation [1] at angular frequency ``omega_rad_s`` [rad/s] (Bose-Einstein)."""
        return _occupation(self.bath_occupation, self.bath_temperature_k, omega_rad_s)


@dataclass(frozen=True, kw_only=True)
class Body:
    """One trapped body.

    Parameters
    ----------
    label : short unique name used in mode names and reports
    mass_kg : mass [kg]
    position_m : trap centre [m], (3,)
    trap_hz : preparation trap frequencies f_x, f_y, f_z [Hz] (cyclic); the initial state is defined
        in this trap and it sets the mode's quadrature scale
    modes : active axes, a subset of ("x", "y", "z")
    radius_m : sphere radius [m], if known (non-gravitational potentials need it)
    material : material name, if known
    initial : :class:`InitialState`
    channels : :class:`BodyChannels`
    charge_c, dipole_c_m, relative_permittivity, dispersion_resonance_rad_s : electromagnetic
        properties read by the non-gravitational pair potentials of ``[interactions]``
        (:mod:`gqsim.physics.electromagnetic`); None when not given
    """

    label: str
    mass_kg: float
    position_m: tuple[float, float, float]
    trap_hz: tuple[float, float, float]
    modes: tuple[str, ...] = ("x",)
    radius_m: float | None = None
    material: str | None = None
    initial: InitialState = field(default_factory=InitialState)
    channels: BodyChannels = field(default_factory=BodyChannels)
    charge_c: float | None = None
    dipole_c_m: tuple[float, float, float] | None = None
    relative_permittivity: float | None = None
    dispersion_resonance_rad_s: float | None = None

    def __post_init__(self):
        key = f"bodies[{self.label}]"
        if not isinstance(self.label, str) or not self.label or "." in self.label or "|" in self.label:
            raise ProtocolError(f"{key}.label", self.label, "must be a non-empty name without '.' or '|'")
        _finite(f"{key}.mass_kg", self.mass_kg, minimum=0.0, strict=True)
        object.__setattr__(self, "position_m", _vec3(f"{key}.position_m", self.position_m))
        object.__setattr__(self, "trap_hz", _vec3(f"{key}.trap_hz", self.trap_hz))
        modes = tuple(self.modes)
        if not modes or len(set(modes)) != len(modes) or any(a not in AXES for a in modes):
            raise ProtocolError(f"{key}.modes", list(modes), "must be distinct axes from x, y, z (at least one)")
        object.__setattr__(self, "modes", tuple(a for a in AXES if a in modes))
        for axis in self.modes:
            f = self.trap_hz[AXES.index(axis)]
            if not f > 0:
                raise ProtocolError(f"{key}.trap_hz", list(self.trap_hz),
                                    f"the preparation trap of active mode {self.label}.{axis} must be > 0 Hz "
                                    "(the initial state is defined in it)")
        if self.radius_m is not None:
            _finite(f"{key}.radius_m", self.radius_m, minimum=0.0, strict=True)
        for name in ("squeeze_r", "squeeze_angle_rad"):
            value = getattr(self.initial, name)
            if isinstance(value, tuple) and len(value) != len(self.modes):
                raise ProtocolError(f"{key}.initial.{name}", list(value),
                                    f"needs one value per active mode ({len(self.modes)}: {', '.join(self.modes)}) "
                                    "or a single number")

    def omega_rad_s(self, axis: str) -> float:
        """Preparation-trap angular frequency of ``axis`` [rad/s]."""
        return 2.0 * math.pi * self.trap_hz[AXES.index(axis)]


@dataclass(frozen=True, kw_only=True)
class Stage:
    """A time interval with fixed traps.

    Parameters
    ----------
    label : name shown in reports
    duration_s : length of the stage [s]
    trap_hz : trap frequency of every mode in mode order [Hz] (cyclic); 0 = free
    inverted : names of modes whose potential is inverted (omega^2 = -(2 pi f)^2) in this stage
    """

    label: str
    duration_s: float
    trap_hz: tuple[float, ...]
    inverted: tuple[str, ...] = ()

    def __post_init__(self):
        _finite(f"stages[{self.label}].duration_s", self.duration_s, minimum=0.0, strict=True)
        for f in self.trap_hz:
            _finite(f"stages[{self.label}].trap_hz", f, minimum=0.0)
        object.__setattr__(self, "trap_hz", tuple(float(f) for f in self.trap_hz))
        object.__setattr__(self, "inverted", tuple(self.inverted))


@dataclass(frozen=True, kw_only=True)
class SolverOptions:
    """Engine choice and the Fock engine's truncation settings.

    Parameters
    ----------
    engine : ``"auto"`` (Gaussian unless the physics needs Fock), ``"gaussian"`` or ``"fock"``
    fock_tolerance : target agreement of E_N between two cutoffs [nats]
    fock_max_cutoff : largest phonon cutoff per mode the Fock engine may try
    fock_top_population : warn when the top Fock level of a mode holds more than this population
    anharmonic_order : 2 keeps the quadratic Hessian; 3 or 4 adds the cubic/quartic terms of the
        pair potentials' expansion in the displacements (any direction; Fock engine only)
    conditional : if True, continuous position measurement updates the covariance conditionally
        (Gaussian engine only)
    rtol, atol : relative/absolute tolerance of the Fock engine's ODE solver
    """

    engine: str = "auto"
    fock_tolerance: float = 1e-6
    fock_max_cutoff: int = 40
    fock_top_population: float = 1e-6
    anharmonic_order: int = 2
    conditional: bool = False
    rtol: float = 1e-10
    atol: float = 1e-12

    def __post_init__(self):
        if self.engine not in ENGINES:
            raise ProtocolError("solver.engine", self.engine, f"must be one of {list(ENGINES)}")
        _finite("solver.fock_tolerance", self.fock_tolerance, minimum=0.0, strict=True)
        if not isinstance(self.fock_max_cutoff, int) or self.fock_max_cutoff < 2:
            raise ProtocolError("solver.fock_max_cutoff", self.fock_max_cutoff, "must be an integer >= 2")
        _finite("solver.fock_top_population", self.fock_top_population, minimum=0.0, strict=True)
        if self.anharmonic_order not in (2, 3, 4):
            raise ProtocolError("solver.anharmonic_order", self.anharmonic_order, "must be 2, 3 or 4")
        for name in ("rtol", "atol"):
            _finite(f"solver.{name}", getattr(self, name), minimum=0.0, strict=True)


def mode_names(bodies) -> tuple[str, ...]:
    """Names ``"<label>.<axis>"`` of all active modes, in mode order."""
    return tuple(f"{b.label}.{a}" for b in bodies for a in b.modes)


@dataclass(frozen=True, kw_only=True)
class Setup:
    """Everything a run needs, before any Hamiltonian is built.

    Parameters
    ----------
    bodies : the trapped bodies, (N,) with N >= 2
    stages : consecutive stages
    times_s : output time grid [s], strictly increasing, within [0, total duration]
    side_a : labels of the bodies on side A of the reported bipartition
    potentials : names of the pair potentials acting between every pair (``"gravity"``)
    interactions : the validated ``[interactions]`` table (:mod:`gqsim.physics.electromagnetic`), or None for
        gravity alone
    solver : :class:`SolverOptions`
    title : free text from the protocol
    """

    bodies: tuple[Body, ...]
    stages: tuple[Stage, ...]
    times_s: np.ndarray
    side_a: tuple[str, ...]
    potentials: tuple[str, ...] = ("gravity",)
    interactions: Mapping[str, Any] | None = None
    solver: SolverOptions = field(default_factory=SolverOptions)
    title: str = ""

    def __post_init__(self):
        if len(self.bodies) < 2:
            raise ProtocolError("bodies", len(self.bodies), "need at least two bodies")
        labels = [b.label for b in self.bodies]
        if len(set(labels)) != len(labels):
            raise ProtocolError("bodies.label", labels, "labels must be unique")
        names = mode_names(self.bodies)
        if not self.stages:
            raise ProtocolError("stages", [], "need at least one stage")
        for stage in self.stages:
            if len(stage.trap_hz) != len(names):
                raise ProtocolError(f"stages[{stage.label}].trap_hz", list(stage.trap_hz),
                                    f"needs one frequency per mode ({len(names)}: {', '.join(names)})")
            for name in stage.inverted:
                if name not in names:
                    raise ProtocolError(f"stages[{stage.label}].inverted_modes", name,
                                        f"must name modes from {list(names)}")
                if stage.trap_hz[names.index(name)] == 0:
                    raise ProtocolError(f"stages[{stage.label}].inverted_modes", name,
                                        "an inverted mode needs trap_hz > 0 (the inverted curvature)")
        times = np.asarray(self.times_s, dtype=float)
        total = sum(s.duration_s for s in self.stages)
        if times.ndim != 1 or times.size < 2 or not np.all(np.isfinite(times)):
            raise ProtocolError("time_grid", times.tolist()[:5], "needs at least two finite times")
        if np.any(np.diff(times) <= 0):
            raise ProtocolError("time_grid.times_s", times.tolist()[:5], "must be strictly increasing")
        if times[0] < 0 or times[-1] > total * (1 + 1e-12):
            raise ProtocolError("time_grid.times_s", [times[0], times[-1]],
                                f"must lie within [0, {total:.6g}] s (the total stage duration)")
        times = np.minimum(times, total)
        times.setflags(write=False)
        object.__setattr__(self, "times_s", times)
        for label in self.side_a:
            if label not in labels:
                raise ProtocolError("output.side_a", label, f"must name bodies from {labels}")
        if not self.side_a or len(set(self.side_a)) == len(labels):
            raise ProtocolError("output.side_a", list(self.side_a),
                                "must name at least one body and leave at least one on side B")
        for p in self.potentials:
            if p not in POTENTIAL_NAMES:
                raise ProtocolError("interactions.include", p, f"must be one of {list(POTENTIAL_NAMES)}")

    @property
    def mode_names(self) -> tuple[str, ...]:
        return mode_names(self.bodies)

    @property
    def total_duration_s(self) -> float:
        return float(sum(s.duration_s for s in self.stages))


#: pair potentials a protocol may name in ``[interactions].include`` (built by gqsim.physics.electromagnetic).
POTENTIAL_NAMES = ("gravity", "casimir_polder", "london_van_der_waals", "coulomb", "charge_induced_dipole",
                   "dipole_dipole", "dipole_induced_dipole")


# ---------------------------------------------------------------------------------------------
# protocol mapping -> Setup


def _body_mass(raw: Mapping[str, Any], key: str) -> tuple[float, float | None, str | None]:
    radius = raw.get("radius_m")
    mat = raw.get("material")
    if "mass_kg" in raw:
        if "density_kg_m3" in raw:
            raise ProtocolError(f"{key}.density_kg_m3", raw["density_kg_m3"], "give mass_kg or a density, not both")
        return float(raw["mass_kg"]), radius, mat
    if radius is None:
        raise ProtocolError(f"{key}.mass_kg", None, "give mass_kg, or radius_m with density_kg_m3 or material")
    density = raw.get("density_kg_m3")
    if density is None:
        if mat is None:
            raise ProtocolError(f"{key}.density_kg_m3", None, "radius_m needs density_kg_m3 or material")
        density = lookup_material(mat, f"{key}.material").density_kg_m3
    return 4.0 / 3.0 * math.pi * radius**3 * float(density), radius, mat


def _positions(data: Mapping[str, Any], n_bodies: int) -> list[tuple[float, float, float] | None]:
    arrangement = data.get("arrangement")
    if arrangement is None:
        return [None] * n_bodies
    if "positions_m" in arrangement:
        positions = [tuple(p) for p in arrangement["positions_m"]]
        if len(positions) != n_bodies:
            raise ProtocolError("arrangement.positions_m", f"{len(positions)} positions",
                                f"must give exactly one position per body ({n_bodies} bodies)")
        return positions
    spacing = float(arrangement["spacing_m"])
    axis = AXES.index(arrangement.get("axis", "x"))
    out = []
    for i in range(n_bodies):
        p = [0.0, 0.0, 0.0]
        p[axis] = i * spacing
        out.append(tuple(p))
    return out


def _stage_traps(raw: Mapping[str, Any], bodies: tuple[Body, ...], key: str) -> tuple[float, ...]:
    names = mode_names(bodies)
    prep = tuple(b.trap_hz[AXES.index(a)] for b in bodies for a in b.modes)
    value = raw.get("trap_hz")
    if value is None:
        return prep
    if isinstance(value, (int, float)):
        return (float(value),) * len(names)
    values = tuple(float(v) for v in value)
    if len(values) != len(names):
        raise ProtocolError(f"{key}.trap_hz", list(values),
                            f"needs one frequency per mode ({len(names)}: {', '.join(names)}) or one number")
    return values


def _time_grid(data: Mapping[str, Any], total: float) -> np.ndarray:
    grid = data.get("time_grid", {})
    if "times_s" in grid:
        if "points" in grid:
            raise ProtocolError("time_grid.points", grid["points"], "give points or times_s, not both")
        return np.asarray(grid["times_s"], dtype=float)
    points = int(grid.get("points", 401))
    return np.linspace(0.0, total, points)


def initial_state_from_table(table: Mapping[str, Any], key: str) -> InitialState:
    """The :class:`InitialState` of a body's ``initial`` table; ``key`` (``"bodies[i]"``) prefixes
    the field named by an error."""
    init = dict(table)
    for vec in ("displacement_m", "velocity_m_s", "squeeze_r", "squeeze_angle_rad"):
        if isinstance(init.get(vec), (list, tuple)):
            init[vec] = tuple(init[vec])
    try:
        return InitialState(**init)
    except ProtocolError as exc:
        raise ProtocolError(f"{key}.{exc.key}", exc.value, exc.allowed) from None


def setup_from_protocol(data: Mapping[str, Any]) -> Setup:
    """Turn a schema-validated oscillators protocol mapping into a :class:`Setup`."""
    raw_bodies = list(data["bodies"])
    positions = _positions(data, len(raw_bodies))
    bodies = []
    for i, raw in enumerate(raw_bodies):
        key = f"bodies[{i}]"
        label = raw.get("label", chr(ord("A") + i) if i < 26 else f"B{i}")
        mass, radius, mat = _body_mass(raw, key)
        pos = raw.get("position_m")
        if pos is not None and positions[i] is not None:
            raise ProtocolError(f"{key}.position_m", list(pos),
                                "give positions in the body or in [arrangement], not both")
        pos = pos if pos is not None else positions[i]
        if pos is None:
            raise ProtocolError(f"{key}.position_m", None, "is required (or give [arrangement] positions)")
        trap = raw["trap_hz"]
        trap = (float(trap),) * 3 if isinstance(trap, (int, float)) else tuple(trap)
        initial = initial_state_from_table(raw.get("initial", {}), key)
        try:
            channels = BodyChannels(**dict(raw.get("channels", {})))
        except ProtocolError as exc:  # name the body the offending table belongs to
            raise ProtocolError(f"{key}.{exc.key}", exc.value, exc.allowed) from None
        dipole = raw.get("dipole_c_m")
        bodies.append(Body(label=label, mass_kg=mass, position_m=tuple(pos), trap_hz=trap,
                           modes=tuple(raw.get("modes", ("x",))), radius_m=radius, material=mat,
                           initial=initial, channels=channels, charge_c=raw.get("charge_c"),
                           dipole_c_m=tuple(dipole) if dipole is not None else None,
                           relative_permittivity=raw.get("relative_permittivity"),
                           dispersion_resonance_rad_s=raw.get("dispersion_resonance_rad_s")))
        for axis_index, axis in enumerate(AXES):
            moving = initial.displacement_m[axis_index] or initial.velocity_m_s[axis_index]
            if axis not in bodies[-1].modes and moving:
                raise ProtocolError(f"{key}.initial.displacement_m", list(initial.displacement_m),
                                    f"axis {axis} is not an active mode of {label}; its components must be 0")
    bodies = tuple(bodies)
    if len({b.label for b in bodies}) != len(bodies):
        raise ProtocolError("bodies.label", [b.label for b in bodies], "labels must be unique")
    stages = []
    for j, raw in enumerate(data["stages"]):
        key = f"stages[{j}]"
        stages.append(Stage(label=raw.get("label", f"stage {j + 1}"), duration_s=float(raw["duration_s"]),
                            trap_hz=_stage_traps(raw, bodies, key), inverted=tuple(raw.get("inverted_modes", ()))))
    stages = tuple(stages)
    total = sum(s.duration_s for s in stages)
    output = data.get("output", {})
    side_a = tuple(output.get("side_a", (bodies[0].label,)))
    solver = SolverOptions(**dict(data.get("solver", {})))
    interactions = data.get("interactions")
    potentials = tuple(interactions["include"]) if interactions is not None else ("gravity",)
    _check_overlap(bodies)
    return Setup(bodies=bodies, stages=stages, times_s=_time_grid(data, total), side_a=side_a,
                 potentials=potentials, interactions=interactions, solver=solver,
                 title=data.get("about", {}).get("title", ""))


def _check_overlap(bodies: tuple[Body, ...]) -> None:
    for i, a in enumerate(bodies):
        for b in bodies[i + 1:]:
            d = float(np.linalg.norm(np.subtract(b.position_m, a.position_m)))
            reach = (a.radius_m or 0.0) + (b.radius_m or 0.0)
            if d == 0 or d <= reach:
                raise PhysicsError(f"bodies[{b.label}].position_m", list(b.position_m),
                                   f"{a.label} and {b.label} overlap (centre distance {d:.3g} m, "
                                   f"radii sum {reach:.3g} m); move them apart")
