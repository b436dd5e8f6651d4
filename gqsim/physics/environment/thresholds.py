"""Rate targets: the apparatus setting at which the decoherence rate reaches a given value.

A quick design estimate that needs no simulation: the largest pressure, temperature,
internal temperature or laser power at which the total branch-decoherence rate F(Delta) of
one body (all sources of :mod:`gqsim.physics.environment.sources` summed) stays at or below a target
rate, e.g. half the entangling rate omega_ent / 2. Solved with :func:`scipy.optimize.brentq`
on log10 of the knob. The certified answer - from full simulations - is
:func:`gqsim.studies.decoherence.tolerable_limit`.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
from scipy.optimize import brentq

from gqsim.physics.environment.parameters import Environment, Sphere
from gqsim.physics.environment.sources import branch_decoherence
from gqsim.errors import ProtocolError

__all__ = ["RATE_KNOBS", "with_knob", "total_rate_per_s", "rate_limit"]

RATE_KNOBS = ("pressure", "temperature", "internal_temperature", "laser_power")


def with_knob(environment: Environment, knob: str, value: float) -> Environment:
    """A copy of ``environment`` with one knob set to ``value`` (the ``temperature`` knob moves
    the radiation only: a gas without its own temperature is pinned at the old one)."""
    env = environment
    if knob == "pressure":
        if env.gas is None:
            raise ProtocolError("environment.gas", None, "the knob 'pressure' needs a gas")
        return dataclasses.replace(env, gas=dataclasses.replace(env.gas, pressure_pa=value))
    if knob == "temperature":
        gas = env.gas
        if gas is not None and gas.temperature_k is None:
            gas = dataclasses.replace(gas, temperature_k=env.temperature_k)
        internal = env.internal_k  # keep the body's temperature where it was
        return dataclasses.replace(env, temperature_k=value, gas=gas, internal_temperature_k=internal)
    if knob == "internal_temperature":
        return dataclasses.replace(env, internal_temperature_k=value)
    if knob == "laser_power":
        if env.laser is None:
            raise ProtocolError("environment.laser", None, "the knob 'laser_power' needs a laser")
        return dataclasses.replace(env, laser=dataclasses.replace(env.laser, power_w=value))
    raise ProtocolError("knob", knob, f"must be one of {list(RATE_KNOBS)}")


def total_rate_per_s(environment: Environment, sphere: Sphere, separation_m: float,
                     axis: np.ndarray | None = None) -> float:
    """F(Delta) [1/s] of all environment sources at one separation [m]."""
    return float(branch_decoherence(environment, sphere, axis).rate_per_s(np.array(separation_m)))


def rate_limit(environment: Environment, sphere: Sphere, separation_m: float, knob: str, target_per_s: float,
               *, axis: np.ndarray | None = None, decades: int = 40, xtol_decades: float = 1e-6) -> float:
    """Largest value of ``knob`` with total F(``separation_m``) <= ``target_per_s`` [1/s].

    The other sources stay as they are; if they alone exceed the target the answer is 0.0,
    if the rate never reaches the target within ``decades`` factors of 10 it is ``inf``.
    Assumes F grows with the knob (true for all four; see :func:`with_knob`).
    """
    if not (math.isfinite(target_per_s) and target_per_s > 0):
        raise ProtocolError("target_per_s", target_per_s, "must be a finite rate > 0 1/s")
    if knob not in RATE_KNOBS:
        raise ProtocolError("knob", knob, f"must be one of {list(RATE_KNOBS)}")

    def excess(log_value: float) -> float:
        env = with_knob(environment, knob, 10.0**log_value)
        return math.log(total_rate_per_s(env, sphere, separation_m, axis) / target_per_s)

    floor = with_knob(environment, knob, 0.0 if knob in ("pressure", "laser_power") else 1e-300)
    if total_rate_per_s(floor, sphere, separation_m, axis) >= target_per_s:
        return 0.0
    current = {"pressure": environment.gas.pressure_pa if environment.gas else 0.0,
               "temperature": environment.temperature_k,
               "internal_temperature": environment.internal_k,
               "laser_power": environment.laser.power_w if environment.laser else 0.0}[knob]
    x = math.log10(current) if current > 0 else -15.0
    lo = hi = x
    if excess(x) < 0:
        for _ in range(decades):
            hi += 1.0
            if excess(hi) >= 0:
                break
            lo = hi
        else:
            return math.inf
    else:
        for _ in range(decades):
            lo -= 1.0
            if excess(lo) < 0:
                break
            hi = lo
        else:
            return 0.0
    return 10.0 ** brentq(excess, lo, hi, xtol=xtol_decades)
