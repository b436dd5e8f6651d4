"""Command line: parse arguments, call the public API, print and write. No physics here.

User mistakes (bad protocol values, unreadable files) print one line
``gqsim: error: <key> = <value>: <what is allowed>`` and exit with status 2.
"""

from __future__ import annotations

import importlib
import json
import os
import sys
from pathlib import Path

import click

from gqsim._version import __version__
from gqsim.errors import GqsimError

__all__ = ["main", "cli", "COMMAND_MODULES"]

#: Extra sub-commands live next to the stage they drive; each entry is "module:attribute"
#: naming a click command. Add a line here to register a new one.
COMMAND_MODULES: tuple[str, ...] = (
    "gqsim.cli.forces:forces_group",
    "gqsim.cli.certify:certify_command",
    "gqsim.cli.decoherence:noise_group",
    "gqsim.cli.survey:scan_group",
    "gqsim.cli.compare:compare_routes_command",
)


class _OneLineErrors(click.Group):
    """Turn gqsim's typed errors into one line and exit status 2."""

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except GqsimError as exc:
            click.echo(f"gqsim: error: {exc}", err=True)
            ctx.exit(2)
        except (click.exceptions.Exit, click.ClickException, click.exceptions.Abort):
            raise
        except Exception as exc:  # a bug, not a user mistake: keep it to one line unless debugging
            if os.environ.get("GQSIM_DEBUG"):
                raise
            click.echo(f"gqsim: internal error: {type(exc).__name__}: {exc} "
                       "(set GQSIM_DEBUG=1 for the traceback and please report it)", err=True)
            ctx.exit(1)


@click.group(cls=_OneLineErrors, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, "--version", prog_name="gqsim", message="%(prog)s %(version)s")
def cli():
    """gqsim: will gravity entangle these two masses, and can the experiment show it?"""


@cli.command("run")
@click.argument("protocol", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=None,
              help="Directory for the time series (CSV), summary (JSON), resolved protocol and figures.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object on stdout instead of the table.")
@click.option("--engine", type=click.Choice(["auto", "closed_form", "lindblad", "gaussian", "fock"]), default=None,
              help="Override the protocol's engine choice.")
def run_command(protocol: Path, out_dir: Path | None, as_json: bool, engine: str | None):
    """Simulate PROTOCOL and report entanglement measures over time."""
    from gqsim.families import simulate
    from gqsim.protocol.reader import load_protocol
    from gqsim.report.tables import summary_table, write_outputs

    result = simulate(load_protocol(protocol), engine=engine)
    if out_dir is not None:
        write_outputs(result, out_dir)
    if as_json:
        click.echo(json.dumps(result.to_json_dict()))
    else:
        click.echo(summary_table(result))
        if out_dir is not None:
            click.echo(f"files written to {out_dir}")


@cli.command("check")
@click.argument("protocol", type=click.Path(dir_okay=False, path_type=Path))
def check_command(protocol: Path):
    """Validate PROTOCOL (schema and physical consistency) without simulating."""
    from gqsim.families import build
    from gqsim.protocol.reader import load_protocol

    proto = load_protocol(protocol)
    build(proto)
    click.echo(f"{protocol}: valid {proto.family} protocol (schema_version {proto.schema_version})")


def _register_extra_commands() -> None:
    for spec in COMMAND_MODULES:
        module_name, attr = spec.split(":")
        cli.add_command(getattr(importlib.import_module(module_name), attr))


_register_extra_commands()


def main(argv: list[str] | None = None) -> int:
    """Console-script entry point."""
    try:
        cli.main(args=argv, prog_name="gqsim", standalone_mode=True)
    except SystemExit as exc:
        return int(exc.code or 0)
    return 0


if __name__ == "__main__":
    sys.exit(main())
