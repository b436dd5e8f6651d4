"""Stage 5: time-evolution engines. Every engine of the superposition family has the
call shape ``evolve(model, channels, times_s, **options) -> Evolution``."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = ["Evolution"]


@dataclass(frozen=True, kw_only=True)
class Evolution:
    """Engine output: (n_times, D, D) density matrices on ``times_s`` and solver statistics."""

    times_s: np.ndarray
    states: np.ndarray
    engine: str
    stats: dict[str, Any] = field(default_factory=dict)
