"""Wires the stages together: protocol -> setup -> model -> channels -> engine -> result -> measures.

Each protocol family registers a ``build`` (protocol -> model, validating physics)
and a ``simulate`` (protocol -> Result) function here, by import path, so that the
command line and the notebook API stay family agnostic.
"""

from __future__ import annotations

import importlib
from dataclasses import replace
from pathlib import Path
from typing import Any, Callable

from gqsim.errors import ProtocolError
from gqsim.protocol.reader import Protocol, load_protocol
from gqsim.record import Result

__all__ = ["simulate", "build", "FAMILY_RUNNERS"]

#: family -> (builder "module:function", simulator "module:function")
FAMILY_RUNNERS: dict[str, tuple[str, str]] = {
    "superposition": ("gqsim.superposition.run:build", "gqsim.superposition.run:simulate"),
    "oscillators": ("gqsim.oscillators.run:build", "gqsim.oscillators.run:simulate"),
}


def _resolve(spec: str) -> Callable[..., Any]:
    module_name, attr = spec.split(":")
    return getattr(importlib.import_module(module_name), attr)


def _as_protocol(protocol: Protocol | str | Path) -> Protocol:
    return protocol if isinstance(protocol, Protocol) else load_protocol(protocol)


def build(protocol: Protocol | str | Path):
    """Validate ``protocol`` down to the model stage and return the model (no time evolution)."""
    proto = _as_protocol(protocol)
    if proto.family not in FAMILY_RUNNERS:
        raise ProtocolError("family", proto.family, f"must be one of {sorted(FAMILY_RUNNERS)}")
    return _resolve(FAMILY_RUNNERS[proto.family][0])(proto)


def simulate(protocol: Protocol | str | Path, *, engine: str | None = None) -> Result:
    """Run ``protocol`` (a :class:`Protocol` or a path to a TOML file) and return its :class:`Result`.

    ``engine`` overrides the protocol's own engine choice (``None`` keeps it).
    """
    proto = _as_protocol(protocol)
    if proto.family not in FAMILY_RUNNERS:
        raise ProtocolError("family", proto.family, f"must be one of {sorted(FAMILY_RUNNERS)}")
    result = _resolve(FAMILY_RUNNERS[proto.family][1])(proto, engine=engine)
    return replace(result, summary={**result.summary, "noise_budget": _noise_budget_summary(proto)})


def _noise_budget_summary(proto: Protocol) -> dict:
    """Every decoherence channel of the run with its rate and share (gqsim.studies.decoherence);
    ``gqsim noise budget`` prints the full table with references and tolerable limits."""
    from gqsim.studies.decoherence import noise_budget

    budget = noise_budget(proto.to_dict(), source=proto.source).to_json_dict()
    rows = [{"body": c["body"], "channel": c["channel"], "rate": c["rate_per_s"], "share": c["share"],
             "driver": c["driver"] or "-"} for c in budget["channels"]]
    return {"quantity": budget["quantity"], "rows": rows}
