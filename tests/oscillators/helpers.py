"""Protocol builders shared by the oscillator tests (plain dicts, validated by parse_protocol)."""

from __future__ import annotations

import copy
import math

from scipy.constants import G

from gqsim.protocol.reader import parse_protocol


def pair(*, mass_kg=1.0, distance_m=0.05, trap_hz=None, lam=None, duration_s=None, periods=3.0,
         points=61, axis="x", mode="x", initial=None, channels=None, stages=None, solver=None):
    """Two identical bodies at distance d along ``axis``, active mode ``mode``.

    Give ``lam`` (lambda = G m / (omega^2 d^3)) instead of ``trap_hz`` to set the coupling.
    """
    if trap_hz is None:
        omega = math.sqrt(G * mass_kg / (lam * distance_m**3))
        trap_hz = omega / (2 * math.pi)
    if duration_s is None:
        duration_s = periods / trap_hz
    pos_b = [0.0, 0.0, 0.0]
    pos_b["xyz".index(axis)] = distance_m
    bodies = []
    for label, pos in (("A", [0.0, 0.0, 0.0]), ("B", pos_b)):
        body = {"label": label, "mass_kg": mass_kg, "position_m": pos, "trap_hz": trap_hz, "modes": [mode]}
        if initial:
            body["initial"] = copy.deepcopy(initial)
        if channels:
            body["channels"] = copy.deepcopy(channels)
        bodies.append(body)
    data = {"schema_version": 1, "family": "oscillators", "bodies": bodies,
            "stages": stages or [{"label": "hold", "duration_s": duration_s}],
            "time_grid": {"points": points}}
    if solver:
        data["solver"] = solver
    return data


def protocol(data):
    return parse_protocol(data)
