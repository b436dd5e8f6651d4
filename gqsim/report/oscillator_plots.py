"""Figures for oscillator results: E_N with its entangled windows, and the position spreads.

Library plot functions take optional axes and return them; nothing here calls ``plt.show()``.
"""

from __future__ import annotations

__all__ = ["plot_oscillators"]


def plot_oscillators(result, axes=None):
    """Two panels: E_N [nats] (entangled windows shaded) and each mode's position spread [m].

    Parameters
    ----------
    result : an oscillators-family :class:`~gqsim.record.Result`
    axes : two matplotlib axes, or None to create a figure

    Returns
    -------
    the two axes
    """
    import matplotlib.pyplot as plt

    if axes is None:
        _, axes = plt.subplots(2, 1, figsize=(7.5, 6.0), sharex=True)
    top, bottom = axes
    times = result.times_s
    bipartition = result.summary.get("bipartition", "")
    top.plot(times, result["log_negativity"], label=f"E_N (bipartition {bipartition})")
    for name, values in result.series.items():
        if name.startswith("log_negativity["):
            top.plot(times, values, ls="--", label=f"E_N {name[len('log_negativity'):]}")
    for lo, hi in result.summary.get("log_negativity", {}).get("entangled_windows_s", []):
        top.axvspan(lo, hi, color="0.9", zorder=0, lw=0)
    top.set_ylabel("log-negativity E_N [nats]")
    top.legend(fontsize="small")
    top.set_title(result.summary.get("title") or "oscillators")
    for name, values in result.series.items():
        if name.startswith("position_spread_m["):
            bottom.plot(times, values, label=name[len("position_spread_m"):])
    bottom.set_ylabel("position spread [m]")
    bottom.set_xlabel("time t [s]")
    bottom.legend(fontsize="small")
    return top, bottom
