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

from gqsim.physics.environment.parameters import environment_from_table, schema_fragment, sphere_from_body_table
from gqsim.physics.environment.sources import environment_sources, validity_notes
from gqsim.errors import ProtocolError
from gqsim.protocol.reader import Protocol, parse_protocol

__all__ = [
    "KNOBS",
    "Certificate",
    "BudgetLine",
    "Limit",
    "NoiseBudget",
    "split_environment",
    "simulate_with_environment",
    "noise_budget",
    "superposition_noise_budget",
    "oscillator_noise_budget",
    "oscillator_channel_table",
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
class BudgetLine:
    """One channel of one body at the separation that matters (the body's largest branch separation)."""

    body: str
    source: str
    rate_per_s: float
    share: float
    separation_m: float
    localisation_per_m2_s: float | None
    saturation_per_s: float | None
    driver: str | None
    reference: str


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


@dataclass(frozen=True, kw_only=True)
class NoiseBudget:
    """All channels of a protocol, their shares, and any root-found limits."""

    lines: tuple[BudgetLine, ...]
    limits: tuple[Limit, ...] = ()
    notes: tuple[str, ...] = ()
    title: str = ""
    quantity: str = "coherence decay rate F(Delta) [1/s]"

    def total_per_s(self, body: str) -> float:
        return sum(line.rate_per_s for line in self.lines if line.body == body)

    def dominant(self, body: str) -> BudgetLine:
        return max((line for line in self.lines if line.body == body), key=lambda line: line.rate_per_s)

    def as_text(self) -> str:
        """Plain-text table: per body, each channel's F(Delta) [1/s] and share."""
        out = [f"noise budget{': ' + self.title if self.title else ''}"]
        bodies = list(dict.fromkeys(line.body for line in self.lines))
        if not bodies:
            out.append("no decoherence channels: every coherence is kept (closed system)")
        for body in bodies:
            lines = sorted((ln for ln in self.lines if ln.body == body), key=lambda ln: -ln.rate_per_s)
            sep = lines[0].separation_m if lines else float("nan")
            where = f"branch separation {sep:.4g} m" if math.isfinite(sep) else "trapped mode"
            out.append(f"{body} ({where}): total {self.total_per_s(body):.4g} ({self.quantity})")
            out.append(f"  {'channel':<28}{'rate':>12}{'share':>9}  driver")
            for ln in lines:
                out.append(f"  {ln.source:<28}{ln.rate_per_s:>12.4g}{100 * ln.share:>8.1f}%  {ln.driver or '-'}")
        for lim in self.limits:
            out.append(f"largest tolerable {lim.knob}: {lim.value:.4g} {lim.unit} (now {lim.current:.4g} {lim.unit}; "
                       f"{lim.status}; certificate {lim.certificate}; {lim.evaluations} simulations)")
        out.extend(f"note: {n}" for n in self.notes)
        return "\n".join(out)

    def to_json_dict(self) -> dict:
        return {
            "title": self.title,
            "quantity": self.quantity,
            "channels": [{"body": ln.body, "channel": ln.source, "rate_per_s": ln.rate_per_s, "share": ln.share,
                          "separation_m": ln.separation_m, "localisation_per_m2_s": ln.localisation_per_m2_s,
                          "saturation_per_s": ln.saturation_per_s, "driver": ln.driver, "reference": ln.reference}
                         for ln in self.lines],
            "limits": [lim.to_json_dict() for lim in self.limits],
            "notes": list(self.notes),
        }


# ----------------------------------------------------------------------------- protocol handling

def split_environment(data: Mapping[str, Any], *, source: str = "<memory>") -> tuple[Protocol, dict | None]:
    """Validate a protocol mapping that may carry an ``[environment]`` table.

    The environment table is validated against ``environment-v1.fragment.json``; the rest
    by the family schema. Works whether or not the family schema already includes the
    fragment. Returns the validated Protocol (without the table) and the table (or None).
    """
    plain = copy.deepcopy(dict(data))
    table = plain.pop("environment", None)
    if table is not None:
        validator = jsonschema.Draft202012Validator(schema_fragment())
        errors = sorted(validator.iter_errors(table), key=lambda e: -len(e.absolute_path))
        if errors:
            from gqsim.protocol.reader import _to_protocol_error  # same wording as every other protocol error

            err = _to_protocol_error(errors[0])
            key = "environment" if err.key == "protocol" else f"environment.{err.key}"
            raise ProtocolError(key, err.value, err.allowed)
    return parse_protocol(plain, source=source), table


def _bodies_and_spheres(protocol: Protocol, env_table: Mapping[str, Any] | None):
    from gqsim.superposition.setup import build_superposition_setup

    setup = build_superposition_setup(protocol)
    env = environment_from_table(env_table) if env_table is not None else None
    spheres = []
    for index, body in enumerate(setup.bodies):
        entry = protocol.data["bodies"][index]
        spheres.append(None if env is None else sphere_from_body_table(
            {**entry, "label": body.label}, mass_kg=body.mass_kg, radius_m=body.radius_m, key=body.key))
    return setup, env, spheres


def simulate_with_environment(protocol: Protocol, env_table: Mapping[str, Any] | None):
    """Run ``protocol`` with ``env_table`` as its ``[environment]`` through the standard
    :func:`gqsim.families.simulate` (both family schemas carry the table; superposition runs
    add the environment F(Delta) to each body, oscillator runs fold it into each body's
    channels). Returns a :class:`gqsim.record.Result`."""
    from gqsim.families import simulate

    data = protocol.to_dict()
    if env_table is not None:
        data["environment"] = copy.deepcopy(dict(env_table))
    return simulate(parse_protocol(data, source=protocol.source))


def noise_budget(data: Mapping[str, Any], *, source: str = "<memory>") -> NoiseBudget:
    """The noise budget of a protocol of either family (see :func:`superposition_noise_budget`,
    :func:`oscillator_noise_budget`)."""
    if data.get("family") == "oscillators":
        return oscillator_noise_budget(data, source=source)
    return superposition_noise_budget(data, source=source)


def superposition_noise_budget(data: Mapping[str, Any], *, source: str = "<memory>") -> NoiseBudget:
    """Every branch-decoherence channel of a superposition protocol at its largest branch separation."""
    from gqsim.superposition.channels import channel_from_spec

    protocol, table = split_environment(data, source=source)
    setup, env, spheres = _bodies_and_spheres(protocol, table)
    lines: list[BudgetLine] = []
    notes: list[str] = []
    for body, sphere in zip(setup.bodies, spheres):
        sep = float(np.max(body.branch_separations_m))
        rows = []
        if env is not None:
            for src in environment_sources(env, sphere, body.split_axis):
                rows.append((src.label, float(src.channel.rate_per_s(np.array(sep))), src.localisation_per_m2_s,
                             src.saturation_per_s, src.driver, src.reference))
            notes.extend(validity_notes(env, sphere))
        if body.dephasing.model != "none":
            spec = body.dephasing
            rows.append(("protocol dephasing table", float(channel_from_spec(spec).rate_per_s(np.array(sep))),
                         spec.localisation_per_m2_s if spec.model == "separation_squared" else None,
                         spec.saturation_per_s if spec.model == "separation_squared" else spec.rate_per_s,
                         None, "protocol"))
        if body.spin.t1_s is not None:
            rows.append(("spin relaxation (T1)", 0.5 / body.spin.t1_s, None, None, None,
                         "coherence decay 1/(2 T1) of amplitude damping, [NielsenChuang2010]"))
        if body.spin.pure_dephasing_per_s > 0:
            rows.append(("spin pure dephasing (T2)", body.spin.pure_dephasing_per_s, None, None, "spin_dephasing",
                         "1/T2 - 1/(2 T1), [NielsenChuang2010]"))
        total = sum(r[1] for r in rows)
        for label, rate, lam, sat, driver, ref in rows:
            lines.append(BudgetLine(body=body.label, source=label, rate_per_s=rate,
                                    share=rate / total if total > 0 else 0.0, separation_m=sep,
                                    localisation_per_m2_s=lam, saturation_per_s=sat, driver=driver, reference=ref))
    if env is None:
        notes.append("the protocol has no [environment] table: only its own dephasing and spin channels are listed")
    return NoiseBudget(lines=tuple(lines), notes=tuple(dict.fromkeys(notes)), title=setup.title)


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
    from gqsim.superposition.setup import build_superposition_setup
    from gqsim.physics.witnesses import SEPARABLE_BOUND

    setup = build_superposition_setup(protocol)
    if setup.dims == (2, 2):
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
    from gqsim.superposition.setup import build_superposition_setup

    return build_superposition_setup(protocol).measures


def rule_of_thumb_limit(data: Mapping[str, Any], knob: str, *, source: str = "<memory>") -> float:
    """Quick estimate without simulation: the knob value at which some body's total coherence
    decay rate at its largest branch separation reaches half the entangling rate, |omega_ent|/2
    (the dephasing threshold quoted in the superposition run summary; a rule of thumb, not a
    certificate - compare :func:`tolerable_limit`). Superposition protocols only; the body's
    own dephasing table and spin decay count against the target.
    """
    from gqsim.superposition.channels import body_channel
    from gqsim.physics.environment.thresholds import RATE_KNOBS, rate_limit
    from gqsim.superposition.run import build

    if knob not in RATE_KNOBS:
        raise ProtocolError("knob", knob, f"the rule-of-thumb estimate takes one of {list(RATE_KNOBS)}")
    protocol, table = split_environment(data, source=source)
    if protocol.family != "superposition" or table is None:
        raise ProtocolError("family", protocol.family, "the estimate needs a superposition protocol with [environment]")
    model = build(protocol)
    target = abs(model.analytic_entangling_rate_rad_s()) / 2.0
    setup, env, spheres = _bodies_and_spheres(protocol, table)
    best = math.inf
    for body, sphere in zip(setup.bodies, spheres):
        sep = float(np.max(body.branch_separations_m))
        own = float(body_channel(body).rate_per_s(np.array(sep)))
        if own >= target:
            return 0.0
        best = min(best, rate_limit(env, sphere, sep, knob, target - own, axis=body.split_axis))
    return best


# ----------------------------------------------------------------------------- oscillators

_AXIS_VECTORS = {"x": np.array([1.0, 0.0, 0.0]), "y": np.array([0.0, 1.0, 0.0]), "z": np.array([0.0, 0.0, 1.0])}


def _oscillator_bodies(data: Mapping[str, Any], env_table):
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
        oscillator_terms(environment, sphere, _AXIS_VECTORS[a], body.omega_rad_s(a)) for a in body.modes]
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


def oscillator_noise_budget(data: Mapping[str, Any], *, source: str = "<memory>") -> NoiseBudget:
    """Heating rate [phonons/s] of every source on every active mode of an oscillators protocol.

    Gas appears once, as damping at the gas temperature (heating gamma k_B T / (hbar omega));
    the protocol's own channels table is listed as one line per mode.
    """
    protocol, table = split_environment(data, source=source)
    setup, env, spheres = _oscillator_bodies(protocol.data, table)
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
    return NoiseBudget(lines=tuple(lines), notes=tuple(dict.fromkeys(notes)),
                       title=protocol.data.get("about", {}).get("title", ""), quantity="heating [phonons/s]")


def dominant_source(pairs) -> str:
    """The source of the largest rate among (source, rate) pairs, in budget order (the first wins
    a tie); ``"none"`` when no rate is positive. The sweeps' ``dominant_noise`` figure."""
    best, best_rate = "none", 0.0
    for source, rate in pairs:
        if rate > best_rate:
            best, best_rate = source, rate
    return best


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
            terms = oscillator_terms(env, sphere, _AXIS_VECTORS[axis], omega)
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
