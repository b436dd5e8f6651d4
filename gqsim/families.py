"""The model families behind one call shape, so that studies, the command line and notebooks
stay family agnostic.

Each family package exposes ``build`` (protocol -> model, validating physics), ``simulate``
(protocol -> run record, carrying its decoherence tally) and ``decoherence_tally`` (the tally
without evolving); they are registered here by import path.
"""

from __future__ import annotations

import importlib
from pathlib import Path
from typing import Any, Callable

from gqsim.errors import ProtocolError
from gqsim.protocol.reader import Protocol, load_protocol
from gqsim.record import Result

__all__ = ["simulate", "build", "decoherence_tally", "FAMILY_RUNNERS"]

#: family -> package exposing build, simulate and decoherence_tally
FAMILY_RUNNERS: dict[str, str] = {
    "superposition": "gqsim.superposition",
    "oscillators": "gqsim.oscillators",
}


def _entry(proto: Protocol, name: str) -> Callable[..., Any]:
    if proto.family not in FAMILY_RUNNERS:
        raise ProtocolError("family", proto.family, f"must be one of {sorted(FAMILY_RUNNERS)}")
    return getattr(importlib.import_module(FAMILY_RUNNERS[proto.family]), name)


def _as_protocol(protocol: Protocol | str | Path) -> Protocol:
    return protocol if isinstance(protocol, Protocol) else load_protocol(protocol)


def build(protocol: Protocol | str | Path):
    """Validate ``protocol`` down to the model stage and return the model (no time evolution)."""
    proto = _as_protocol(protocol)
    return _entry(proto, "build")(proto)


def simulate(protocol: Protocol | str | Path, *, engine: str | None = None) -> Result:
    """Run ``protocol`` (a :class:`Protocol` or a path to a TOML file) and return its record.

    ``engine`` overrides the protocol's own solver choice (``None`` keeps it).
    """
    proto = _as_protocol(protocol)
    return _entry(proto, "simulate")(proto, engine=engine)


def decoherence_tally(protocol: Protocol | str | Path):
    """Every decoherence channel of ``protocol`` with its rate and share, without evolving it."""
    proto = _as_protocol(protocol)
    return _entry(proto, "decoherence_tally")(proto)
