"""The force tally of a two-body oscillators protocol with an ``[interactions]`` table: each force's
inter-body stiffness, coupling rate and the entanglement it alone would make, from full runs of the
model with that force's pair potential.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any, Mapping

import numpy as np

from gqsim.errors import PhysicsError, ProtocolError
from gqsim.physics.electromagnetic import (DEFAULT_SHARE_LIMIT, ELECTROMAGNETIC_LABELS, Attribution, ForceRow,
                                           _body_table, _check_limit, _shares, potentials_from_tables,
                                           split_interaction_keys, validate_interaction_keys)

__all__ = ["oscillator_budget"]


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
