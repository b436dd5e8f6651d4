"""The force tally of a superposition protocol with an ``[interactions]`` table: every pair force's
entangling phase along the whole split-hold-recombine sequence, its share, and the entanglement it
alone would make (:func:`gqsim.physics.electromagnetic.superposition_attribution`).
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any, Mapping

import numpy as np

from gqsim.errors import PhysicsError, ProtocolError
from gqsim.physics.electromagnetic import (DEFAULT_SHARE_LIMIT, ELECTROMAGNETIC_LABELS, Attribution, ConductingScreen,
                                           RetardedCasimirPolder, ThermalCasimirPolder, potentials_from_tables,
                                           screen_branch_phases_rad, split_interaction_keys,
                                           superposition_attribution, validate_interaction_keys)

__all__ = ["superposition_budget"]


def superposition_budget(data: Mapping[str, Any], *, share_limit: float | None = None,
                         source: str = "<memory>") -> Attribution:
    """Attribution table of a superposition protocol (parsed TOML mapping) with an ``[interactions]`` table.

    protocol (family keys validated by :func:`gqsim.protocol.reader.parse_protocol`, confounder keys
    by the fragment) -> setup (:func:`gqsim.superposition.setup.build_superposition_setup`) -> potentials
    (:func:`potentials_from_tables`) -> :func:`superposition_attribution` over the whole
    split-hold-recombine sequence. ``share_limit`` overrides ``interactions.share_limit``.
    """
    from gqsim.protocol.reader import parse_protocol
    from gqsim.superposition.setup import build_superposition_setup

    family, extra = split_interaction_keys(data)
    validate_interaction_keys(extra)
    proto = parse_protocol(family, source=source)
    if proto.family != "superposition":
        raise ProtocolError("family", proto.family, "the force budget reads 'superposition' protocols "
                                                    "(oscillators: use oscillator_budget)")
    setup = build_superposition_setup(proto)
    interactions = extra.get("interactions")
    tables = [dict(t) for t in data["bodies"]]
    potentials = potentials_from_tables(interactions, tables, masses_kg=[b.mass_kg for b in setup.bodies],
                                        radii_m=[b.radius_m for b in setup.bodies])
    limit = share_limit if share_limit is not None else (interactions or {}).get("share_limit", DEFAULT_SHARE_LIMIT)
    notes = []
    t = setup.timing
    local: dict[str, list[float]] = {}
    if interactions and interactions.get("conducting_screen"):
        dropped = [n for n in interactions["include"] if n in ELECTROMAGNETIC_LABELS]
        notes.append("ideal conducting screen: " + (", ".join(dropped) or "no electromagnetic force")
                     + " removed between the bodies; image terms are local and do not entangle")
        local, screen_notes = _screen_local_phases(setup, tables, interactions)
        notes.extend(screen_notes)
    notes.extend(_cold_field_notes(potentials, setup))
    table = superposition_attribution(potentials, setup.bodies, hold_s=t.hold_s, split_s=t.split_s,
                                      recombine_s=t.recombine_s, share_limit=limit, notes=notes)
    return replace(table, local_phases_rad=local)


def _cold_field_notes(potentials, setup) -> list[str]:
    """Remind that zero-temperature Casimir-Polder was used, with what a warm field would give."""
    a, b = setup.bodies
    rel = (a.centre_m + a.offsets_m)[:, None, :] - (b.centre_m + b.offsets_m)[None, :, :]
    r_min = float(np.min(np.linalg.norm(rel, axis=-1)))
    out = []
    for p in potentials:
        if isinstance(p, RetardedCasimirPolder):
            cold = float(p.energy_j(r_min))
            factors = []
            for temperature in (4.0, 300.0):
                warm = ThermalCasimirPolder(radius_a_m=p.radius_a_m, radius_b_m=p.radius_b_m,
                                            permittivity_a=p.permittivity_a, permittivity_b=p.permittivity_b,
                                            temperature_k=temperature)
                factors.append(f"x{float(warm.energy_j(r_min)) / cold:.3g} at {temperature:g} K")
            out.append(f"casimir_polder at zero field temperature (set interactions.field_temperature_k); at the "
                       f"closest approach {r_min:.3g} m a warm field makes it " + ", ".join(factors))
    return out


def _screen_local_phases(setup, tables, interactions) -> tuple[dict[str, list[float]], list[str]]:
    """Plate through the midpoint of the centres, normal along the line of centres: each body's
    local branch phases from its image (:func:`gqsim.physics.electromagnetic.screen_branch_phases_rad`)."""
    a, b = setup.bodies
    line = b.centre_m - a.centre_m
    screen = ConductingScreen(point_m=0.5 * (a.centre_m + b.centre_m), normal=line,
                              thickness_m=interactions.get("screen_thickness_m", 0.0))
    include = interactions["include"]
    t = setup.timing
    local, notes = {}, []
    sides = []
    for body, tab in zip(setup.bodies, tables):
        positions = body.centre_m + body.offsets_m
        side = screen.side(np.vstack([body.centre_m, positions]))
        if np.any(side != side[0]) or side[0] == 0:
            raise PhysicsError("interactions.conducting_screen", True,
                               f"the branches of {body.label} lie on both sides of (or in) the mid-plane plate")
        sides.append(side[0])
        eps = tab.get("relative_permittivity")
        if eps is None and "material" in tab:
            from gqsim.physics.materials import material
            eps = material(tab["material"]).relative_permittivity
        use_cp = "casimir_polder" in include and eps is not None and body.radius_m is not None
        charge = float(tab.get("charge_c", 0.0)) if "coulomb" in include else 0.0
        phases = screen_branch_phases_rad(screen, body.centre_m, body.offsets_m, hold_s=t.hold_s, split_s=t.split_s,
                                          recombine_s=t.recombine_s, radius_m=body.radius_m if use_cp else None,
                                          permittivity=eps if use_cp else None, charge_c=charge)
        local[body.label] = [float(x) for x in phases]
        notes.append(f"screen: local branch phases of {body.label} span {float(np.ptp(phases)):.4g} rad "
                     "(image terms; no entanglement, but plate-distance jitter turns them into dephasing)")
    if sides[0] == sides[1]:
        raise PhysicsError("interactions.conducting_screen", True, "both bodies are on the same side of the plate")
    return local, notes
