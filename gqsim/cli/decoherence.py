"""``gqsim noise``: which decoherence channel dominates, and how good the apparatus must be.

Parses options, calls :mod:`gqsim.studies.decoherence`, prints. No physics here.
"""

from __future__ import annotations

import json
from pathlib import Path

import click

from gqsim.protocol.reader import read_toml

__all__ = ["noise_group"]

_KNOB_CHOICES = ["pressure", "temperature", "internal_temperature", "laser_power", "spin_dephasing"]


_read = read_toml  # one-line errors for unreadable or malformed files


def _certificate(text: str | None):
    from gqsim.studies.decoherence import Certificate

    return None if text is None else Certificate.parse(text)


@click.group("noise")
def noise_group():
    """Decoherence from the apparatus: channel shares and tolerable limits."""


@noise_group.command("budget")
@click.argument("protocol", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--limit", "knobs", multiple=True, type=click.Choice(_KNOB_CHOICES),
              help="Also root-find the largest tolerable value of this knob (repeatable).")
@click.option("--certify", default=None, metavar="SERIES>VALUE",
              help="What counts as certified entanglement (default witness_optimised>1 for qubits, "
                   "log_negativity>0 otherwise).")
@click.option("--figure", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="Write a bar chart of the channel rates to this image file.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the table.")
def budget_command(protocol: Path, knobs: tuple[str, ...], certify: str | None, figure: Path | None, as_json: bool):
    """Rate and share of every decoherence channel of each body (superposition) or mode (oscillators) in PROTOCOL."""
    from dataclasses import replace

    from gqsim.studies.decoherence import noise_budget
    from gqsim.studies.decoherence import tolerable_limit

    data = _read(protocol)
    budget = noise_budget(data, source=str(protocol))
    cert = _certificate(certify)
    limits = tuple(tolerable_limit(data, knob, certificate=cert, source=str(protocol)) for knob in knobs)
    budget = replace(budget, limits=limits)
    if figure is not None:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt

        from gqsim.studies.decoherence import plot_budget

        ax = plot_budget(budget)
        ax.figure.tight_layout()
        ax.figure.savefig(figure)
        plt.close(ax.figure)
    if as_json:
        click.echo(json.dumps(budget.to_json_dict()))
    else:
        click.echo(budget.as_text())
        if figure is not None:
            click.echo(f"figure written to {figure}")


@noise_group.command("limit")
@click.argument("protocol", type=click.Path(dir_okay=False, path_type=Path))
@click.argument("knob", type=click.Choice(_KNOB_CHOICES))
@click.option("--certify", default=None, metavar="SERIES>VALUE", help="What counts as certified entanglement.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=None,
              help="Write the simulation at the tolerable value (time series CSV, summary JSON) here.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of text.")
def limit_command(protocol: Path, knob: str, certify: str | None, out_dir: Path | None, as_json: bool):
    """Largest value of KNOB at which PROTOCOL still certifies entanglement (root-found on full simulations)."""
    import numpy as np

    from gqsim.studies.decoherence import tolerable_limit

    data = _read(protocol)
    limit = tolerable_limit(data, knob, certificate=_certificate(certify), source=str(protocol))
    estimate = None
    if data.get("family") == "superposition" and "environment" in data and knob != "spin_dephasing":
        from gqsim.studies.decoherence import rule_of_thumb_limit

        estimate = rule_of_thumb_limit(data, knob, source=str(protocol))
    series = limit.certificate.split(" > ")[0]
    values = limit.result.series[series]
    k = int(np.argmax(values))
    backing = {"series": series, "max": float(values[k]), "time_of_max_s": float(limit.result.times_s[k])}
    if out_dir is not None:
        from gqsim.report.tables import write_outputs

        write_outputs(limit.result, out_dir)
    if as_json:
        click.echo(json.dumps({**limit.to_json_dict(), "backing_simulation": backing,
                                "rule_of_thumb_value": estimate}))
        return
    click.echo(f"largest tolerable {knob}: {limit.value:.6g} {limit.unit} ({limit.status})")
    click.echo(f"current value: {limit.current:.6g} {limit.unit}; certificate: {limit.certificate}")
    click.echo(f"simulation at that value: max {series} = {backing['max']:.9g} at t = {backing['time_of_max_s']:.6g} s "
               f"({limit.evaluations} simulations, bracket {limit.bracket[0]:.4g}..{limit.bracket[1]:.4g})")
    if estimate is not None:
        click.echo(f"rule of thumb (a body's rate = |omega_ent|/2, no simulation): {estimate:.4g} {limit.unit}")
    if out_dir is not None:
        click.echo(f"files written to {out_dir}")
