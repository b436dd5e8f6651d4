"""Noise budget: which channel dominates, and how good the apparatus must be.

For a superposition protocol with an ``[environment]`` table this module

1. lists every decoherence channel of each body - the environment sources of
   :mod:`gqsim.physics.environment.sources`, the protocol's own dephasing table and the spin's
   T1/T2 - with its rate F(Delta) at the body's largest branch separation and its share;
2. finds, for one driving parameter ("knob": pressure, temperature, internal
   temperature, laser power, spin dephasing 1/T2), the largest value at which the
   protocol still certifies entanglement at its best measurement time. The search runs
   the full simulation (closed-form or Lindblad engine with all channels) at every trial
   value and solves margin(value) = 0 with :func:`scipy.optimize.brentq` on log10(value),
   where margin = max over the time grid of a certifying series minus its threshold
   (default: optimised spin witness > 1 for qubits, log-negativity > 0 for qudits and
   oscillators; every margin must also beat the round-off floor SIGNAL_FLOOR).

The search assumes the margin falls as the knob grows (true for every knob: the
temperature knob moves only the radiation temperature and holds the gas at its own
temperature, because at fixed pressure the saturated gas rate *falls* as T^-1/2) and
returns the first crossing from the current value.
"""

from __future__ import annotations

import copy
import math
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping

import jsonschema
import numpy as np
from scipy.optimize import brentq

from gqsim import families
from gqsim.errors import ProtocolError
from gqsim.physics.environment.tally import BudgetLine, NoiseBudget
from gqsim.physics.witnesses import SEPARABLE_BOUND
from gqsim.protocol.reader import Protocol, parse_protocol, split_environment
from gqsim.superposition import rule_of_thumb_limit

__all__ = [
    "KNOBS",
    "Certificate",
    "BudgetLine",
    "Limit",
    "NoiseBudget",
    "split_environment",
    "simulate_with_environment",
    "noise_budget",
    "tolerable_limit",
    "rule_of_thumb_limit",
    "plot_budget",
]


#: A margin must exceed this to count: measures carry round-off of ~1e-15 (eigen-solvers) and the
#: superposition run uses the same floor to call a window entangled.
SIGNAL_FLOOR = 1e-9


@dataclass(frozen=True)
class _Knob:
    description: str
    unit: str
    start: float  # first trial value when the protocol's value is 0 or absent


KNOBS: dict[str, _Knob] = {
    "pressure": _Knob("gas pressure (environment.gas.pressure_pa)", "Pa", 1e-18),
    "temperature": _Knob("radiation temperature of the surroundings (environment.temperature_k; the gas "
                         "temperature is held at its protocol value)", "K", 0.1),
    "internal_temperature": _Knob("internal temperature (environment.internal_temperature_k)", "K", 0.1),
    "laser_power": _Knob("laser power (environment.laser.power_w)", "W", 1e-9),
    "spin_dephasing": _Knob("spin coherence decay 1/T2 of both bodies (bodies[*].spin.t2_s)", "1/s", 1e-4),
}


@dataclass(frozen=True, kw_only=True)
class Certificate:
    """Entanglement counts as certified at time t when ``series(t) > threshold``."""

    series: str
    threshold: float

    @classmethod
    def parse(cls, text: str) -> "Certificate":
        """Read ``"name>value"`` (e.g. ``"witness_optimised>1"``)."""
        name, sep, value = text.partition(">")
        try:
            threshold = float(value)
        except ValueError:
            threshold = math.nan
        if not sep or not name.strip() or not math.isfinite(threshold):
            raise ProtocolError("certificate", text, "must look like 'series>threshold', e.g. 'witness_optimised>1'")
        return cls(series=name.strip(), threshold=threshold)

    def __str__(self) -> str:
        return f"{self.series} > {self.threshold:g}"




@dataclass(frozen=True, kw_only=True)
class Limit:
    """The largest tolerable value of one knob, backed by the simulation run at that value."""

    knob: str
    unit: str
    value: float
    current: float
    margin_at_current: float
    margin_at_value: float
    certificate: str
    bracket: tuple[float, float]
    evaluations: int
    status: str  # "found", "no limit up to <v>", "not certified even at <v>"
    result: Any = field(default=None, repr=False, compare=False)

    @property
    def headroom(self) -> float:
        """value / current (how far the knob can be turned up); inf when current is 0."""
        return math.inf if self.current == 0 else self.value / self.current

    def to_json_dict(self) -> dict:
        """JSON-ready; non-finite numbers (no limit found, no current value) become null."""
        def finite(x):
            return x if math.isfinite(x) else None

        return {"knob": self.knob, "unit": self.unit, "tolerable_value": finite(self.value),
                "current_value": self.current, "headroom": finite(self.headroom),
                "margin_at_current": finite(self.margin_at_current),
                "margin_at_tolerable_value": self.margin_at_value, "certificate": self.certificate,
                "bracket": list(self.bracket), "simulations": self.evaluations, "status": self.status}




# ----------------------------------------------------------------------------- protocol handling





def simulate_with_environment(protocol: Protocol, env_table: Mapping[str, Any] | None):
    """Run ``protocol`` with ``env_table`` as its ``[environment]`` through the standard
    :func:`gqsim.families.simulate` (both family schemas carry the table; superposition runs
    add the environment F(Delta) to each body, oscillator runs fold it into each body's
    channels). Returns a :class:`gqsim.record.Result`."""
    simulate = families.simulate

    data = protocol.to_dict()
    if env_table is not None:
        data["environment"] = copy.deepcopy(dict(env_table))
    return simulate(parse_protocol(data, source=protocol.source))


def noise_budget(data: Mapping[str, Any], *, source: str = "<memory>") -> NoiseBudget:
    """The noise budget of a protocol of either family: each family's own ``decoherence_tally``
    (the same table its run record carries)."""
    protocol, table = split_environment(data, source=source)
    if table is not None:
        protocol = parse_protocol({**protocol.to_dict(), "environment": table}, source=source)
    return families.decoherence_tally(protocol)




# ----------------------------------------------------------------------------- tolerable limits

def _knob_value(data: dict, table: dict | None, knob: str) -> float:
    if knob == "spin_dephasing":
        if data.get("family") == "oscillators":
            raise ProtocolError("knob", knob, "oscillator protocols have no embedded spins")
        rates = []
        for body in data["bodies"]:
            spin = body.get("spin", {})
            if "t2_s" in spin:
                rates.append(1.0 / spin["t2_s"])
            elif "t1_s" in spin:
                rates.append(0.5 / spin["t1_s"])
        return max(rates, default=0.0)
    if table is None:
        raise ProtocolError("environment", None, f"the knob {knob!r} needs an [environment] table in the protocol")
    if knob == "pressure":
        if "gas" not in table:
            raise ProtocolError("environment.gas", None, "the knob 'pressure' needs an [environment.gas] table")
        return float(table["gas"]["pressure_pa"])
    if knob == "temperature":
        return float(table["temperature_k"])
    if knob == "internal_temperature":
        return float(table.get("internal_temperature_k", table["temperature_k"]))
    if knob == "laser_power":
        if "laser" not in table:
            raise ProtocolError("environment.laser", None, "the knob 'laser_power' needs an [environment.laser] table")
        return float(table["laser"]["power_w"])
    raise ProtocolError("knob", knob, f"must be one of {sorted(KNOBS)}")


def _with_knob(data: dict, table: dict | None, knob: str, value: float) -> tuple[dict, dict | None]:
    data = copy.deepcopy(data)
    table = copy.deepcopy(table)
    if knob == "spin_dephasing":
        for body in data["bodies"]:
            spin = body.setdefault("spin", {})
            t2 = 1.0 / value
            if "t1_s" in spin and t2 > 2 * spin["t1_s"]:
                t2 = 2 * spin["t1_s"]  # T2 cannot exceed 2 T1: the rate floor is 1/(2 T1)
            spin["t2_s"] = t2
    elif knob == "pressure":
        table["gas"]["pressure_pa"] = value
    elif knob == "temperature":
        if "gas" in table and "temperature_k" not in table["gas"]:
            table["gas"]["temperature_k"] = table["temperature_k"]  # the knob moves the radiation only
        table["temperature_k"] = value
    elif knob == "internal_temperature":
        table["internal_temperature_k"] = value
    elif knob == "laser_power":
        table["laser"]["power_w"] = value
    return data, table


def _default_certificate(protocol: Protocol) -> Certificate:
    if protocol.family == "oscillators":
        # E_N >= 0 by construction; the margin subtracts SIGNAL_FLOOR, so "> 0" means "> round-off"
        return Certificate(series="log_negativity", threshold=0.0)
    if families.build(protocol).dims == (2, 2):
        return Certificate(series="witness_optimised", threshold=SEPARABLE_BOUND)
    # qudits: no two-setting witness; any log-negativity above round-off (see SIGNAL_FLOOR)
    return Certificate(series="log_negativity", threshold=0.0)


def tolerable_limit(data: Mapping[str, Any], knob: str, *, certificate: Certificate | None = None,
                    simulate: Callable[[Protocol, dict | None], Any] | None = None, source: str = "<memory>",
                    decades: int = 30, xtol_decades: float = 1e-4) -> Limit:
    """Largest value of ``knob`` at which the protocol still certifies entanglement.

    Parameters
    ----------
    data : protocol mapping (as read from TOML), possibly with an ``[environment]`` table
    knob : one of :data:`KNOBS`
    certificate : what counts as certified (default: see module docstring)
    simulate : (protocol, environment table) -> result with ``series``; default
        :func:`simulate_with_environment`
    decades : how many factors of 10 to search from the current value for a bracket
    xtol_decades : root tolerance in log10(value) (1e-4 = 0.023 % in value)

    Returns
    -------
    :class:`Limit` whose ``result`` is the simulation at the tolerable value.
    """
    if knob not in KNOBS:
        raise ProtocolError("knob", knob, f"must be one of {sorted(KNOBS)}")
    simulate = simulate or simulate_with_environment
    base_protocol, base_table = split_environment(data, source=source)
    base = base_protocol.to_dict()
    cert = certificate or _default_certificate(base_protocol)
    if cert.series not in _series_names(base_protocol):
        base.setdefault("output", {})["measures"] = list(dict.fromkeys(
            list(base.get("output", {}).get("measures", [])) + [cert.series]))
    current = _knob_value(base, base_table, knob)
    evaluations = 0
    results: dict[float, Any] = {}

    def margin(log_value: float) -> float:
        nonlocal evaluations
        value = 10.0**log_value
        d, t = _with_knob(base, base_table, knob, value)
        proto, _ = split_environment(d, source=source)
        result = simulate(proto, t)
        evaluations += 1
        if cert.series not in result.series:
            raise ProtocolError("certificate", cert.series, f"is not a series of this run ({sorted(result.series)})")
        results[log_value] = result
        return _margin(result, cert)

    start = current if current > 0 else KNOBS[knob].start
    x0 = math.log10(start)
    m0 = margin(x0)
    m_current = m0 if current > 0 else math.nan
    lo = hi = x0
    m_lo = m_hi = m0
    status = "found"
    if m0 > 0:
        for _ in range(decades):
            hi = lo + 1.0
            m_hi = margin(hi)
            if m_hi <= 0:
                break
            lo, m_lo = hi, m_hi
        else:
            status = f"no limit up to {10**lo:.3g} {KNOBS[knob].unit}"
    else:
        for _ in range(decades):
            lo = hi - 1.0
            m_lo = margin(lo)
            if m_lo > 0:
                break
            hi, m_hi = lo, m_lo
        else:
            status = f"not certified even at {10**hi:.3g} {KNOBS[knob].unit}"
    if status == "found":
        root = brentq(margin, lo, hi, xtol=xtol_decades, rtol=4 * np.finfo(float).eps)
        # report the tolerable side of the final bracket: the margin there is >= 0
        x_best = root if margin(root) > 0 else max(x for x, r in results.items() if _margin(r, cert) > 0)
        value = 10.0**x_best
        m_value = _margin(results[x_best], cert)
        result = results[x_best]
    elif status.startswith("no limit"):
        value, m_value, result = math.inf, m_lo, results[lo]
    else:
        value, m_value, result = 0.0, m_hi, results[hi]
    return Limit(knob=knob, unit=KNOBS[knob].unit, value=value, current=current, margin_at_current=m_current,
                 margin_at_value=m_value, certificate=str(cert), bracket=(10.0**lo, 10.0**hi),
                 evaluations=evaluations, status=status, result=result)


def _margin(result, cert: Certificate) -> float:
    """max_t series(t) - threshold - floor; > 0 means certified at the best time of the grid."""
    return float(np.max(result.series[cert.series]) - cert.threshold - SIGNAL_FLOOR)


def _series_names(protocol: Protocol) -> tuple[str, ...]:
    if protocol.family == "oscillators":
        return ("log_negativity",)  # always reported by the oscillator run
    return families.build(protocol).setup.measures




# ----------------------------------------------------------------------------- oscillators















# ----------------------------------------------------------------------------- figure

def plot_budget(budget: NoiseBudget, ax=None):
    """Horizontal bar chart of every channel's rate [1/s] (log scale), one group per body; returns ``ax``."""
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(figsize=(7, 0.45 * max(len(budget.lines), 2) + 1.2))
    labels = [f"{ln.body}: {ln.source}" for ln in budget.lines]
    values = [max(ln.rate_per_s, 1e-300) for ln in budget.lines]
    y = np.arange(len(labels))
    palette = {name: f"C{i % 10}" for i, name in enumerate(dict.fromkeys(ln.source for ln in budget.lines))}
    ax.barh(y, values, color=[palette[ln.source] for ln in budget.lines])
    ax.set_yticks(y, labels)
    ax.set_xscale("log")
    ax.set_xlabel(budget.quantity)
    for yi, ln in zip(y, budget.lines):
        ax.annotate(f"{100 * ln.share:.3g}%", (values[yi], yi), xytext=(3, 0), textcoords="offset points",
                    va="center", fontsize=8)
    ax.invert_yaxis()
    ax.set_title(budget.title or "noise budget")
    return ax
