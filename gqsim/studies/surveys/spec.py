"""Sweep definitions: a base protocol, grid axes addressed by key path, figures, execution.

A sweep file is TOML validated against ``gqsim/protocol/schemas/sweep-v1.schema.json``::

    sweep_version = 1
    base_protocol = "side-by-side-qubits.toml"     # relative to the sweep file

    [[axes]]
    path = "bodies[*].mass_kg"                     # [*] sets the same value on every body
    label = "mass_kg"
    logarithmic = { start = 1e-15, stop = 1e-13, count = 41 }

    [[axes]]
    path = "bodies[*].dephasing.rate_per_s"
    linear = { start = 0.0, stop = 0.2, count = 21 }

Each axis takes exactly one of ``values`` (a list), ``linear`` or ``logarithmic``
(``start`` < ``stop``, ``count`` points; logarithmic needs ``start`` > 0). Several
axes form a grid, first axis slowest. Every value of every axis is checked against the
protocol schema when the sweep is read (one value at a time in the base protocol), so a
bad value fails at once with a one-line error; constraints that tie several keys
together (bodies that would overlap) are checked per grid point and recorded as a failed
point with its message.
"""

from __future__ import annotations

import copy
import functools
import hashlib
import json
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import jsonschema
import numpy as np

from gqsim.errors import ProtocolError
from gqsim.protocol.keypaths import _native, get_path, set_path, split_path, with_values
from gqsim.protocol.reader import Protocol, load_protocol, parse_protocol, read_schema_file, read_toml
from gqsim.record import CERTIFICATION_FIGURES, DEFAULT_FIGURES, FIGURES, NOISE_LABEL_WIDTH

__all__ = [
    "Axis",
    "SweepSpec",
    "FIGURES",
    "CERTIFICATION_FIGURES",
    "load_sweep",
    "parse_sweep",
    "split_path",
    "set_path",
    "get_path",
    "point_protocol",
]

SWEEP_VERSION = 1
#: what the stored figures mean; a store written under another layout is refused, not mixed
#: (2: ``dominant_noise`` holds the noise budget's source name instead of an index)
STORE_LAYOUT = 2




@dataclass(frozen=True, kw_only=True)
class Axis:
    """One grid axis.

    Parameters
    ----------
    path : dotted protocol key path (``bodies[*].mass_kg`` sets every body)
    label : dataset dimension name
    values : (n,) the values in grid order [unit of the key]
    spacing : ``"values"``, ``"linear"`` or ``"logarithmic"`` (plots use log axes for the last)
    """

    path: str
    label: str
    values: tuple
    spacing: str = "values"

    def __post_init__(self):
        if not self.values:
            raise ProtocolError(f"axis {self.label}", [], "needs at least one value")
        if self.spacing not in ("values", "linear", "logarithmic"):
            raise ProtocolError(f"axis {self.label}.spacing", self.spacing,
                                "must be 'values', 'linear' or 'logarithmic'")

    @property
    def size(self) -> int:
        return len(self.values)


@dataclass(frozen=True, kw_only=True)
class Threshold:
    """Inverse-design request: the value of axis ``axis`` where ``figure`` equals ``target``."""

    axis: str
    figure: str
    target: float = 0.0
    relative_tolerance: float = 1e-10


@dataclass(frozen=True, kw_only=True)
class Execution:
    """How to run: route (``auto``/``batched``/``one_by_one``), executor, workers, scheduler, chunking."""

    route: str = "auto"
    executor: str = "processes"
    workers: int = 2
    scheduler_address: str | None = None
    block_points: int = 256


@dataclass(frozen=True, kw_only=True)
class SweepSpec:
    """A validated sweep: base protocol, axes, figures, execution and optional threshold request."""

    base: Protocol
    axes: tuple[Axis, ...]
    figures: tuple[str, ...] = DEFAULT_FIGURES
    execution: Execution = field(default_factory=Execution)
    threshold: Threshold | None = None
    certification: Mapping[str, float] = field(default_factory=dict)
    title: str = ""
    source: str = "<memory>"

    def __post_init__(self):
        labels = [a.label for a in self.axes]
        for i, label in enumerate(labels):
            if labels.index(label) != i:
                raise ProtocolError(f"axes[{i}].label", label, "must differ from the other axes' labels")
            if label in FIGURES or label in ("status", "message"):
                raise ProtocolError(f"axes[{i}].label", label, "clashes with a stored variable name; choose another")

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(a.size for a in self.axes)

    @property
    def n_points(self) -> int:
        return int(np.prod(self.shape))

    def point_values(self, flat_index: int) -> dict[str, float]:
        """path -> value at grid point ``flat_index`` (C order, first axis slowest)."""
        idx = np.unravel_index(int(flat_index), self.shape)
        return {a.path: a.values[i] for a, i in zip(self.axes, idx)}

    def definition(self) -> dict:
        """JSON-ready description of what the stored numbers depend on (no execution settings)."""
        return {
            "sweep_version": SWEEP_VERSION,
            "store_layout": STORE_LAYOUT,
            "base_protocol": self.base.to_dict(),
            "axes": [{"path": a.path, "label": a.label, "spacing": a.spacing, "values": list(a.values)}
                     for a in self.axes],
            "figures": list(self.figures),
            "certification": dict(self.certification) if set(CERTIFICATION_FIGURES) & set(self.figures) else {},
        }

    def fingerprint(self, route: str) -> str:
        """sha256 of the definition plus the evaluation route; a store refuses another fingerprint."""
        text = json.dumps({**self.definition(), "route": route}, sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode()).hexdigest()


# ----------------------------------------------------------------------------- key paths









def point_protocol(base: Protocol, values: Mapping[str, Any]) -> Protocol:
    """The base protocol with ``values`` (path -> value) applied, re-validated."""
    return with_values(base, values)






# ----------------------------------------------------------------------------- reading

def load_sweep(path: str | Path) -> SweepSpec:
    """Read and validate a sweep file; ``base_protocol`` is resolved relative to it."""
    path = Path(path)
    data = read_toml(path, "sweep file")
    return parse_sweep(data, base_dir=path.parent, source=str(path))


def parse_sweep(data: Mapping[str, Any], *, base_dir: str | Path = ".", base: Protocol | None = None,
                source: str = "<memory>") -> SweepSpec:
    """Validate a sweep mapping. ``base`` overrides ``base_protocol`` (handy in notebooks)."""
    from gqsim.protocol.reader import _most_specific, _to_protocol_error  # one error style for all files

    if not isinstance(data, Mapping):
        raise ProtocolError("sweep", type(data).__name__, "must be a table of keys")
    if data.get("sweep_version") != SWEEP_VERSION:
        raise ProtocolError("sweep_version", data.get("sweep_version"), f"this gqsim reads sweep_version = {SWEEP_VERSION}")
    validator = jsonschema.Draft202012Validator(read_schema_file("sweep-v1.schema.json"))
    errors = sorted(validator.iter_errors(data), key=lambda e: (len(e.absolute_path), list(map(str, e.absolute_path))))
    if errors:
        raise _to_protocol_error(_most_specific(errors))
    if base is None:
        base = load_protocol(Path(base_dir) / data["base_protocol"])
    axes = tuple(_axis(i, entry, base) for i, entry in enumerate(data["axes"]))
    ex = data.get("execution", {})
    execution = Execution(route=ex.get("route", "auto"), executor=ex.get("executor", "processes"),
                          workers=ex.get("workers", 2), scheduler_address=ex.get("scheduler_address"),
                          block_points=ex.get("block_points", 256))
    if execution.executor == "dask" and execution.scheduler_address is None:
        raise ProtocolError("execution.scheduler_address", None, "is required with executor = 'dask'")
    threshold = None
    if "threshold" in data:
        th = data["threshold"]
        labels = [a.label for a in axes]
        if th["axis"] not in labels:
            raise ProtocolError("threshold.axis", th["axis"], f"must be one of the axis labels {labels}")
        threshold = Threshold(axis=th["axis"], figure=th["figure"], target=float(th.get("target", 0.0)),
                              relative_tolerance=float(th.get("relative_tolerance", 1e-10)))
    figures = tuple(data.get("figures", DEFAULT_FIGURES))
    return SweepSpec(base=base, axes=axes, figures=figures, execution=execution, threshold=threshold,
                     certification=dict(data.get("certification", {})),
                     title=data.get("about", {}).get("title", ""), source=source)


def _axis(index: int, entry: Mapping[str, Any], base: Protocol) -> Axis:
    key = f"axes[{index}]"
    path = entry["path"]
    try:
        split_path(path)
    except ProtocolError as exc:
        raise ProtocolError(f"{key}.path", path, exc.allowed) from None
    kinds = [k for k in ("values", "linear", "logarithmic") if k in entry]
    if len(kinds) != 1:
        raise ProtocolError(key, sorted(entry), "give exactly one of values, linear or logarithmic")
    kind = kinds[0]
    if kind == "values":
        values = [float(v) for v in entry["values"]]
        if len(set(values)) != len(values):
            raise ProtocolError(f"{key}.values", entry["values"], "must not repeat a value")
    else:
        rng = entry[kind]
        start, stop, count = float(rng["start"]), float(rng["stop"]), int(rng["count"])
        for name, v in (("start", start), ("stop", stop)):
            if not math.isfinite(v):
                raise ProtocolError(f"{key}.{kind}.{name}", v, "must be a finite number")
        if count > 1 and not stop > start:
            raise ProtocolError(f"{key}.{kind}.stop", stop, f"must be greater than start = {start:g} "
                                "(ranges run upwards; list values explicitly for another order)")
        if kind == "logarithmic" and (start <= 0 or stop <= 0):
            bad = "start" if start <= 0 else "stop"
            raise ProtocolError(f"{key}.logarithmic.{bad}", start if bad == "start" else stop,
                                "must be > 0 (a logarithmic range cannot reach or cross zero)")
        if count == 1:
            values = [start]
        elif kind == "linear":
            values = np.linspace(start, stop, count).tolist()
        else:
            values = np.geomspace(start, stop, count).tolist()
    label = entry.get("label") or _default_label(path)
    values = _typed_values(key, path, values, base)
    _check_values(key, path, values, base)
    return Axis(path=path, label=label, values=tuple(values), spacing=kind)


def _default_label(path: str) -> str:
    tokens = split_path(path)
    names = [t for t in tokens if isinstance(t, str) and t != "*"]
    label = "_".join(names[-2:]) if len(names) > 1 and names[-2] not in ("bodies",) else names[-1]
    return re.sub(r"[^A-Za-z0-9_]", "_", label)


def _typed_values(key: str, path: str, values: list, base: Protocol) -> list:
    try:
        current = get_path(base.to_dict(), path)
    except ProtocolError:
        return values  # a key the base leaves out; the schema judges it below
    if current and all(isinstance(c, int) and not isinstance(c, bool) for c in current):
        if any(not float(v).is_integer() for v in values):
            raise ProtocolError(f"{key}.path", path, "takes whole numbers; give integer values")
        return [int(v) for v in values]
    if current and not all(isinstance(c, (int, float)) and not isinstance(c, bool) for c in current):
        raise ProtocolError(f"{key}.path", path, "must address a number in the protocol")
    return values


def _check_values(key: str, path: str, values: list, base: Protocol) -> None:
    data = base.to_dict()
    try:
        set_path(copy.deepcopy(data), path, values[0])
    except ProtocolError as exc:
        raise ProtocolError(f"{key}.path", path, exc.allowed) from None
    for j, value in enumerate(values):
        try:
            point_protocol(base, {path: value})
        except ProtocolError as exc:
            if "unknown key" in exc.allowed:
                raise ProtocolError(f"{key}.path", path, f"is not a key this protocol accepts ({exc})") from None
            raise ProtocolError(exc.key, exc.value, f"{exc.allowed} (value {j} of {key}, path {path})") from None
