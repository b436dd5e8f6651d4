"""Feasibility maps of a stored sweep: a figure of merit over two axes with the entanglement
boundary drawn as a contour; log axes where the axis was logarithmic; a row of 2-D slices
when the sweep has more axes. Plot functions take an optional ``ax`` and return it."""

from __future__ import annotations

import numpy as np
import xarray as xr

from gqsim.errors import ProtocolError

__all__ = ["plot_feasibility", "plot_feasibility_slices"]

#: boundary figure -> contour level separating "entangled" from "not"
_BOUNDARY_LEVEL = {"entangled": 0.5, "min_pt_eigenvalue": 0.0}


def _spacing(ds: xr.Dataset, dim: str) -> str:
    return ds[dim].attrs.get("spacing", "values")


def plot_feasibility(ds: xr.Dataset, figure: str = "max_log_negativity", *, x: str | None = None,
                     y: str | None = None, boundary: str | None = None, ax=None, fixed: dict | None = None):
    """Colour map of ``figure`` over axes ``x`` (horizontal) and ``y``; boundary contour on top.

    ``boundary`` is ``"min_pt_eigenvalue"`` (its zero level, interpolated; the default when
    stored) or ``"entangled"`` (the 0/1 map's half level). ``fixed`` selects one value (by
    label -> index) of every further axis.
    """
    import matplotlib.pyplot as plt

    boundary = boundary or ("min_pt_eigenvalue" if "min_pt_eigenvalue" in ds else "entangled")
    dims = [d for d in ds[figure].dims]
    fixed = dict(fixed or {})
    x = x or dims[-1]
    y = y or next((d for d in dims if d != x), None)
    if y is None:
        raise ProtocolError("plot", dims, "a feasibility map needs at least two axes")
    for d in dims:
        if d not in (x, y):
            fixed.setdefault(d, 0)
    sel = ds.isel({d: i for d, i in fixed.items()}) if fixed else ds
    field = sel[figure].where(sel["status"] == 1).transpose(y, x)
    if ax is None:
        _, ax = plt.subplots()
    xs, ys = sel[x].values, sel[y].values
    mesh = ax.pcolormesh(xs, ys, np.asarray(field.values, dtype=float), shading="nearest")
    cbar = ax.figure.colorbar(mesh, ax=ax)
    cbar.set_label(f"{figure} [{ds[figure].attrs.get('units', '')}]")
    if boundary in sel and len(xs) > 1 and len(ys) > 1:
        edge = np.asarray(sel[boundary].where(sel["status"] == 1).transpose(y, x).values, dtype=float)
        if np.nanmin(edge) < _BOUNDARY_LEVEL[boundary] < np.nanmax(edge):
            ax.contour(xs, ys, edge, levels=[_BOUNDARY_LEVEL[boundary]], colors="white", linewidths=1.5)
    if _spacing(sel, x) == "logarithmic":
        ax.set_xscale("log")
    if _spacing(sel, y) == "logarithmic":
        ax.set_yscale("log")
    ax.set_xlabel(f"{x} ({ds[x].attrs.get('key_path', x)})")
    ax.set_ylabel(f"{y} ({ds[y].attrs.get('key_path', y)})")
    if fixed:
        ax.set_title(", ".join(f"{d} = {ds[d].values[i]:.4g}" for d, i in fixed.items()), fontsize="small")
    return ax


def plot_feasibility_slices(ds: xr.Dataset, figure: str = "max_log_negativity", *, x: str | None = None,
                            y: str | None = None, across: str | None = None, boundary: str | None = None,
                            max_panels: int = 6):
    """A row of :func:`plot_feasibility` panels, one per value of axis ``across`` (at most
    ``max_panels``, evenly picked); further axes at their first value. Returns the figure."""
    import matplotlib.pyplot as plt

    dims = list(ds[figure].dims)
    x = x or dims[-1]
    y = y or next(d for d in dims if d != x)
    rest = [d for d in dims if d not in (x, y)]
    if not rest:
        fig, ax = plt.subplots()
        plot_feasibility(ds, figure, x=x, y=y, boundary=boundary, ax=ax)
        return fig
    across = across or rest[0]
    picks = np.unique(np.linspace(0, ds.sizes[across] - 1, min(max_panels, ds.sizes[across])).round().astype(int))
    fig, axes = plt.subplots(1, picks.size, figsize=(4.2 * picks.size, 3.6), squeeze=False)
    for ax, i in zip(axes[0], picks):
        fixed = {d: 0 for d in rest if d != across}
        fixed[across] = int(i)
        plot_feasibility(ds, figure, x=x, y=y, boundary=boundary, ax=ax, fixed=fixed)
    fig.tight_layout()
    return fig
