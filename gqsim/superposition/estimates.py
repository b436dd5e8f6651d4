"""Rules of thumb that need the model and the environment together, without a simulation."""

from __future__ import annotations

from typing import Any, Mapping

import numpy as np

from gqsim.protocol.reader import split_environment
from gqsim.superposition.environment import body_environments

__all__ = ["rule_of_thumb_limit"]


def rule_of_thumb_limit(data: Mapping[str, Any], knob: str, *, source: str = "<memory>") -> float:
    """Quick estimate without simulation: the knob value at which some body's total coherence
    decay rate at its largest branch separation reaches half the entangling rate, |omega_ent|/2
    (the dephasing threshold quoted in the superposition run summary; a rule of thumb, not a
    certificate - compare :func:`tolerable_limit`). Superposition protocols only; the body's
    own dephasing table and spin decay count against the target.
    """
    import math

    from gqsim.errors import ProtocolError
    from gqsim.physics.environment.thresholds import RATE_KNOBS, rate_limit
    from gqsim.superposition.channels import body_channel
    from gqsim.superposition.run import build

    if knob not in RATE_KNOBS:
        raise ProtocolError("knob", knob, f"the rule-of-thumb estimate takes one of {list(RATE_KNOBS)}")
    protocol, table = split_environment(data, source=source)
    if protocol.family != "superposition" or table is None:
        raise ProtocolError("family", protocol.family, "the estimate needs a superposition protocol with [environment]")
    model = build(protocol)
    target = abs(model.analytic_entangling_rate_rad_s()) / 2.0
    setup = model.setup
    envs = body_environments(setup, table, protocol.data["bodies"])
    best = math.inf
    for body, be in zip(setup.bodies, envs):
        env, sphere = be.environment, be.sphere
        sep = float(np.max(body.branch_separations_m))
        own = float(body_channel(body).rate_per_s(np.array(sep)))
        if own >= target:
            return 0.0
        best = min(best, rate_limit(env, sphere, sep, knob, target - own, axis=body.split_axis))
    return best
