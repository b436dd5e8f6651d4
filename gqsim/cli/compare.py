"""Command line for the oscillator family: ``gqsim compare-routes``. No physics here."""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import click

__all__ = ["compare_routes_command"]


@click.command("compare-routes")
@click.argument("protocol", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--branch-span-m", type=float, default=None,
              help="Branch span of the superposition route [m] (default: twice the oscillators' rms position spread).")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=None,
              help="Directory for routes.csv (both E_N series), routes.json (the table) and routes.png/.pdf.")
@click.option("--json", "as_json", is_flag=True, help="Print the table as one JSON object instead of text.")
def compare_routes_command(protocol: Path, branch_span_m: float | None, out_dir: Path | None, as_json: bool):
    """Run an oscillators PROTOCOL and the superposition route for the same bodies, side by side."""
    from gqsim.errors import ProtocolError
    from gqsim.studies.compare import compare_routes

    comparison = compare_routes(protocol, branch_span_m=branch_span_m)
    rows = comparison.rows()
    if out_dir is not None:
        try:
            out_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise ProtocolError("--out", str(out_dir), f"must be a writable directory ({exc.strerror})") from None
        _write(comparison, out_dir)
    if as_json:
        click.echo(json.dumps({"rows": [{k: (None if isinstance(v, float) and not math.isfinite(v) else v)
                                          for k, v in r.items()} for r in rows],
                               "notes": list(comparison.notes)}))
        return
    click.echo(f"routes compared ({comparison.style}), E_N in nats")
    click.echo(f"{'route':<14} {'quantity':<66} {'value':>13}  unit")
    for r in rows:
        click.echo(f"{r['route']:<14} {r['quantity']:<66} {r['value']:>13.6g}  {r['unit']}")
    for note in comparison.notes:
        click.echo(f"note: {note}")
    if out_dir is not None:
        click.echo(f"files written to {out_dir}")


def _write(comparison, out_dir: Path) -> None:
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    times = comparison.oscillators.times_s
    with (out_dir / "routes.csv").open("w", newline="") as fh:
        writer = csv.writer(fh)
        writer.writerow(["time_s", "log_negativity_oscillators [nats]", "log_negativity_superposition [nats]",
                         "log_negativity_superposition_closed_form [nats]"])
        for row in zip(times, comparison.oscillators["log_negativity"], comparison.superposition["log_negativity"],
                       comparison.superposition_closed_form):
            writer.writerow([repr(float(v)) for v in row])
    (out_dir / "routes.json").write_text(json.dumps({"rows": comparison.rows(), "notes": list(comparison.notes)},
                                                    indent=2, default=lambda v: None))
    fig, ax = plt.subplots(figsize=(8.0, 4.4))
    comparison.plot(ax=ax)
    fig.tight_layout()
    for name in ("routes.png", "routes.pdf"):
        fig.savefig(out_dir / name, dpi=150)
    plt.close(fig)
