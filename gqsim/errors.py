"""Typed exception hierarchy of gqsim.

Every user-facing error names the offending field, the value it got and what is
allowed, so that the command line can print it as one line without a traceback.
"""

from __future__ import annotations

__all__ = [
    "GqsimError",
    "ProtocolError",
    "PhysicsError",
    "EngineError",
    "ConvergenceError",
]


class GqsimError(Exception):
    """Base class of every error gqsim raises on purpose."""


class ProtocolError(GqsimError, ValueError):
    """A protocol file or parameter object holds a value that is not allowed.

    Parameters
    ----------
    key : dotted path of the offending field, e.g. ``bodies[0].mass_kg``
    value : the value found
    allowed : what would be accepted, in words
    """

    def __init__(self, key: str, value: object, allowed: str):
        self.key = key
        self.value = value
        self.allowed = allowed
        super().__init__(f"{key} = {_short(value)}: {allowed}")


class PhysicsError(GqsimError, ValueError):
    """The inputs are well-formed but describe an impossible or unsupported setup
    (overlapping bodies, a channel the chosen engine cannot represent, ...)."""

    def __init__(self, key: str, value: object, allowed: str):
        self.key = key
        self.value = value
        self.allowed = allowed
        super().__init__(f"{key} = {_short(value)}: {allowed}")


class EngineError(GqsimError, RuntimeError):
    """A time-evolution engine failed or produced non-finite numbers."""


class ConvergenceError(EngineError):
    """A truncated-basis computation did not converge within the allowed cutoff."""


def _short(value: object, limit: int = 60) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."
