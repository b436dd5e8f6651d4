"""``gqsim forces``: which forces make the entangling phase. Parses options, calls
:mod:`gqsim.physics.electromagnetic`, prints. No physics here."""

from __future__ import annotations

import json
from pathlib import Path

import click

from gqsim.errors import ProtocolError
from gqsim.protocol.reader import read_toml

__all__ = ["forces_group"]


_read_toml = read_toml  # one-line errors for unreadable or malformed files


@click.group("forces")
def forces_group():
    """Gravity next to the electromagnetic forces that could fake its entanglement."""


@forces_group.command("budget")
@click.argument("protocol", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--share-limit", type=float, default=None,
              help="Flag non-gravitational shares above this fraction (default: the protocol's, else 0.1).")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of the table.")
def budget_command(protocol: Path, share_limit: float | None, as_json: bool):
    """Share of each force in the entanglement a PROTOCOL makes.

    Superpositions: entangling phase [rad] and pure-state E_N [ebit] per force. Oscillators:
    coupling [N/m] and the engine's maximum E_N [nat] per force. Exit status 3 when a
    non-gravitational share exceeds the limit.
    """
    from gqsim.studies.forces import force_budget

    table = force_budget(_read_toml(protocol), share_limit=share_limit, source=str(protocol))
    click.echo(json.dumps(table.to_json_dict()) if as_json else table.as_text())
    if table.flagged:
        click.get_current_context().exit(3)


@forces_group.command("safe-gap")
@click.option("--material", default=None, help="Named material (gives density and permittivity).")
@click.option("--relative-permittivity", type=float, default=None, help="Static relative permittivity.")
@click.option("--density-kg-m3", type=float, default=None, help="Mass density [kg/m^3].")
@click.option("--fraction", type=float, default=0.1, show_default=True,
              help="Casimir-Polder allowed as this fraction of gravity.")
@click.option("--field-temperature-k", type=float, default=0.0, show_default=True,
              help="Temperature of the field between the spheres [K]; > 0 includes thermal Casimir-Polder.")
@click.option("--style", type=click.Choice(["in_line", "side_by_side"]), default=None,
              help="Compare entangling phases for this branch arrangement (needs --branch-span-m).")
@click.option("--branch-span-m", type=float, default=None, help="Distance between a body's outer branches [m].")
def safe_gap_command(material: str | None, relative_permittivity: float | None, density_kg_m3: float | None,
                     fraction: float, field_temperature_k: float, style: str | None, branch_span_m: float | None):
    """Separation below which Casimir-Polder exceeds FRACTION of gravity (equal homogeneous spheres).

    Without --style: the energies at one separation. With --style and --branch-span-m: the
    entangling phases, and the answer is the distance between the body centres. Neither
    depends on the sphere radius.
    """
    from gqsim.physics.electromagnetic import casimir_polder_gravity_crossover_m, casimir_polder_phase_crossover_m
    from gqsim.physics.materials import material as lookup

    eps, rho = relative_permittivity, density_kg_m3
    if material is not None:
        entry = lookup(material, "--material")
        eps = entry.relative_permittivity if eps is None else eps
        rho = entry.density_kg_m3 if rho is None else rho
        if eps is None:
            raise ProtocolError("--material", material, "is a conductor; give --relative-permittivity for a dielectric")
    if eps is None or rho is None:
        raise ProtocolError("--relative-permittivity/--density-kg-m3", None,
                            "give --material, or both --relative-permittivity and --density-kg-m3")
    if (style is None) != (branch_span_m is None):
        raise ProtocolError("--style/--branch-span-m", style or branch_span_m, "give both or neither")
    if style is None:
        gap = casimir_polder_gravity_crossover_m(relative_permittivity=eps, density_kg_m3=rho, fraction=fraction,
                                                 temperature_k=field_temperature_k)
        click.echo(f"casimir_polder_safe_gap_m: {gap:.6g}")
        return
    centre = casimir_polder_phase_crossover_m(relative_permittivity=eps, density_kg_m3=rho, style=style,
                                              branch_span_m=branch_span_m, fraction=fraction,
                                              temperature_k=field_temperature_k)
    closest = centre - branch_span_m if style == "in_line" else centre
    click.echo(f"closest_branch_approach_m: {closest:.6g}")
    click.echo(f"casimir_polder_safe_centre_distance_m: {centre:.6g}")
