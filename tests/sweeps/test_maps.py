"""Feasibility maps: log axes where the axis is logarithmic, a boundary contour, one panel per
value of a third axis; plot functions return what they drew on."""

import matplotlib.pyplot as plt

from gqsim.studies.surveys import run_sweep
from gqsim.report.charts import plot_feasibility, plot_feasibility_slices

from .helpers import small_sweep


def test_map_and_slices(tmp_path):
    spec = small_sweep([{"path": "timing.hold_s", "values": [4.0, 12.0]},
                        {"path": "bodies[*].dephasing.rate_per_s", "label": "gamma",
                         "linear": {"start": 0.0, "stop": 0.3, "count": 7}},
                        {"path": "bodies[*].mass_kg", "label": "mass",
                         "logarithmic": {"start": 3e-15, "stop": 3e-14, "count": 6}}])
    ds = run_sweep(spec, tmp_path / "m.zarr", executor="serial")
    fig, ax = plt.subplots()
    out = plot_feasibility(ds, x="gamma", y="mass", ax=ax, fixed={"timing_hold_s": 1})
    assert out is ax
    assert ax.get_yscale() == "log" and ax.get_xscale() == "linear"
    assert ax.collections, "colour map and boundary contour are drawn"
    assert "timing_hold_s = 12" in ax.get_title()
    plt.close(fig)
    slices = plot_feasibility_slices(ds, x="gamma", y="mass", across="timing_hold_s")
    assert len(slices.axes) == 4  # two panels, each with its colour bar
    plt.close(slices)
