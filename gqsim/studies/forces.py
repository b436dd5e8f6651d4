"""Run stage for the force budget: protocol -> setup -> model (-> engine) -> attribution table.

Reads a superposition or two-body oscillators protocol that carries the confounder keys of
``gqsim/protocol/schemas/confounders-v1.fragment.json`` (an ``[interactions]`` table and per-body
``charge_c``, ``dipole_c_m``, ``relative_permittivity``, ``dispersion_resonance_rad_s``), builds
each force's pair potential with :mod:`gqsim.physics.electromagnetic`, and returns an
:class:`gqsim.physics.electromagnetic.Attribution`. The physics lives in :mod:`gqsim.physics.electromagnetic` and in the
family model builders; this module only wires the stages.
"""

from __future__ import annotations

import json
from dataclasses import replace
from typing import Any, Mapping

import numpy as np

from gqsim.physics.electromagnetic import (
    DEFAULT_SHARE_LIMIT,
    ELECTROMAGNETIC_LABELS,
    Attribution,
    ConductingScreen,
    ForceRow,
    RetardedCasimirPolder,
    ThermalCasimirPolder,
    _body_table,
    _check_limit,
    _shares,
    fragment,
    potentials_from_tables,
    screen_branch_phases_rad,
    superposition_attribution,
)
from gqsim.errors import PhysicsError, ProtocolError

__all__ = ["split_interaction_keys", "validate_interaction_keys", "superposition_budget", "oscillator_budget",
           "force_budget"]


def split_interaction_keys(data: Mapping[str, Any]) -> tuple[dict, dict]:
    """Split a protocol mapping into (family part, confounder part).

    The confounder part holds ``interactions`` and, per body, the fragment's body keys;
    the family part is everything else, for :func:`gqsim.protocol.reader.parse_protocol`. Once the
    family schemas include the fragment this split is harmless (the keys validate twice).
    """
    frag = fragment()
    body_keys = set(frag["body_properties"])
    family = json.loads(json.dumps(dict(data)))
    extra: dict = {}
    if "interactions" in family:
        extra["interactions"] = family.pop("interactions")
    bodies = family.get("bodies")
    if isinstance(bodies, list):
        extra["bodies"] = [{k: b.pop(k) for k in sorted(body_keys & set(b))} if isinstance(b, dict) else {}
                           for b in bodies]
    return family, extra


def validate_interaction_keys(extra: Mapping[str, Any]) -> None:
    """Validate the confounder part against the fragment; one-line ProtocolError on failure."""
    import jsonschema

    from gqsim.protocol.reader import _to_protocol_error  # same error wording as every protocol key

    frag = fragment()
    schema = {"type": "object", "properties": {
        **frag["top_level_properties"],
        "bodies": {"type": "array", "items": {"type": "object", "properties": frag["body_properties"]}}}}
    errors = list(jsonschema.Draft202012Validator(schema).iter_errors(dict(extra)))
    if errors:
        worst = max(errors, key=lambda e: len(e.absolute_path))
        raise _to_protocol_error(worst)


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


def _largest(block: np.ndarray) -> float:
    return float(block.ravel()[np.argmax(np.abs(block.ravel()))]) if block.size else 0.0


def oscillator_budget(data: Mapping[str, Any], *, share_limit: float | None = None,
                      source: str = "<memory>") -> Attribution:
    """Attribution table of a two-body oscillators protocol with an ``[interactions]`` table.

    protocol -> :func:`gqsim.oscillators.setup.setup_from_protocol` -> for each force alone and
    all together :func:`gqsim.oscillators.model.build_model` with that force's pair potential
    -> :func:`gqsim.oscillators.run.simulate_model` (the protocol's engine, stages and channels).
    ``value`` is the inter-body stiffness entry of largest magnitude kappa [N/m] (energy
    kappa x_A x_B; the share uses the Frobenius norm of the inter-body block),
    ``coupling_rate_rad_s`` the same entry of the model's coupling matrix, and
    ``log_negativity`` the exact maximum over the time grid of the engine's E_N [nats].
    ``interactions.include`` decides the forces (the oscillator schema's own
    ``interaction.potentials`` list is ignored here).
    """
    from gqsim.oscillators.model import build_model
    from gqsim.oscillators.run import simulate_model
    from gqsim.oscillators.setup import setup_from_protocol
    from gqsim.protocol.reader import parse_protocol

    family, extra = split_interaction_keys(data)
    validate_interaction_keys(extra)
    proto = parse_protocol(family, source=source)
    if proto.family != "oscillators":
        raise ProtocolError("family", proto.family, "oscillator_budget reads 'oscillators' protocols")
    setup = setup_from_protocol(proto.data)
    if len(setup.bodies) != 2:
        raise ProtocolError("bodies", len(setup.bodies), "the force budget reads two-body protocols")
    interactions = dict(extra.get("interactions") or {"include": ["gravity"]})
    include = [n for n in dict.fromkeys(interactions["include"])
               if not (interactions.get("conducting_screen") and n in ELECTROMAGNETIC_LABELS)]
    if not include:
        raise ProtocolError("interactions.include", list(interactions["include"]),
                            "the conducting screen removes every force listed; include gravity")
    labels = [b.label for b in setup.bodies]
    raw = [dict(t) for t in data["bodies"]]
    oriented = [n for n in include if n in ("dipole_dipole", "dipole_induced_dipole")]
    if oriented:
        line = np.subtract(setup.bodies[1].position_m, setup.bodies[0].position_m)
        for body in setup.bodies:
            for axis in body.modes:
                unit = np.eye(3)["xyz".index(axis)]
                if abs(abs(unit @ line) - np.linalg.norm(line)) > 1e-12 * np.linalg.norm(line):
                    raise PhysicsError("interactions.include", oriented[0],
                                       f"mode {body.label}.{axis} is not along the line of centres; the oscillator "
                                       "model's Hessian is central (wire pair_hessian_at first)")

    def factory(name: str):
        def make(body_a, body_b):
            pair = [body_a, body_b]
            tables = [{**({"material": b.material} if b.material else {}), **_body_table(raw[labels.index(b.label)])}
                      for b in pair]
            table = {"include": [name], "field_temperature_k": interactions.get("field_temperature_k", 0.0)}
            pot = potentials_from_tables(table, tables, masses_kg=[b.mass_kg for b in pair],
                                         radii_m=[b.radius_m for b in pair])[0]
            if hasattr(pot, "hessian_from_vector"):  # radial interface along the actual line of centres
                pot = replace(pot, axis=np.subtract(body_b.position_m, body_a.position_m))
            return pot
        make.__name__ = name
        return make

    def run(names):
        model = build_model(setup, [factory(n) for n in names])
        ia, ib = model.body_modes(labels[0]), model.body_modes(labels[1])
        kappa = model.pair_stiffness_n_per_m[np.ix_(ia, ib)]
        rate = model.coupling_rad_s[np.ix_(ia, ib)]
        result = simulate_model(model)
        return kappa, rate, float(np.max(result.series["log_negativity"]))

    limit = _check_limit(share_limit if share_limit is not None else interactions.get("share_limit",
                                                                                        DEFAULT_SHARE_LIMIT))
    runs = [run([n]) for n in include]
    sizes = [float(np.linalg.norm(k)) for k, _, _ in runs]
    shares, non_grav, flags = _shares(include, sizes, limit)
    rows = [ForceRow(label=n, value=_largest(k), share=sh, log_negativity=en, exceeds_limit=fl,
                     extra={"coupling_rate_rad_s": _largest(g)})
            for n, (k, g, en), sh, fl in zip(include, runs, shares, flags)]
    k_all, g_all, en_all = run(include)
    rows.append(ForceRow(label="all", value=_largest(k_all), share=1.0, log_negativity=en_all,
                         extra={"coupling_rate_rad_s": _largest(g_all)}))
    notes = ["log_negativity: maximum over the protocol's time grid, from the oscillator engine (values below "
             "~1e-12 nats are at the engine's rounding floor)"]
    if interactions.get("conducting_screen"):
        notes.append("ideal conducting screen: electromagnetic pair terms removed between the bodies")
    return Attribution(family="oscillators", value_name="coupling", value_unit="N/m", entanglement_unit="nat",
                       rows=tuple(rows), share_limit=limit, non_gravitational_share=non_grav, flagged=any(flags),
                       notes=tuple(notes))


def force_budget(data: Mapping[str, Any], *, share_limit: float | None = None, source: str = "<memory>"):
    """:func:`superposition_budget` or :func:`oscillator_budget`, chosen by the protocol's ``family``."""
    family = data.get("family") if isinstance(data, Mapping) else None
    if family == "oscillators":
        return oscillator_budget(data, share_limit=share_limit, source=source)
    return superposition_budget(data, share_limit=share_limit, source=source)
