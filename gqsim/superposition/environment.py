"""The ``[environment]`` of a superposition protocol: one sphere per body, the environment's
branch-decoherence channels added to each body's own dephasing, and the decoherence tally of
every body at its largest branch separation (environment sources, the protocol's own dephasing
table, spin T1/T2). Rates come from :mod:`gqsim.physics.environment`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from gqsim.physics.environment.parameters import Environment, environment_from_table, sphere_from_body_table
from gqsim.physics.environment.sources import EnvironmentDephasing, environment_sources, validity_notes
from gqsim.physics.environment.tally import BudgetLine, NoiseBudget
from gqsim.protocol.reader import Protocol, split_environment
from gqsim.superposition.channels import channel_from_spec
from gqsim.superposition.setup import SuperpositionSetup, build_superposition_setup

__all__ = ["BodyEnvironment", "body_environments", "decoherence_tally", "tally_of"]


@dataclass(frozen=True, kw_only=True)
class BodyEnvironment:
    """The environment as one body feels it: its sphere and its environment channel."""

    environment: Environment
    sphere: Any
    channel: EnvironmentDephasing


def body_environments(setup: SuperpositionSetup, env_table: Mapping[str, Any] | None,
                      body_tables) -> tuple[BodyEnvironment, ...] | None:
    """One :class:`BodyEnvironment` per body of ``setup`` (None without an ``[environment]``).

    ``body_tables``: the protocol's ``bodies`` entries (material, radius, permittivity keys)."""
    if env_table is None:
        return None
    env = environment_from_table(env_table)
    out = []
    for entry, body in zip(body_tables, setup.bodies):
        sphere = sphere_from_body_table({**dict(entry), "label": body.label}, mass_kg=body.mass_kg,
                                        radius_m=body.radius_m, key=body.key)
        out.append(BodyEnvironment(environment=env, sphere=sphere,
                                   channel=EnvironmentDephasing(sources=environment_sources(env, sphere, body.split_axis))))
    return tuple(out)


def channel_summary(setup: SuperpositionSetup, envs: tuple[BodyEnvironment, ...]) -> tuple[dict, list[str]]:
    """Per body: each environment source's F(Delta) [1/s] at the full branch span, and validity notes."""
    rows, notes = {}, []
    for body, be in zip(setup.bodies, envs):
        span = body.full_span_m
        rows[body.label] = {"at_full_span_m": span,
                            **{f"{label}_per_s": rate for label, rate in be.channel.rates_by_source(span).items()},
                            "total_per_s": float(be.channel.rate_per_s(np.array(span)))}
        notes.extend(validity_notes(be.environment, be.sphere))
    return rows, notes


def tally_of(setup: SuperpositionSetup, envs: tuple[BodyEnvironment, ...] | None) -> NoiseBudget:
    """Every branch-decoherence channel of every body at its largest branch separation, with shares."""
    lines: list[BudgetLine] = []
    notes: list[str] = []
    for index, body in enumerate(setup.bodies):
        sep = float(np.max(body.branch_separations_m))
        rows = []
        if envs is not None:
            be = envs[index]
            for src in environment_sources(be.environment, be.sphere, body.split_axis):
                rows.append((src.label, float(src.channel.rate_per_s(np.array(sep))), src.localisation_per_m2_s,
                             src.saturation_per_s, src.driver, src.reference))
            notes.extend(validity_notes(be.environment, be.sphere))
        if body.dephasing.model != "none":
            spec = body.dephasing
            rows.append(("protocol dephasing table", float(channel_from_spec(spec).rate_per_s(np.array(sep))),
                         spec.localisation_per_m2_s if spec.model == "separation_squared" else None,
                         spec.saturation_per_s if spec.model == "separation_squared" else spec.rate_per_s,
                         None, "protocol"))
        if body.spin.t1_s is not None:
            rows.append(("spin relaxation (T1)", 0.5 / body.spin.t1_s, None, None, None,
                         "coherence decay 1/(2 T1) of amplitude damping, [NielsenChuang2010]"))
        if body.spin.pure_dephasing_per_s > 0:
            rows.append(("spin pure dephasing (T2)", body.spin.pure_dephasing_per_s, None, None, "spin_dephasing",
                         "1/T2 - 1/(2 T1), [NielsenChuang2010]"))
        total = sum(r[1] for r in rows)
        for label, rate, lam, sat, driver, ref in rows:
            lines.append(BudgetLine(body=body.label, source=label, rate_per_s=rate,
                                    share=rate / total if total > 0 else 0.0, separation_m=sep,
                                    localisation_per_m2_s=lam, saturation_per_s=sat, driver=driver, reference=ref))
    if envs is None:
        notes.append("the protocol has no [environment] table: only its own dephasing and spin channels are listed")
    return NoiseBudget(lines=tuple(lines), notes=tuple(dict.fromkeys(notes)), title=setup.title)


def decoherence_tally(data: Mapping[str, Any] | Protocol, *, source: str = "<memory>") -> NoiseBudget:
    """The decoherence tally of a superposition protocol without evolving it (what a run carries
    in its record, see :func:`gqsim.superposition.simulate`)."""
    if isinstance(data, Protocol):
        data, source = data.to_dict(), data.source
    protocol, table = split_environment(data, source=source)
    setup = build_superposition_setup(protocol)
    return tally_of(setup, body_environments(setup, table, protocol.data["bodies"]))


