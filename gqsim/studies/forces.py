"""Spurious-force study: could Casimir-Polder, Coulomb or dipole forces fake the signal?

Reads a superposition or two-body oscillators protocol that carries the confounder keys of
``gqsim/protocol/schemas/confounders-v1.fragment.json`` (an ``[interactions]`` table and per-body
``charge_c``, ``dipole_c_m``, ``relative_permittivity``, ``dispersion_resonance_rad_s``) and returns
the family's attribution table (:class:`gqsim.physics.electromagnetic.Attribution`). The physics
lives in :mod:`gqsim.physics.electromagnetic` and in each family's ``force_tally``; this module
only dispatches by family.
"""

from __future__ import annotations

from typing import Any, Mapping

from gqsim.oscillators import force_tally as oscillator_budget
from gqsim.physics.electromagnetic import split_interaction_keys, validate_interaction_keys
from gqsim.superposition import force_tally as superposition_budget

__all__ = ["split_interaction_keys", "validate_interaction_keys", "superposition_budget", "oscillator_budget",
           "force_budget"]


def force_budget(data: Mapping[str, Any], *, share_limit: float | None = None, source: str = "<memory>"):
    """:func:`superposition_budget` or :func:`oscillator_budget`, chosen by the protocol's ``family``."""
    family = data.get("family") if isinstance(data, Mapping) else None
    if family == "oscillators":
        return oscillator_budget(data, share_limit=share_limit, source=source)
    return superposition_budget(data, share_limit=share_limit, source=source)
