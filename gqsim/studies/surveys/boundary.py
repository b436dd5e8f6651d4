"""Inverse design: the value of one sweep axis at which a figure of merit reaches a target.

For every combination of the other axes, the stored map supplies the bracket (the first pair
of neighbouring grid values along the axis where ``figure - target`` changes sign); Brent's
method ([Brent1973], the routine scipy.optimize.brentq) then solves ``figure(x) = target`` on
the full model between them, evaluating points exactly as the map did (same route). On a
logarithmic axis the root is sought in log x. The bracket, tolerance and number of model
evaluations are reported with every root. Typical uses: the smallest mass that entangles
(``min_pt_eigenvalue`` = 0 along a mass axis), the largest tolerable dephasing rate, the
shortest hold time reaching a target E_N.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass

import numpy as np
import xarray as xr
from scipy.optimize import brentq

from gqsim.errors import ProtocolError
from gqsim.studies.surveys.runner import compute_points, spec_from_definition
from gqsim.studies.surveys.spec import Axis, SweepSpec
from gqsim.studies.surveys.storage import DONE

__all__ = ["solve_threshold", "ThresholdSolution", "SOLVABLE_FIGURES"]

SOLVABLE_FIGURES = ("max_log_negativity", "min_pt_eigenvalue", "entangling_rate_rad_s", "time_of_max_s",
                    "dephasing_threshold_per_s", "certification_lab_time_s", "certification_repetitions")
#: brentq cannot resolve x more finely than a few ulps (scipy requires rtol >= 4 eps)
_MIN_RTOL = 4 * np.finfo(float).eps


@dataclass(frozen=True)
class ThresholdSolution:
    """Roots over the other axes (an xarray Dataset) plus what was asked."""

    dataset: xr.Dataset
    axis: str
    figure: str
    target: float


def _figure_at(spec: SweepSpec, route: str, figure: str, fixed: dict, label: str, x: float) -> float:
    axes = tuple(Axis(path=a.path, label=a.label, spacing=a.spacing,
                      values=(x,) if a.label == label else (fixed[a.label],)) for a in spec.axes)
    one = SweepSpec(base=spec.base, axes=axes, figures=(figure,), source=spec.source,
                    certification=spec.certification)
    figures, status, messages = compute_points(one, route, np.array([0]))
    if status[0] != DONE:
        raise ProtocolError(f"threshold at {label} = {x:g}", fixed, f"the model failed there: {messages[0]}")
    return float(figures[figure][0])


def solve_threshold(dataset: xr.Dataset, axis: str, figure: str = "min_pt_eigenvalue", target: float = 0.0,
                    relative_tolerance: float = 1e-10) -> ThresholdSolution:
    """Solve ``figure(axis) = target`` on the full model for every combination of the other axes.

    Parameters
    ----------
    dataset : a finished (or partly finished) sweep as returned by ``run_sweep``/``open_sweep``
    axis : label of the axis to solve for
    figure : a figure stored in the dataset (see SOLVABLE_FIGURES)
    target : value to reach [unit of the figure]
    relative_tolerance : relative tolerance on the root

    Returns
    -------
    ThresholdSolution
        ``dataset`` holds ``root``, ``bracket_low``, ``bracket_high``, ``evaluations`` and
        ``found`` (0 where the map shows no crossing along the axis) over the other axes.
    """
    if axis not in dataset.dims:
        raise ProtocolError("threshold.axis", axis, f"must be one of the axis labels {list(dataset.dims)}")
    if figure not in SOLVABLE_FIGURES or figure not in dataset:
        raise ProtocolError("threshold.figure", figure,
                            f"must be a stored figure among {[f for f in SOLVABLE_FIGURES if f in dataset]}")
    if not (math.isfinite(target)):
        raise ProtocolError("threshold.target", target, "must be a finite number")
    if not (0 < relative_tolerance <= 0.1):
        raise ProtocolError("threshold.relative_tolerance", relative_tolerance, "must be in (0, 0.1]")
    definition = json.loads(dataset.attrs["sweep_definition"])
    definition["source"] = dataset.attrs.get("base_protocol_source", "<sweep>")
    spec = spec_from_definition(json.dumps(definition, sort_keys=True))
    route = dataset.attrs["route"]
    ax = next(a for a in spec.axes if a.label == axis)
    logarithmic = ax.spacing == "logarithmic"
    others = [d for d in dataset[figure].dims if d != axis]
    values = dataset[figure].transpose(*others, axis)
    status = dataset["status"].transpose(*others, axis).values
    grid = np.asarray(dataset[axis].values, dtype=float)
    shape = values.shape[:-1]
    root = np.full(shape, np.nan)
    low = np.full(shape, np.nan)
    high = np.full(shape, np.nan)
    evaluations = np.zeros(shape, dtype=np.int32)
    found = np.zeros(shape, dtype=np.int8)
    rtol = max(relative_tolerance, _MIN_RTOL)
    for idx in np.ndindex(*shape):
        line = values.values[idx] - target
        ok = status[idx] == DONE
        k = _first_crossing(line, ok)
        if k is None:
            continue
        fixed = {d: float(dataset[d].values[i]) for d, i in zip(others, idx)}
        count = [0]

        def f(u):
            count[0] += 1
            x = math.exp(u) if logarithmic else u
            return _figure_at(spec, route, figure, fixed, axis, x) - target

        a, b = grid[k], grid[k + 1]
        if line[k] == 0.0:
            r = a
        else:
            ua, ub = (math.log(a), math.log(b)) if logarithmic else (a, b)
            u = brentq(f, ua, ub, xtol=1e-300, rtol=rtol, maxiter=200)
            r = math.exp(u) if logarithmic else u
        root[idx], low[idx], high[idx], evaluations[idx], found[idx] = r, a, b, count[0], 1
    coords = {d: dataset[d] for d in others}
    out = xr.Dataset(
        {"root": (others, root, {"units": f"unit of {axis}", "key_path": ax.path}),
         "bracket_low": (others, low), "bracket_high": (others, high),
         "evaluations": (others, evaluations), "found": (others, found)},
        coords=coords,
        attrs={"axis": axis, "figure": figure, "target": target, "relative_tolerance": rtol,
               "method": "Brent's method (scipy.optimize.brentq)" + (" in log x" if logarithmic else ""),
               "route": route})
    return ThresholdSolution(dataset=out, axis=axis, figure=figure, target=target)


def _first_crossing(line: np.ndarray, ok: np.ndarray) -> int | None:
    """First k with finished points k, k+1 and a sign change (or exact zero at k) of ``line``."""
    for k in range(line.size - 1):
        if ok[k] and ok[k + 1] and np.isfinite(line[k]) and np.isfinite(line[k + 1]):
            if line[k] == 0.0 or np.sign(line[k]) * np.sign(line[k + 1]) < 0:
                return k
    return None
