"""``gqsim scan``: run, inspect, export, plot and invert parameter sweeps. No physics here."""

from __future__ import annotations

import json
from pathlib import Path

import click

__all__ = ["scan_group"]


@click.group("scan")
def scan_group():
    """Grids of protocol variants stored as labelled, resumable datasets (zarr)."""


@scan_group.command("run")
@click.argument("sweep_file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--store", type=click.Path(path_type=Path), default=None,
              help="zarr directory for the results (default: <sweep file stem>.zarr in the current directory).")
@click.option("--executor", type=click.Choice(["serial", "processes", "dask"]), default=None,
              help="Where blocks of points are computed (default: the sweep file's choice, else processes).")
@click.option("--workers", type=click.IntRange(1, 512), default=None, help="Local worker processes.")
@click.option("--scheduler", "scheduler_address", default=None, help="Address of a running Dask scheduler.")
@click.option("--route", type=click.Choice(["auto", "batched", "one_by_one"]), default=None,
              help="Batched evaluation where the family allows it (auto), or force one protocol at a time.")
@click.option("--fresh", is_flag=True, help="Delete an existing store at --store and start over.")
@click.option("--retry-failed", is_flag=True, help="Also recompute points that failed before.")
@click.option("--netcdf", "netcdf_path", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="Also write the finished dataset to this netCDF-4 file.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
def run_command(sweep_file, store, executor, workers, scheduler_address, route, fresh, retry_failed,
                netcdf_path, quiet):
    """Evaluate every unfinished point of SWEEP_FILE; run it again to resume after an interruption."""
    from gqsim.studies.surveys import export_netcdf, load_sweep, run_sweep
    from gqsim.studies.surveys.storage import SweepStore

    spec = load_sweep(sweep_file)
    store = store or Path(f"{sweep_file.stem}.zarr")
    try:
        ds = run_sweep(spec, store, route=route, executor=executor, workers=workers,
                       scheduler_address=scheduler_address, progress=not quiet, fresh=fresh,
                       retry_failed=retry_failed)
    except KeyboardInterrupt:
        counts = SweepStore(store).counts() if store.exists() else {"done": 0, "failed": 0, "pending": 0}
        click.echo(f"interrupted: {counts['done'] + counts['failed']} points kept in {store}, "
                   f"{counts['pending']} pending; run the same command to resume", err=True)
        raise SystemExit(130) from None
    click.echo(_status_text(ds, store))
    if spec.threshold is not None:
        from gqsim.studies.surveys.boundary import solve_threshold

        t = spec.threshold
        click.echo(_threshold_text(solve_threshold(ds, t.axis, t.figure, t.target, t.relative_tolerance)))
    if netcdf_path is not None:
        click.echo(f"netCDF written to {export_netcdf(store, netcdf_path)}")


@scan_group.command("status")
@click.argument("store", type=click.Path(path_type=Path))
def status_command(store):
    """Summarise a sweep store: axes, route, finished / failed / pending points."""
    from gqsim.studies.surveys import open_sweep

    click.echo(_status_text(open_sweep(store), store))


@scan_group.command("export")
@click.argument("store", type=click.Path(path_type=Path))
@click.argument("target", type=click.Path(dir_okay=False, path_type=Path))
def export_command(store, target):
    """Write the sweep in STORE to the netCDF-4 file TARGET."""
    from gqsim.studies.surveys import export_netcdf

    click.echo(f"netCDF written to {export_netcdf(store, target)}")


@scan_group.command("threshold")
@click.argument("store", type=click.Path(path_type=Path))
@click.option("--axis", required=True, help="Label of the axis to solve for.")
@click.option("--figure", default="min_pt_eigenvalue", show_default=True, help="Figure that must reach --target.")
@click.option("--target", type=float, default=0.0, show_default=True)
@click.option("--tolerance", type=float, default=1e-10, show_default=True, help="Relative tolerance on the root.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the table.")
def threshold_command(store, axis, figure, target, tolerance, as_json):
    """Solve for the AXIS value where FIGURE reaches TARGET on the full model, per slice of the others."""
    from gqsim.studies.surveys import open_sweep
    from gqsim.studies.surveys.boundary import solve_threshold

    solution = solve_threshold(open_sweep(store), axis, figure, target, tolerance)
    if as_json:
        click.echo(json.dumps(solution.dataset.to_dict(data="list"), default=str))
    else:
        click.echo(_threshold_text(solution))


@scan_group.command("map")
@click.argument("store", type=click.Path(path_type=Path))
@click.option("--figure", default="max_log_negativity", show_default=True)
@click.option("--x", "x_axis", default=None, help="Axis label on the horizontal axis (default: last axis).")
@click.option("--y", "y_axis", default=None, help="Axis label on the vertical axis (default: first other axis).")
@click.option("--boundary", type=click.Choice(["entangled", "min_pt_eigenvalue"]), default=None,
              help="Figure whose level set is drawn as the entanglement boundary "
                   "(default: the zero of min_pt_eigenvalue when stored).")
@click.option("--out", "out_path", type=click.Path(dir_okay=False, path_type=Path), required=True,
              help="Image file to write (png, pdf, svg).")
def map_command(store, figure, x_axis, y_axis, boundary, out_path):
    """Draw a feasibility map (one panel per value of a third axis, if any) to --out."""
    import matplotlib

    matplotlib.use("Agg")
    from gqsim.errors import ProtocolError
    from gqsim.studies.surveys import open_sweep
    from gqsim.report.charts import plot_feasibility_slices

    ds = open_sweep(store)
    for name, label in (("--x", x_axis), ("--y", y_axis)):
        if label is not None and label not in ds.dims:
            raise ProtocolError(name, label, f"must be one of the axis labels {list(ds.dims)}")
    if figure not in ds or figure in ("status", "message"):
        raise ProtocolError("--figure", figure, f"must be a stored figure: {json.loads(ds.attrs['figure_names'])}")
    fig = plot_feasibility_slices(ds, figure, x=x_axis, y=y_axis, boundary=boundary)
    fig.savefig(out_path, dpi=120, bbox_inches="tight")
    click.echo(f"map written to {out_path}")


def _status_text(ds, store) -> str:
    status = ds["status"].values
    axes = ", ".join(f"{d} ({ds.sizes[d]}, {ds[d].attrs.get('key_path', '')})" for d in ds.dims)
    return (f"{store}: {status.size} points over {axes}; route {ds.attrs['route']}; "
            f"done {int((status == 1).sum())}, failed {int((status == 2).sum())}, "
            f"pending {int((status == 0).sum())}")


def _threshold_text(solution) -> str:
    import numpy as np

    ds = solution.dataset
    head = (f"{solution.axis} where {solution.figure} = {solution.target:g} "
            f"({ds.attrs['method']}, relative tolerance {ds.attrs['relative_tolerance']:.2g})")
    lines = [head]
    others = list(ds["root"].dims)
    for idx in range(ds["root"].size):
        pos = dict(zip(others, [int(i) for i in np.unravel_index(idx, ds["root"].shape)]))
        where = ", ".join(f"{d} = {ds[d].values[i]:.6g}" for d, i in pos.items()) or "(single line)"
        point = ds.isel(pos) if pos else ds
        if int(point["found"]) == 1:
            lines.append(f"  {where}: {float(point['root']):.10g}  bracket [{float(point['bracket_low']):.6g}, "
                         f"{float(point['bracket_high']):.6g}], {int(point['evaluations'])} model evaluations")
        else:
            lines.append(f"  {where}: no crossing within the swept range")
    return "\n".join(lines)
