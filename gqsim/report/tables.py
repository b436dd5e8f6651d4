"""Report stage: terminal table, files (CSV, JSON, resolved protocol) and figures.

Works on any :class:`~gqsim.record.Result`, whatever the family. Library plot
functions take an optional ``ax`` and return it; nothing here calls ``plt.show()``.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path
from typing import Any, Mapping

import numpy as np
import tomli_w

from gqsim.errors import ProtocolError
from gqsim.record import Result

__all__ = ["summary_table", "write_outputs", "plot_measures", "OUTPUT_FILES"]

#: file names written by :func:`write_outputs`
OUTPUT_FILES = ("series.csv", "summary.json", "protocol.resolved.toml", "measures.png", "measures.pdf")

_LABELS = {
    "log_negativity": "log-negativity E_N",
    "negativity": "negativity N",
    "concurrence": "concurrence C",
    "witness_lab": "spin witness |<XZ>+<YY>| (lab frame)",
    "witness_optimised": "spin witness, best local frame",
    "purity": "purity Tr rho^2",
    "entangling_phase": "entangling phase theta",
}


def _label(name: str) -> str:
    return _LABELS.get(name, name.replace("_", " "))


_UNIT_SUFFIXES = (("_rad_s", " [rad/s]"), ("_per_s", " [1/s]"), ("_rad", " [rad]"), ("_kg", " [kg]"),
                  ("_m", " [m]"), ("_s", " [s]"))


def _key_label(key: str) -> str:
    for suffix, unit in _UNIT_SUFFIXES:
        if key.endswith(suffix):
            return key[: -len(suffix)].replace("_", " ") + unit
    return key.replace("_", " ")


def _num(value: Any) -> str:
    if isinstance(value, bool) or value is None:
        return str(value)
    if isinstance(value, (int, float, np.floating)):
        return f"{value:.6g}"
    return str(value)


def _rows_table(rows) -> list[str]:
    """A small fixed-width table of a list of flat records (a force or noise budget)."""
    columns = [k for k in rows[0] if not isinstance(rows[0][k], (Mapping, list, tuple))]
    widths = {c: 2 + max(len(c), *(len(_num(r.get(c))) for r in rows)) for c in columns}
    out = ["  " + "".join(f"{c:>{widths[c]}}" for c in columns)]
    for row in rows:
        out.append("  " + "".join(f"{_num(row.get(c)):>{widths[c]}}" for c in columns))
    return out


def summary_table(result: Result) -> str:
    """Readable multi-line summary: one row per measure, then the analytic companions."""
    title = result.summary.get("title") or "(untitled protocol)"
    lines = [f"gqsim {result.family} run: {title}",
             f"engine: {result.provenance.engine}   grid: {result.times_s.size} times, "
             f"{result.times_s[0]:.4g} s .. {result.times_s[-1]:.4g} s"]
    header = f"{'measure':<40} {'unit':<12} {'max or min':>15} {'at t [s]':>10}  entangled window(s) [s]"
    lines += ["", header, "-" * len(header)]
    for name in result.series:
        entry = result.summary.get(name)
        if not isinstance(entry, Mapping) or "max" not in entry:
            continue
        windows = entry.get("entangled_windows_s")
        if windows is None:
            wtext = "-"
        elif not windows:
            wtext = "none"
        else:
            wtext = ", ".join(f"{lo:.4g}..{hi:.4g}" for lo, hi in windows[:4]) + (" ..." if len(windows) > 4 else "")
        # criteria that signal entanglement by dropping below a bound report their minimum
        if "min" in entry:
            value, at, which = entry["min"], entry["time_of_min_s"], "min"
        else:
            value, at, which = entry["max"], entry["time_of_max_s"], "max"
        lines.append(f"{_label(name):<40} {result.units.get(name, ''):<12} {_num(value):>11} {which} "
                     f"{at:>10.4g}  {wtext}")
    for section, values in result.summary.items():
        if isinstance(values, Mapping) and "max" not in values:
            lines += ["", f"{section.replace('_', ' ')}:"]
            for key, value in values.items():
                if not isinstance(value, (Mapping, list, tuple)):
                    lines.append(f"  {_key_label(key):<42} {_num(value)}")
            for key, value in values.items():
                if isinstance(value, Mapping) and value and all(
                        not isinstance(v, (Mapping, list, tuple)) for v in value.values()):
                    lines.append(f"  {key}:")
                    lines.extend(f"    {_key_label(k):<40} {_num(v)}" for k, v in value.items())
            rows = values.get("rows")
            if isinstance(rows, (list, tuple)) and rows and all(isinstance(r, Mapping) for r in rows):
                lines.extend(_rows_table(rows))
            elif isinstance(rows, (list, tuple)) and not rows:
                lines.append("  (none)")
    for note in result.notes:
        lines += ["", f"note: {note}"]
    return "\n".join(lines)


def plot_measures(result: Result, ax=None):
    """Measures vs time on ``ax`` (created if None), with grid regions where entanglement is
    signalled by the first measure that reports windows shaded. Returns the axes."""
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(figsize=(7.0, 4.2))
    shade_done = False
    for name, values in result.series.items():
        if values.ndim != 1 or name == "entangling_phase":
            continue
        ax.plot(result.times_s, values, label=f"{_label(name)} [{result.units.get(name, '')}]")
        entry = result.summary.get(name)
        if not shade_done and isinstance(entry, Mapping) and entry.get("entangled_windows_s"):
            for lo, hi in entry["entangled_windows_s"]:
                ax.axvspan(lo, hi, color="0.85", zorder=0, lw=0)
            ax.axvspan(np.nan, np.nan, color="0.85", label=f"entangled ({_label(name)} > 0)")
            shade_done = True
    if any(name.startswith("witness") for name in result.series):
        ax.axhline(1.0, color="0.4", ls="--", lw=0.8, label="witness separable bound (1)")
    ax.set_xlabel("time t [s]")
    ax.set_ylabel("measure value")
    ax.set_title(result.summary.get("title") or result.family)
    ax.legend(fontsize="small", loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    return ax


def _csv_columns(result: Result) -> dict[str, np.ndarray]:
    cols = {"time_s": result.times_s}
    for name, values in result.series.items():
        unit = result.units.get(name, "")
        tag = f"{name} [{unit}]" if unit and unit != "1" else name
        if values.ndim == 1:
            cols[tag] = values
        else:
            flat = values.reshape(values.shape[0], -1)
            for j in range(flat.shape[1]):
                cols[f"{tag}[{j}]"] = flat[:, j]
    return cols


def write_outputs(result: Result, out_dir: str | Path) -> list[Path]:
    """Write ``series.csv``, ``summary.json``, ``protocol.resolved.toml`` and the figure as PNG and PDF."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    out = Path(out_dir)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ProtocolError("--out", str(out), f"must be a writable directory ({exc.strerror})") from None
    written = []
    cols = _csv_columns(result)
    path = out / "series.csv"
    with path.open("w", newline="") as fh:
        writer = csv.writer(fh)
        writer.writerow(cols.keys())
        for row in zip(*cols.values()):
            writer.writerow([repr(float(v)) for v in row])
    written.append(path)
    doc = result.to_json_dict()
    summary = {"summary": doc["summary"], "units": doc["units"], "notes": doc["notes"],
               "provenance": {k: v for k, v in doc["provenance"].items() if k != "protocol"}}
    path = out / "summary.json"
    path.write_text(json.dumps(summary, indent=2))
    written.append(path)
    path = out / "protocol.resolved.toml"
    path.write_text(tomli_w.dumps(dict(result.provenance.to_dict()["protocol"])))
    written.append(path)
    if result.family == "oscillators":
        from gqsim.report.oscillator_plots import plot_oscillators

        fig, axes = plt.subplots(2, 1, figsize=(8.0, 6.0), sharex=True)
        plot_oscillators(result, axes)
    else:
        fig, ax = plt.subplots(figsize=(10.0, 4.4))
        plot_measures(result, ax=ax)
    fig.tight_layout()
    for name in ("measures.png", "measures.pdf"):
        fig.savefig(out / name, dpi=150)
        written.append(out / name)
    plt.close(fig)
    return written
