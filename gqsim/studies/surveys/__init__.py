"""Parameter sweeps: grids of protocol variants stored as labelled, resumable datasets.

Stages: :mod:`spec` (read and check a sweep file) -> :mod:`batched` / :mod:`one_by_one`
(figures of merit of many points at once, or one protocol at a time) -> :mod:`runner`
(executors, resume) -> :mod:`storage` (zarr store, netCDF export) -> :mod:`threshold`
(inverse design by root finding) -> :mod:`maps` (feasibility plots).

Notebook use::

    from gqsim.studies.surveys import load_sweep, run_sweep
    spec = load_sweep("protocols/sweep-hollowmere-mass-dephasing.toml")
    ds = run_sweep(spec, "mass-dephasing.zarr")      # run again to resume
    ds.max_log_negativity.plot()
"""

from gqsim.studies.surveys.runner import resolve_route, run_sweep
from gqsim.studies.surveys.spec import Axis, SweepSpec, load_sweep, parse_sweep, point_protocol
from gqsim.studies.surveys.storage import export_netcdf, open_sweep

__all__ = [
    "Axis",
    "SweepSpec",
    "export_netcdf",
    "load_sweep",
    "open_sweep",
    "parse_sweep",
    "point_protocol",
    "resolve_route",
    "run_sweep",
]
