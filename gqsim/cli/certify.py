"""``gqsim certify``: how many repetitions, of which measurements, at what time, show the
entanglement of a simulated run. Parses options, calls :mod:`gqsim.studies.certification.plan`, prints/writes.
No physics here."""

from __future__ import annotations

import json
from pathlib import Path

import click

__all__ = ["certify_command"]


@click.command("certify")
@click.argument("protocol", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--plan", "plan_file", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="Certification file (TOML): target, readout, witnesses, Monte-Carlo check.")
@click.option("--confidence", type=float, default=None, help="One-sided confidence level (default 0.999).")
@click.option("--sigmas", type=float, default=None, help="Standard deviations to clear instead of a confidence.")
@click.option("--overhead-s", type=float, default=None, help="Time per repetition besides the hold time [s].")
@click.option("--trials", type=int, default=None, help="Seeded Monte-Carlo records at the best time (0 = off).")
@click.option("--seed", type=int, default=None, help="Seed of the Monte-Carlo records.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=None,
              help="Directory for certify.json, certify.csv and certify.png.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the table.")
def certify_command(protocol: Path, plan_file: Path | None, confidence: float | None, sigmas: float | None,
                    overhead_s: float | None, trials: int | None, seed: int | None, out_dir: Path | None,
                    as_json: bool):
    """Repetitions and lab time needed to certify the entanglement of PROTOCOL, per witness."""
    from gqsim.studies.certification.plan import (
        certify_result,
        options_from_mapping,
        oscillator_covariances,
        read_certify_file,
        write_certification,
    )
    from gqsim.errors import ProtocolError
    from gqsim.families import simulate
    from gqsim.protocol.reader import load_protocol

    if confidence is not None and sigmas is not None:
        raise ProtocolError("--sigmas", sigmas, "give either --confidence or --sigmas, not both")
    overrides = {"confidence": confidence, "sigmas": sigmas, "overhead_s": overhead_s, "trials": trials,
                 "seed": seed}
    options = read_certify_file(plan_file, **overrides) if plan_file else options_from_mapping({}, **overrides)
    proto = load_protocol(protocol)
    result = simulate(proto)
    extra = {}
    if result.family == "oscillators":
        extra["covariances"], extra["position_scale_m"] = oscillator_covariances(proto, result)
    report = certify_result(result, options, **extra)
    if out_dir is not None:
        write_certification(report, out_dir)
    if as_json:
        click.echo(json.dumps(report.to_json_dict()))
    else:
        click.echo(report.as_text())
        if out_dir is not None:
            click.echo(f"files written to {out_dir}")
