"""Result stage: one immutable object per simulation run.

A :class:`Result` holds the time grid [s], named time series, an optional stack of
density matrices, a summary (maxima, windows, analytic companions) and the
provenance needed to reproduce the run (resolved protocol, engine, options,
package versions, CODATA edition of ``scipy.constants``).
"""

from __future__ import annotations

import html
import json
import platform
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any, Mapping

import numpy as np

__all__ = ["Result", "Provenance", "package_versions", "Window", "entangled_windows"]


def package_versions() -> dict[str, str]:
    """Versions of gqsim and the numerical libraries it used, plus the CODATA edition."""
    import matplotlib
    import qutip
    import scipy
    import scipy.constants

    from gqsim._version import __version__

    codata = "CODATA 2018" if abs(scipy.constants.h - 6.62607015e-34) == 0 else "unknown"
    return {
        "gqsim": __version__,
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "qutip": qutip.__version__,
        "matplotlib": matplotlib.__version__,
        # scipy.constants follows the CODATA release current when that scipy was built.
        "constants": f"scipy.constants ({codata} or later; exact SI-2019 h)",
    }


@dataclass(frozen=True, kw_only=True)
class Provenance:
    """Where a result came from."""

    protocol: Mapping[str, Any]
    source: str
    engine: str
    options: Mapping[str, Any]
    versions: Mapping[str, str]

    def to_dict(self) -> dict:
        return {
            "source": self.source,
            "engine": self.engine,
            "options": _plain(self.options),
            "versions": dict(self.versions),
            "protocol": _plain(self.protocol),
        }


@dataclass(frozen=True)
class Window:
    """A closed time interval [start_s, stop_s] on the grid where a measure signals entanglement."""

    start_s: float
    stop_s: float

    @property
    def duration_s(self) -> float:
        return self.stop_s - self.start_s


def entangled_windows(times: np.ndarray, signal: np.ndarray) -> list[Window]:
    """Intervals of the grid where the boolean ``signal`` holds (first to last True grid point of each run)."""
    windows: list[Window] = []
    signal = np.asarray(signal, dtype=bool)
    if signal.size == 0:
        return windows
    edges = np.flatnonzero(np.diff(np.concatenate(([False], signal, [False])).astype(np.int8)))
    for start, stop in zip(edges[::2], edges[1::2]):
        windows.append(Window(float(times[start]), float(times[stop - 1])))
    return windows


@dataclass(frozen=True, kw_only=True)
class Result:
    """Immutable outcome of one run.

    Attributes
    ----------
    times_s : (n_times,) time grid [s]
    series : name -> (n_times,) array; names as the trade spells them
        (``log_negativity``, ``concurrence`` ...). Units live in ``units``.
    units : name -> unit string for every series (e.g. ``"ebit (log2)"``, ``"rad"``)
    summary : JSON-ready mapping of scalar findings (maxima, their times, windows, analytic values)
    provenance : :class:`Provenance`
    states : optional (n_times, d, d) complex density matrices (dims in ``dims``)
    dims : subsystem dimensions of ``states``
    """

    times_s: np.ndarray
    series: Mapping[str, np.ndarray]
    units: Mapping[str, str]
    summary: Mapping[str, Any]
    provenance: Provenance
    states: np.ndarray | None = None
    dims: tuple[int, ...] = ()
    family: str = "superposition"
    notes: tuple[str, ...] = field(default_factory=tuple)

    def __post_init__(self):
        times = _readonly(np.asarray(self.times_s, dtype=float))
        object.__setattr__(self, "times_s", times)
        frozen = {}
        for name, values in self.series.items():
            arr = np.asarray(values)
            if arr.shape[:1] != times.shape:
                raise ValueError(f"series {name!r} has shape {arr.shape}, expected ({times.size}, ...)")
            if np.issubdtype(arr.dtype, np.number) and not np.all(np.isfinite(arr)):
                raise ValueError(f"series {name!r} contains non-finite values")
            frozen[name] = _readonly(arr)
        object.__setattr__(self, "series", MappingProxyType(frozen))
        object.__setattr__(self, "units", MappingProxyType(dict(self.units)))
        object.__setattr__(self, "summary", MappingProxyType(dict(self.summary)))
        if self.states is not None:
            object.__setattr__(self, "states", _readonly(np.asarray(self.states)))

    def __getitem__(self, name: str) -> np.ndarray:
        return self.series[name]

    def __repr__(self) -> str:
        names = ", ".join(self.series)
        state = f", states{self.states.shape}" if self.states is not None else ""
        return (f"Result(family={self.family!r}, engine={self.provenance.engine!r}, "
                f"times_s({self.times_s.size}), series=[{names}]{state})")

    def to_json_dict(self) -> dict:
        """The machine-readable form written by ``gqsim run --json``."""
        return {
            "times_s": self.times_s.tolist(),
            "series": {k: _plain(v) for k, v in self.series.items()},
            "units": dict(self.units),
            "summary": _plain(self.summary),
            "notes": list(self.notes),
            "provenance": self.provenance.to_dict(),
        }

    def _repr_html_(self) -> str:
        rows = "".join(
            f"<tr><td>{html.escape(str(k))}</td><td>{html.escape(_fmt(v))}</td></tr>"
            for k, v in self.summary.items() if not isinstance(v, (dict, list, tuple, Mapping))
        )
        series = ", ".join(f"{html.escape(k)} [{html.escape(self.units.get(k, ''))}]" for k in self.series)
        return (f"<div><b>gqsim result</b> ({html.escape(self.family)}, engine "
                f"{html.escape(self.provenance.engine)}, {self.times_s.size} times from "
                f"{self.times_s[0]:.4g} s to {self.times_s[-1]:.4g} s)<br>series: {series}"
                f"<table>{rows}</table></div>")


def _fmt(value: Any) -> str:
    if isinstance(value, float):
        return f"{value:.6g}"
    return str(value)


def _readonly(arr: np.ndarray) -> np.ndarray:
    arr = arr.copy()
    arr.setflags(write=False)
    return arr


def _plain(value: Any) -> Any:
    """Convert numpy scalars/arrays and mappings to JSON-ready Python objects."""
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, Window):
        return {"start_s": value.start_s, "stop_s": value.stop_s}
    if isinstance(value, np.ndarray):
        if np.iscomplexobj(value):
            return {"real": value.real.tolist(), "imag": value.imag.tolist()}
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, complex):
        return {"real": value.real, "imag": value.imag}
    return value


def dumps(result: Result) -> str:
    """JSON text of :meth:`Result.to_json_dict`."""
    return json.dumps(result.to_json_dict())


#: E_N values within max(MAX_TIE_RELATIVE * max, MAX_TIE_FLOOR) of the maximum count as the
#: maximum and the earliest such time is reported: round-off (~1e-16 per entry, ~1e-15 between
#: routes) must not pick the time of max of a flat or zero curve, while real peaks (oscillator
#: E_N ~ 1e-9 varies by ~1e-13 between neighbouring grid times) keep their own time.
MAX_TIE_RELATIVE = 1e-12


MAX_TIE_FLOOR = 1e-14


def first_near_max(values: np.ndarray) -> np.ndarray:
    """Index of the first entry within the tie tolerance (see MAX_TIE_RELATIVE) of the maximum, last axis."""
    values = np.asarray(values)
    top = values.max(axis=-1, keepdims=True)
    return np.argmax(values >= top - np.maximum(MAX_TIE_RELATIVE * np.abs(top), MAX_TIE_FLOOR), axis=-1)


#: characters kept of a ``dominant_noise`` source name (fixed-width text in the store)
NOISE_LABEL_WIDTH = 64


#: figure name -> (unit, description)
FIGURES: dict[str, tuple[str, str]] = {
    "max_log_negativity": ("protocol log base", "largest log-negativity E_N over the time grid"),
    "time_of_max_s": ("s", "grid time of the largest E_N"),
    "entangled": ("1", "1 when E_N exceeds the numerical floor somewhere on the grid, else 0"),
    "min_pt_eigenvalue": ("1", "smallest eigenvalue of the partial transpose over grid times t > 0; "
                               "negative exactly when the grid shows entanglement (signed, for root finding)"),
    "entangling_rate_rad_s": ("rad/s", "analytic entangling-phase rate while the branches are held"),
    "dephasing_threshold_per_s": ("1/s", "|rate|/2: a per-body constant dephasing rate above this "
                                         "prevents entanglement (shared physics references §1.8)"),
    "dominant_noise": ("", "source with the largest rate in the point's noise budget (gqsim.studies.decoherence: "
                           "coherence decay at full split for superpositions, heating for oscillators); "
                           "'none' where nothing decoheres, '' where the point is not evaluated"),
    "certification_time_s": ("s", "grid time at which certifying entanglement takes the least lab time "
                                  "(optimal PPT witness for branches, Duan for oscillators; gqsim.studies.certification.plan); "
                                  "NaN where the grid never certifies"),
    "certification_repetitions": ("1", "total repetitions at that time; inf where never certifiable"),
    "certification_lab_time_s": ("s", "repetitions x (time + overhead) at that time; inf where never certifiable"),
}


#: figures that need a measurement plan (one-by-one route only)
CERTIFICATION_FIGURES = ("certification_time_s", "certification_repetitions", "certification_lab_time_s")


DEFAULT_FIGURES = ("max_log_negativity", "time_of_max_s", "entangled", "min_pt_eigenvalue",
                   "entangling_rate_rad_s", "dephasing_threshold_per_s", "dominant_noise")
