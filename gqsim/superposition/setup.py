"""Stage 2 (superposition family): turn a validated protocol into frozen physical parameters.

Geometry conventions
--------------------
* Positions are 3-vectors in metres in one lab frame. Each body has a centre
  ``centre_m`` and branch offsets ``offsets_m`` (n_branches, 3).
* Time starts (t = 0) when the split begins. During the split (duration
  ``split_s``) branch a moves on a straight line from the centre to
  ``centre + offset_a``; it is held there for ``hold_s``; then it returns on a
  straight line during ``recombine_s``. The fraction of the full offset reached
  is the *split fraction* sigma(t) in [0, 1], piecewise linear in t.
* The helper table ``[arrangement]`` places two bodies a distance
  ``centre_distance_m`` apart along x, each with ``branch_count`` equally spaced
  branches spanning ``branch_span_m``, along x (``in_line``) or along y
  (``side_by_side``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from gqsim.errors import PhysicsError, ProtocolError
from gqsim.physics.materials import material
from gqsim.protocol.reader import Protocol

__all__ = [
    "DephasingSpec",
    "SpinErrors",
    "Body",
    "Timing",
    "SuperpositionSetup",
    "build_superposition_setup",
    "ALL_MEASURES",
    "QUBIT_ONLY_MEASURES",
]

ALL_MEASURES = ("log_negativity", "negativity", "concurrence", "witness_lab", "witness_optimised",
                "purity", "entangling_phase")
QUBIT_ONLY_MEASURES = ("concurrence", "witness_lab", "witness_optimised")

DEFAULT_POINTS = 201


@dataclass(frozen=True, kw_only=True)
class DephasingSpec:
    """Branch-decoherence parameters of one body (turned into a channel in :mod:`gqsim.superposition.channels`).

    ``model`` is ``"none"``, ``"constant"`` (every branch coherence decays at
    ``rate_per_s``) or ``"separation_squared"`` (a coherence between branches a
    distance Delta apart decays at min(Lambda Delta^2, gamma), Lambda =
    ``localisation_per_m2_s`` [1/(m^2 s)], gamma = ``saturation_per_s`` [1/s] or
    unbounded when None).
    """

    model: str = "none"
    rate_per_s: float = 0.0
    localisation_per_m2_s: float = 0.0
    saturation_per_s: float | None = None
    key: str = "dephasing"

    def __post_init__(self):
        if self.model not in ("none", "constant", "separation_squared"):
            raise ProtocolError(f"{self.key}.model", self.model,
                                "must be one of ['none', 'constant', 'separation_squared']")
        for name in ("rate_per_s", "localisation_per_m2_s"):
            value = getattr(self, name)
            if not (np.isfinite(value) and value >= 0):
                raise ProtocolError(f"{self.key}.{name}", value, "must be a finite number >= 0")
        if self.saturation_per_s is not None and not (np.isfinite(self.saturation_per_s) and self.saturation_per_s > 0):
            raise ProtocolError(f"{self.key}.saturation_per_s", self.saturation_per_s, "must be a finite number > 0")


@dataclass(frozen=True, kw_only=True)
class SpinErrors:
    """Errors of the embedded spin that labels the branches: T1 [s] and T2 [s] (None = absent).

    T2 <= 2 T1 is required (the pure-dephasing rate 1/T2 - 1/(2 T1) must be >= 0).
    """

    t1_s: float | None = None
    t2_s: float | None = None
    key: str = "spin"

    def __post_init__(self):
        for name in ("t1_s", "t2_s"):
            value = getattr(self, name)
            if value is not None and not (np.isfinite(value) and value > 0):
                raise ProtocolError(f"{self.key}.{name}", value, "must be a finite time > 0 s")
        if self.t1_s is not None and self.t2_s is not None and self.t2_s > 2 * self.t1_s * (1 + 1e-12):
            raise ProtocolError(f"{self.key}.t2_s", self.t2_s, f"must be <= 2*t1_s = {2 * self.t1_s:g} s")

    @property
    def pure_dephasing_per_s(self) -> float:
        """gamma_phi = 1/T2 - 1/(2 T1) [1/s]: the coherence decay not caused by relaxation."""
        if self.t2_s is None:
            return 0.0
        relax = 0.0 if self.t1_s is None else 0.5 / self.t1_s
        return max(0.0, 1.0 / self.t2_s - relax)

    @property
    def relaxation_per_s(self) -> float:
        """1/T1 [1/s] (0 when T1 is absent)."""
        return 0.0 if self.t1_s is None else 1.0 / self.t1_s


@dataclass(frozen=True, kw_only=True)
class Body:
    """One body in a superposition of branch positions.

    Parameters
    ----------
    label : name used in reports
    mass_kg : mass [kg]
    radius_m : sphere radius [m], or None when only the mass is known (then overlap
        can only be checked as coincidence)
    centre_m : (3,) centre [m]
    offsets_m : (n_branches, 3) branch offsets from the centre [m]
    amplitudes : (n_branches,) complex branch amplitudes, normalised
    dephasing : :class:`DephasingSpec`
    spin : :class:`SpinErrors`
    """

    label: str
    mass_kg: float
    radius_m: float | None
    centre_m: np.ndarray
    offsets_m: np.ndarray
    amplitudes: np.ndarray
    dephasing: DephasingSpec = field(default_factory=DephasingSpec)
    spin: SpinErrors = field(default_factory=SpinErrors)
    key: str = "bodies[0]"

    def __post_init__(self):
        if not (np.isfinite(self.mass_kg) and self.mass_kg > 0):
            raise ProtocolError(f"{self.key}.mass_kg", self.mass_kg, "must be a finite mass > 0 kg")
        if self.radius_m is not None and not (np.isfinite(self.radius_m) and self.radius_m > 0):
            raise ProtocolError(f"{self.key}.radius_m", self.radius_m, "must be a finite radius > 0 m")
        centre = np.asarray(self.centre_m, dtype=float)
        offsets = np.asarray(self.offsets_m, dtype=float)
        amps = np.asarray(self.amplitudes, dtype=complex)
        if centre.shape != (3,):
            raise ProtocolError(f"{self.key}.centre_m", self.centre_m, "must be a 3-vector [x, y, z] in m")
        if offsets.ndim != 2 or offsets.shape[1] != 3 or offsets.shape[0] < 2:
            raise ProtocolError(f"{self.key}.branch_offsets_m", self.offsets_m, "needs two or more 3-vectors")
        if amps.shape != (offsets.shape[0],):
            raise ProtocolError(f"{self.key}.amplitudes", len(amps),
                                f"needs one amplitude per branch ({offsets.shape[0]})")
        norm = float(np.sqrt(np.sum(np.abs(amps) ** 2)))
        if not (np.isfinite(norm) and norm > 0):
            raise ProtocolError(f"{self.key}.amplitudes", amps.tolist(), "must have a non-zero norm")
        gaps = np.linalg.norm(offsets[:, None, :] - offsets[None, :, :], axis=-1)
        gaps[np.diag_indices_from(gaps)] = np.inf
        if np.min(gaps) <= 0:
            i, j = np.unravel_index(np.argmin(gaps), gaps.shape)
            raise PhysicsError(f"{self.key}.branch_offsets_m", offsets[i].tolist(),
                               f"branches {i} and {j} coincide; every branch needs its own position")
        for name, arr in (("centre_m", centre), ("offsets_m", offsets), ("amplitudes", amps / norm)):
            arr = np.array(arr)
            arr.setflags(write=False)
            object.__setattr__(self, name, arr)

    @property
    def n_branches(self) -> int:
        return self.offsets_m.shape[0]

    @property
    def branch_separations_m(self) -> np.ndarray:
        """(n, n) distances |offset_i - offset_k| between fully split branches [m]."""
        o = self.offsets_m
        return np.linalg.norm(o[:, None, :] - o[None, :, :], axis=-1)

    @property
    def full_span_m(self) -> float:
        """Largest distance between two fully split branches [m]."""
        return float(np.max(self.branch_separations_m))

    @property
    def split_axis(self) -> np.ndarray:
        """(3,) unit vector from one to the other of the two farthest-apart branches."""
        seps = self.branch_separations_m
        i, j = np.unravel_index(np.argmax(seps), seps.shape)
        return (self.offsets_m[j] - self.offsets_m[i]) / seps[i, j]


@dataclass(frozen=True, kw_only=True)
class Timing:
    """Split, hold and recombine durations [s]; see the module docstring for the path shape."""

    hold_s: float
    split_s: float = 0.0
    recombine_s: float = 0.0

    def __post_init__(self):
        if not (np.isfinite(self.hold_s) and self.hold_s > 0):
            raise ProtocolError("timing.hold_s", self.hold_s, "must be a finite time > 0 s")
        for name in ("split_s", "recombine_s"):
            value = getattr(self, name)
            if not (np.isfinite(value) and value >= 0):
                raise ProtocolError(f"timing.{name}", value, "must be a finite time >= 0 s")

    @property
    def total_s(self) -> float:
        return self.split_s + self.hold_s + self.recombine_s

    def segments(self) -> list[tuple[float, float, float, float]]:
        """Piecewise-linear split fraction: list of (t_start, t_stop, sigma_start, sigma_stop)."""
        t1 = self.split_s
        t2 = t1 + self.hold_s
        t3 = t2 + self.recombine_s
        segs = []
        if self.split_s > 0:
            segs.append((0.0, t1, 0.0, 1.0))
        segs.append((t1, t2, 1.0, 1.0))
        if self.recombine_s > 0:
            segs.append((t2, t3, 1.0, 0.0))
        segs.append((t3, np.inf, 0.0, 0.0))
        return segs

    def split_fraction(self, times_s: np.ndarray) -> np.ndarray:
        """sigma(t) in [0, 1] at each time [s]."""
        t = np.asarray(times_s, dtype=float)
        out = np.zeros_like(t)
        for t0, t1, s0, s1 in self.segments():
            inside = (t >= t0) & (t <= t1)
            if np.isfinite(t1) and t1 > t0:
                out[inside] = s0 + (s1 - s0) * (t[inside] - t0) / (t1 - t0)
            else:
                out[inside] = s0
        return out


@dataclass(frozen=True, kw_only=True)
class SuperpositionSetup:
    """Everything the superposition model needs, in SI units."""

    bodies: tuple[Body, Body]
    timing: Timing
    acceleration_m_s2: np.ndarray
    times_s: np.ndarray
    measures: tuple[str, ...]
    log_base: str = "2"
    engine: str = "auto"
    rtol: float = 1e-10
    atol: float = 1e-12
    title: str = ""

    def __post_init__(self):
        times = np.asarray(self.times_s, dtype=float)
        if times.ndim != 1 or times.size < 2:
            raise ProtocolError("time_grid", times.size, "needs at least two times")
        if np.any(times < 0) or not np.all(np.isfinite(times)):
            raise ProtocolError("time_grid.times_s", times.tolist()[:5], "times must be finite and >= 0 s")
        if np.any(np.diff(times) <= 0):
            bad = int(np.flatnonzero(np.diff(times) <= 0)[0])
            raise ProtocolError(f"time_grid.times_s[{bad + 1}]", float(times[bad + 1]),
                                f"must be strictly greater than the previous time {times[bad]:g} s")
        times.setflags(write=False)
        object.__setattr__(self, "times_s", times)
        acc = np.asarray(self.acceleration_m_s2, dtype=float)
        if acc.shape != (3,):
            raise ProtocolError("field.acceleration_m_s2", self.acceleration_m_s2, "must be a 3-vector in m/s^2")
        acc.setflags(write=False)
        object.__setattr__(self, "acceleration_m_s2", acc)
        if self.log_base not in ("2", "e"):
            raise ProtocolError("output.log_base", self.log_base, "must be '2' (ebits) or 'e' (nats)")
        qudit = any(b.n_branches != 2 for b in self.bodies)
        for name in self.measures:
            if name not in ALL_MEASURES:
                raise ProtocolError("output.measures", name, f"must be among {list(ALL_MEASURES)}")
            if qudit and name in QUBIT_ONLY_MEASURES:
                raise ProtocolError("output.measures", name,
                                    "needs two branches per body; with more branches use log_negativity/negativity")
        if self.engine not in ("auto", "closed_form", "lindblad"):
            raise ProtocolError("solver.engine", self.engine, "must be one of ['auto', 'closed_form', 'lindblad']")
        _check_no_overlap(self.bodies, self.timing)

    @property
    def dims(self) -> tuple[int, int]:
        return (self.bodies[0].n_branches, self.bodies[1].n_branches)

    @property
    def has_spin_relaxation(self) -> bool:
        return any(b.spin.t1_s is not None for b in self.bodies)


def _check_no_overlap(bodies, timing) -> None:
    """Every branch pair of the two bodies must stay apart by more than the sum of radii
    (or be distinct points when a radius is unknown) along the whole straight-line path."""
    a, b = bodies
    limit = (a.radius_m or 0.0) + (b.radius_m or 0.0)
    p = a.centre_m - b.centre_m  # relative position at sigma = 0
    moving = timing.split_s > 0 or timing.recombine_s > 0
    for i, oa in enumerate(a.offsets_m):
        for j, ob in enumerate(b.offsets_m):
            q = oa - ob
            # closest approach of p + s q for s in [0, 1] (s = 0 only reached when paths move)
            s_lo = 0.0 if moving else 1.0
            qq = float(q @ q)
            s_star = 1.0 if qq == 0 else float(np.clip(-(p @ q) / qq, s_lo, 1.0))
            distance = float(np.linalg.norm(p + s_star * q))
            if distance <= limit or distance == 0.0:
                what = (f"branch {i} of {a.label} and branch {j} of {b.label} come within {distance:.4g} m"
                        f" (sum of radii {limit:.4g} m)")
                raise PhysicsError("bodies", f"{a.label}/{b.label}", f"{what}; bodies must not overlap")


# ----------------------------------------------------------------------------- protocol -> setup

def build_superposition_setup(protocol: Protocol) -> SuperpositionSetup:
    """Build the frozen :class:`SuperpositionSetup` from a validated superposition protocol."""
    data = protocol.data
    arrangement = data.get("arrangement")
    bodies = tuple(_body(i, entry, arrangement) for i, entry in enumerate(data["bodies"]))
    t = data["timing"]
    timing = Timing(hold_s=t["hold_s"], split_s=t.get("split_s", 0.0), recombine_s=t.get("recombine_s", 0.0))
    acc = data.get("field", {}).get("acceleration_m_s2", (0.0, 0.0, 0.0))
    times = _time_grid(data.get("time_grid", {}), timing)
    out = data.get("output", {})
    qudit = any(b.n_branches != 2 for b in bodies)
    default = tuple(m for m in ALL_MEASURES if not (qudit and m in QUBIT_ONLY_MEASURES))
    solver = data.get("solver", {})
    return SuperpositionSetup(
        bodies=bodies, timing=timing, acceleration_m_s2=np.asarray(acc, dtype=float), times_s=times,
        measures=tuple(out.get("measures", default)), log_base=out.get("log_base", "2"),
        engine=solver.get("engine", "auto"), rtol=solver.get("rtol", 1e-10), atol=solver.get("atol", 1e-12),
        title=data.get("about", {}).get("title", ""),
    )


def _time_grid(grid: Mapping[str, Any], timing: Timing) -> np.ndarray:
    if "times_s" in grid:
        for other in ("points", "start_s", "stop_s"):
            if other in grid:
                raise ProtocolError(f"time_grid.{other}", grid[other], "not allowed together with time_grid.times_s")
        return np.asarray(grid["times_s"], dtype=float)
    start = grid.get("start_s", 0.0)
    stop = grid.get("stop_s", timing.total_s)
    if not stop > start:
        raise ProtocolError("time_grid.stop_s", stop, f"must be greater than time_grid.start_s = {start:g} s")
    return np.linspace(start, stop, grid.get("points", DEFAULT_POINTS))


def _mass_and_radius(key: str, entry: Mapping[str, Any]) -> tuple[float, float | None]:
    mass = entry.get("mass_kg")
    radius = entry.get("radius_m")
    density = entry.get("density_kg_m3")
    name = entry.get("material")
    if density is not None and name is not None:
        raise ProtocolError(f"{key}.density_kg_m3", density, "give either density_kg_m3 or material, not both")
    if mass is not None:
        if density is not None or name is not None:
            which = "density_kg_m3" if density is not None else "material"
            raise ProtocolError(f"{key}.{which}", entry[which],
                                "not allowed with mass_kg (give mass_kg, or radius_m with density_kg_m3 or material)")
        return float(mass), radius
    if radius is None:
        raise ProtocolError(f"{key}.mass_kg", None,
                            "is required unless radius_m is given with density_kg_m3 or material")
    if density is None and name is None:
        raise ProtocolError(f"{key}.radius_m", radius, "needs density_kg_m3 or material to give a mass")
    rho = density if density is not None else material(name, f"{key}.material").density_kg_m3
    return float(4.0 / 3.0 * np.pi * radius**3 * rho), float(radius)


def _body(index: int, entry: Mapping[str, Any], arrangement: Mapping[str, Any] | None) -> Body:
    key = f"bodies[{index}]"
    mass, radius = _mass_and_radius(key, entry)
    if arrangement is not None:
        for own in ("centre_m", "branch_offsets_m"):
            if own in entry:
                raise ProtocolError(f"{key}.{own}", entry[own], "not allowed together with [arrangement]; use one")
        centre, offsets = _arranged(index, arrangement)
    else:
        for own in ("centre_m", "branch_offsets_m"):
            if own not in entry:
                raise ProtocolError(f"{key}.{own}", None, "is required when there is no [arrangement] table")
        centre, offsets = np.asarray(entry["centre_m"], float), np.asarray(entry["branch_offsets_m"], float)
    n = offsets.shape[0]
    if "amplitudes" in entry:
        amps = np.array([complex(re, im) for re, im in entry["amplitudes"]])
    else:
        amps = np.full(n, 1 / np.sqrt(n), dtype=complex)
    deph = entry.get("dephasing", {"model": "none"})
    model = deph["model"]
    if model == "constant" and "rate_per_s" not in deph:
        raise ProtocolError(f"{key}.dephasing.rate_per_s", None, "is required with model = 'constant'")
    if model == "separation_squared" and "localisation_per_m2_s" not in deph:
        raise ProtocolError(f"{key}.dephasing.localisation_per_m2_s", None,
                            "is required with model = 'separation_squared'")
    allowed = {"none": set(), "constant": {"rate_per_s"},
               "separation_squared": {"localisation_per_m2_s", "saturation_per_s"}}[model]
    for extra in sorted(set(deph) - allowed - {"model"}):
        raise ProtocolError(f"{key}.dephasing.{extra}", deph[extra], f"not used by model = '{model}'")
    spec = DephasingSpec(model=model, rate_per_s=deph.get("rate_per_s", 0.0),
                         localisation_per_m2_s=deph.get("localisation_per_m2_s", 0.0),
                         saturation_per_s=deph.get("saturation_per_s"), key=f"{key}.dephasing")
    spin_tab = entry.get("spin", {})
    spin = SpinErrors(t1_s=spin_tab.get("t1_s"), t2_s=spin_tab.get("t2_s"), key=f"{key}.spin")
    return Body(label=entry.get("label", "AB"[index] if index < 2 else f"body{index}"), mass_kg=mass,
                radius_m=radius, centre_m=centre, offsets_m=offsets, amplitudes=amps, dephasing=spec,
                spin=spin, key=key)


def _arranged(index: int, arrangement: Mapping[str, Any]) -> tuple[np.ndarray, np.ndarray]:
    d = arrangement["centre_distance_m"]
    span = arrangement["branch_span_m"]
    n = arrangement.get("branch_count", 2)
    axis = np.array([1.0, 0.0, 0.0]) if arrangement["style"] == "in_line" else np.array([0.0, 1.0, 0.0])
    centre = np.array([(-0.5 if index == 0 else 0.5) * d, 0.0, 0.0])
    offsets = np.linspace(-span / 2, span / 2, n)[:, None] * axis[None, :]
    return centre, offsets
