"""The ``[environment]`` of an oscillators protocol: gas as Caldeira-Leggett damping at the gas
temperature, photon, laser and user localisation added to each body's channels, and the heating
tally of every active mode. Rates come from :mod:`gqsim.physics.environment`.
"""

from __future__ import annotations

import math
from typing import Any, Mapping

import numpy as np

from gqsim.physics.environment.parameters import environment_from_table, sphere_from_body_table
from gqsim.physics.environment.sources import validity_notes
from gqsim.physics.environment.tally import BudgetLine, NoiseBudget
from gqsim.protocol.reader import Protocol, split_environment

__all__ = ["oscillator_bodies", "oscillator_channel_table", "oscillator_mode_rows", "fold_environment",
           "with_environment", "tally_of", "decoherence_tally", "AXIS_VECTORS"]


AXIS_VECTORS = {"x": np.array([1.0, 0.0, 0.0]), "y": np.array([0.0, 1.0, 0.0]), "z": np.array([0.0, 0.0, 1.0])}


def oscillator_bodies(data: Mapping[str, Any], env_table):
    """(setup, environment, one sphere per body) of an oscillators protocol mapping."""
    from gqsim.oscillators.setup import setup_from_protocol

    setup = setup_from_protocol(data)
    env = environment_from_table(env_table) if env_table is not None else None
    spheres = []
    for index, body in enumerate(setup.bodies):
        entry = data["bodies"][index]
        spheres.append(None if env is None else sphere_from_body_table(
            {**entry, "label": body.label}, mass_kg=body.mass_kg, radius_m=body.radius_m, key=f"bodies[{index}]"))
    return setup, env, spheres


def oscillator_channel_table(environment, sphere, body, existing: Mapping[str, Any], key: str,
                             terms=None) -> dict:
    """A body's ``channels`` table with the environment merged in (oscillator protocols).

    Gas becomes Caldeira-Leggett damping (``damping_model = "brownian"``) at the gas
    temperature - its localisation is that damping's diffusion and is *not* added again;
    photon, laser and user localisation add to ``localisation_per_m2_s`` (the laser's
    anisotropic recoil is taken along the most strongly kicked active mode, conservative,
    because the table holds one value per body). ``terms``: the modes' oscillator_terms, when the
    caller has them already (one tuple per active mode).
    """
    from gqsim.physics.environment.sources import oscillator_terms
    from gqsim.errors import PhysicsError

    table = dict(existing)
    per_mode = terms if terms is not None else [
        oscillator_terms(environment, sphere, AXIS_VECTORS[a], body.omega_rad_s(a)) for a in body.modes]
    extra_lam = max(sum(t.localisation_per_m2_s for t in mode_terms) for mode_terms in per_mode)
    if extra_lam > 0:
        table["localisation_per_m2_s"] = table.get("localisation_per_m2_s", 0.0) + extra_lam
    gas = [t for t in per_mode[0] if t.damping_per_s > 0]
    if gas:
        if table.get("damping_rate_per_s", 0.0) > 0:
            raise PhysicsError(f"{key}.channels.damping_rate_per_s", table["damping_rate_per_s"],
                               "the [environment.gas] table already damps this body (gas damping and gas "
                               "collisions are one channel); remove one of them so it is not counted twice")
        table.update(damping_model="brownian", damping_rate_per_s=gas[0].damping_per_s,
                     bath_temperature_k=gas[0].bath_temperature_k)
        table.pop("bath_occupation", None)
    return table


def tally_of(setup, env, spheres, title: str = "") -> NoiseBudget:
    """Heating rate [phonons/s] of every source on every active mode of an oscillators setup.

    Gas appears once, as damping at the gas temperature (heating gamma k_B T / (hbar omega));
    the protocol's own channels table is listed as one line per mode. ``setup`` is the one read
    before the environment is folded into the bodies' channels (:func:`oscillator_bodies`).
    """
    lines: list[BudgetLine] = []
    notes: list[str] = []
    for body, sphere in zip(setup.bodies, spheres):
        for axis in body.modes:
            rows = oscillator_mode_rows(env, sphere, body, axis, body.channels)
            total = sum(r[1] for r in rows)
            for label, heat, lam, driver in rows:
                lines.append(BudgetLine(body=f"{body.label}.{axis}", source=label, rate_per_s=heat,
                                        share=heat / total if total > 0 else 0.0, separation_m=math.nan,
                                        localisation_per_m2_s=lam, saturation_per_s=None, driver=driver,
                                        reference="gqsim.physics.environment.sources.oscillator_terms"))
        if env is not None:
            notes.extend(validity_notes(env, sphere))
    if env is None:
        notes.append("the protocol has no [environment] table: only its own channels are listed")
    return NoiseBudget(lines=tuple(lines), notes=tuple(dict.fromkeys(notes)), title=title,
                       quantity="heating [phonons/s]")


def decoherence_tally(data: Mapping[str, Any] | Protocol, *, source: str = "<memory>") -> NoiseBudget:
    """The heating tally of an oscillators protocol without evolving it (what a run carries in its
    record, see :func:`gqsim.oscillators.simulate`)."""
    if isinstance(data, Protocol):
        data, source = data.to_dict(), data.source
    protocol, table = split_environment(data, source=source)
    setup, env, spheres = oscillator_bodies(protocol.data, table)
    return tally_of(setup, env, spheres, protocol.data.get("about", {}).get("title", ""))


def fold_environment(data: Mapping[str, Any], setup, env, spheres) -> Mapping[str, Any]:
    """``data`` (without its ``[environment]``) with the environment folded into each body's
    channels table (:func:`oscillator_channel_table`); ``setup, env, spheres`` from
    :func:`oscillator_bodies`. ``data`` is not modified."""
    out = dict(data)
    out.pop("environment", None)
    out["bodies"] = [dict(entry) for entry in data["bodies"]]
    for index, (body, sphere) in enumerate(zip(setup.bodies, spheres)):
        entry = out["bodies"][index]
        entry["channels"] = oscillator_channel_table(env, sphere, body, entry.get("channels", {}), f"bodies[{index}]")
    return out


def with_environment(data: Mapping[str, Any]) -> Mapping[str, Any]:
    """The protocol mapping with an ``[environment]`` table folded into each body's channels
    (gas as Caldeira-Leggett damping at the gas temperature; photon, laser and extra
    localisation added to ``localisation_per_m2_s``). ``data`` is not modified; without an
    environment it is returned as is. Every route from a protocol to an oscillator model
    (``build``, the batched survey route) goes through this or :func:`fold_environment`."""
    if data.get("environment") is None:
        return data
    table = data["environment"]
    setup, env, spheres = oscillator_bodies({k: v for k, v in data.items() if k != "environment"}, table)
    return fold_environment(data, setup, env, spheres)


def oscillator_mode_rows(env, sphere, body, axis: str, own, terms=None) -> list[tuple]:
    """(source, heating [phonons/s], equivalent localisation, driver) of every source acting on
    mode ``axis`` of ``body``: the environment's terms (:func:`gqsim.physics.environment.sources.oscillator_terms`,
    or ``terms`` when the caller has them) and then the protocol's own ``channels`` table ``own``
    (heating + hbar Lambda/(M omega) + damping x bath occupation), listed when it heats at all.
    ``env`` may be None."""
    from gqsim.physics.environment.sources import oscillator_terms

    omega = body.omega_rad_s(axis)
    rows = []
    if env is not None:
        if terms is None:
            terms = oscillator_terms(env, sphere, AXIS_VECTORS[axis], omega)
        for term in terms:
            rows.append((term.label, term.heating_phonons_per_s, term.equivalent_localisation_per_m2_s, term.driver))
    own_heat = own.heating_phonons_per_s + rates_heating(own.localisation_per_m2_s, body.mass_kg, omega)
    own_heat += own.damping_rate_per_s * own.bath_occupation_at(omega)
    if own_heat > 0:
        rows.append(("protocol channels table", own_heat, None, None))
    return rows


def rates_heating(localisation_per_m2_s: float, mass_kg: float, omega_rad_s: float) -> float:
    """hbar Lambda / (M omega) [phonons/s] (see :func:`gqsim.physics.environment.rates.heating_phonons_per_s`)."""
    from gqsim.physics.environment.rates import heating_phonons_per_s

    return heating_phonons_per_s(localisation_per_m2_s, mass_kg, omega_rad_s)
