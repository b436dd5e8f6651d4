"""Certification planning for a simulated run: which witness, when, how many repetitions.

Stage: result -> witness design / statistics -> **this module (report side)** -> cli.

Notebook use::

    from gqsim.families import simulate
    from gqsim.studies.certification.plan import CertifyOptions, certify_result
    report = certify_result(simulate("protocols/side-by-side-qubits.toml"), CertifyOptions(overhead_s=20.0))
    print(report.as_text()); report.plot()

A *certification file* (TOML, gqsim's own keys, all optional) tunes the plan::

    [target]
    confidence = 0.999        # one-sided; or  sigmas = 3
    power = 0.5               # optional: probability that the planned run clears the bar
    split = "optimal"         # or "equal" (same repetitions on every setting)
    overhead_s = 20.0         # time per repetition besides the hold time [s]

    [readout]
    assignment_fidelity_a = [0.99, 0.97]   # per outcome, or one number
    assignment_fidelity_b = 0.98
    detection_efficiency_a = 0.9
    detection_efficiency_b = 0.9
    correct_assignment = true
    position_imprecision_m = 1e-12          # oscillators: added position noise (sd) [m]
    momentum_imprecision_kg_m_s = 0.0       # oscillators: added momentum noise (sd) [kg m/s]

    [witnesses]
    builtin = ["optimal_ppt", "spin_correlation", "spin_correlation_optimised"]   # see BUILTIN_WITNESSES
    [[witnesses.custom]]
    label = "three_term"
    expression = "1 - X@Z - Y@Y - Z@X"
    separable_bound = 0.0
    entangled_if = "below"

    [check]
    trials = 2000             # seeded Monte-Carlo of the records at the best time (0 = off)
    seed = 1
"""

from __future__ import annotations

import csv
import json
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import numpy as np
from scipy.constants import hbar

from gqsim.errors import PhysicsError, ProtocolError
from gqsim.record import Result
from gqsim.studies.certification.statistics import (
    CovariancePlan,
    DuanPlan,
    MonteCarloCheck,
    RepetitionPlan,
    best_measurement_time,
    covariance_monte_carlo_check,
    covariance_witness_plan,
    duan_monte_carlo_check,
    duan_plan,
    log_negativity_plan,
    monte_carlo_check,
    plan_ppt_scan,
    plan_repetitions,
)
from gqsim.studies.certification.witness_design import (
    ReadoutModel,
    Witness,
    check_separable_bound,
    optimal_ppt_witness,
    optimised_spin_witness,
    parse_witness,
    setting_table,
    spin_correlation_witness,
)

__all__ = ["CustomWitness", "CertifyOptions", "CertificationReport", "read_certify_file", "options_from_mapping",
           "certify_result", "oscillator_covariances", "write_certification", "plot_repetitions", "BUILTIN_WITNESSES"]

#: Witnesses gqsim can design on its own: name -> one-line description.
BUILTIN_WITNESSES = {
    "optimal_ppt": "re-designed at each time from the partial transpose (any branch counts)",
    "spin_correlation": "fixed |<X@Z> + <Y@Y>| > 1 in the branch frame (two qubits only)",
    "spin_correlation_optimised": "the same two-term witness in its best local frames, re-designed at each "
                                  "time (two qubits only)",
    "duan": "EPR-variance sum from position/momentum readout (oscillators only)",
    "estimated_log_negativity": "log-negativity of a covariance matrix fitted to 9 quadrature settings "
                                "(oscillators only)",
    "covariance_witness": "linear PPT witness on the fitted covariance, same 9 settings, unbiased "
                          "(oscillators only)",
}

_ALLOWED = {
    "target": {"confidence", "sigmas", "power", "split", "overhead_s"},
    "readout": {"assignment_fidelity_a", "assignment_fidelity_b", "detection_efficiency_a", "detection_efficiency_b",
                "correct_assignment", "position_imprecision_m", "momentum_imprecision_kg_m_s"},
    "witnesses": {"builtin", "custom"},
    "check": {"trials", "seed"},
}


@dataclass(frozen=True, kw_only=True)
class CustomWitness:
    """A user witness written in the expression syntax of :mod:`gqsim.studies.certification.witness_design`."""

    label: str
    expression: str
    separable_bound: float
    entangled_if: str = "below"

    def __post_init__(self):
        if not isinstance(self.label, str) or not self.label.strip():
            raise ProtocolError("witnesses.custom.label", self.label, "must be a non-empty name")
        if isinstance(self.separable_bound, bool) or not isinstance(self.separable_bound, (int, float)) \
                or not math.isfinite(self.separable_bound):
            raise ProtocolError(f"witnesses.custom[{self.label}].separable_bound", self.separable_bound,
                                "must be a finite number")
        if self.entangled_if not in ("below", "above"):
            raise ProtocolError(f"witnesses.custom[{self.label}].entangled_if", self.entangled_if,
                                "must be 'below' or 'above'")

    def build(self, dims: tuple[int, int]) -> Witness:
        """Parse the expression and refuse a bound that some product state crosses."""
        w = parse_witness(self.expression, dims, bound=float(self.separable_bound),
                          entangled_if=self.entangled_if, name=self.label,
                          key=f"witnesses.custom[{self.label}].expression")
        check_separable_bound(w, key=f"witnesses.custom[{self.label}].separable_bound")
        return w


@dataclass(frozen=True, kw_only=True)
class CertifyOptions:
    """Everything that shapes a certification plan (see the module docstring for the file form)."""

    confidence: float | None = 0.999
    sigmas: float | None = None
    power: float | None = None
    split: str = "optimal"
    overhead_s: float = 0.0
    readout: ReadoutModel = field(default_factory=ReadoutModel)
    position_imprecision_m: float = 0.0
    momentum_imprecision_kg_m_s: float = 0.0
    builtin: tuple[str, ...] = ("optimal_ppt", "spin_correlation", "spin_correlation_optimised", "duan",
                                "estimated_log_negativity", "covariance_witness")
    custom: tuple[CustomWitness, ...] = ()
    trials: int = 0
    seed: int = 0

    def __post_init__(self):
        if self.sigmas is not None:
            object.__setattr__(self, "confidence", None)
        object.__setattr__(self, "builtin", tuple(self.builtin))
        object.__setattr__(self, "custom", tuple(self.custom))
        for name in self.builtin:
            if name not in BUILTIN_WITNESSES:
                raise ProtocolError("witnesses.builtin", name, f"must be among {sorted(BUILTIN_WITNESSES)}")
        for key in ("position_imprecision_m", "momentum_imprecision_kg_m_s", "overhead_s"):
            val = getattr(self, key)
            if isinstance(val, bool) or not isinstance(val, (int, float)) or not (math.isfinite(val) and val >= 0):
                raise ProtocolError(key, val, "must be a non-negative finite number")
        if isinstance(self.trials, bool) or not isinstance(self.trials, int) or self.trials < 0:
            raise ProtocolError("check.trials", self.trials, "must be a non-negative integer (0 switches the check off)")
        if isinstance(self.seed, bool) or not isinstance(self.seed, int) or self.seed < 0:
            raise ProtocolError("check.seed", self.seed, "must be a non-negative integer")
        if self.split not in ("optimal", "equal"):
            raise ProtocolError("target.split", self.split, "must be 'optimal' or 'equal'")
        labels = [c.label for c in self.custom]
        if len(set(labels)) != len(labels):
            raise ProtocolError("witnesses.custom.label", labels, "labels must be distinct")

    @property
    def plan_kwargs(self) -> dict:
        return {"confidence": self.confidence, "sigmas": self.sigmas, "power": self.power, "split": self.split,
                "overhead_s": self.overhead_s}


def options_from_mapping(data: Mapping[str, Any], *, source: str = "<memory>", **overrides) -> CertifyOptions:
    """Validate a parsed certification file; ``overrides`` (not None) replace file values."""
    if not isinstance(data, Mapping):
        raise ProtocolError("certification file", source, "must be a TOML table")
    for section, value in data.items():
        if section not in _ALLOWED:
            raise ProtocolError(section, value, f"unknown section; allowed: {', '.join(sorted(_ALLOWED))}")
        if not isinstance(value, Mapping):
            raise ProtocolError(section, value, "must be a table")
        for key in value:
            if key not in _ALLOWED[section]:
                raise ProtocolError(f"{section}.{key}", value[key],
                                    f"unknown key; allowed: {', '.join(sorted(_ALLOWED[section]))}")
    target, readout = dict(data.get("target", {})), dict(data.get("readout", {}))
    witnesses, check = dict(data.get("witnesses", {})), dict(data.get("check", {}))
    kwargs: dict[str, Any] = {}
    for key in ("confidence", "sigmas", "power", "split", "overhead_s"):
        if key in target:
            kwargs[key] = target[key]
    if "sigmas" in target and "confidence" in target:
        raise ProtocolError("target.sigmas", target["sigmas"], "give either confidence or sigmas, not both")
    for key in ("position_imprecision_m", "momentum_imprecision_kg_m_s"):
        if key in readout:
            kwargs[key] = readout.pop(key)
    kwargs["readout"] = ReadoutModel(**readout)
    if "builtin" in witnesses:
        builtin = witnesses["builtin"]
        if not isinstance(builtin, list) or not all(isinstance(b, str) for b in builtin):
            raise ProtocolError("witnesses.builtin", builtin, f"must be a list of names from {sorted(BUILTIN_WITNESSES)}")
        kwargs["builtin"] = tuple(builtin)
    custom = witnesses.get("custom", [])
    if not isinstance(custom, list):
        raise ProtocolError("witnesses.custom", custom, "must be an array of tables ([[witnesses.custom]])")
    items = []
    for i, entry in enumerate(custom):
        if not isinstance(entry, Mapping):
            raise ProtocolError(f"witnesses.custom[{i}]", entry, "must be a table")
        extra = set(entry) - {"label", "expression", "separable_bound", "entangled_if"}
        if extra:
            raise ProtocolError(f"witnesses.custom[{i}].{sorted(extra)[0]}", entry[sorted(extra)[0]],
                                "unknown key; allowed: entangled_if, expression, label, separable_bound")
        for req in ("label", "expression", "separable_bound"):
            if req not in entry:
                raise ProtocolError(f"witnesses.custom[{i}].{req}", None, "is required")
        items.append(CustomWitness(**entry))
    kwargs["custom"] = tuple(items)
    kwargs.update({k: check[k] for k in ("trials", "seed") if k in check})
    kwargs.update({k: v for k, v in overrides.items() if v is not None})
    if overrides.get("sigmas") is not None:
        kwargs["confidence"] = None
    elif overrides.get("confidence") is not None:
        kwargs["sigmas"] = None
    return CertifyOptions(**kwargs)


def read_certify_file(path: str | Path, **overrides) -> CertifyOptions:
    """Read and validate a certification file (TOML). One-line :class:`ProtocolError` on mistakes."""
    path = Path(path)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise ProtocolError("certification file", str(path), f"must be a readable file ({exc.strerror})") from None
    except (UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise ProtocolError("certification file", str(path), f"must be valid UTF-8 TOML ({exc})") from None
    return options_from_mapping(data, source=str(path), **overrides)


# --------------------------------------------------------------------------------------
# Building the report
# --------------------------------------------------------------------------------------

@dataclass(frozen=True, kw_only=True)
class CertificationReport:
    """Plans for every applicable witness over the time grid, with the best time of each."""

    times_s: np.ndarray
    plans: Mapping[str, RepetitionPlan | DuanPlan | CovariancePlan]
    peak_measure: str | None
    peak_time_s: float | None
    options: CertifyOptions
    checks: Mapping[str, MonteCarloCheck] = field(default_factory=dict)
    skipped: Mapping[str, str] = field(default_factory=dict)
    frames: Mapping[str, dict] = field(default_factory=dict)

    def rows(self) -> list[dict]:
        """One summary row per witness (at its best time, and at the time of maximum entanglement)."""
        out = []
        peak_i = None if self.peak_time_s is None else int(np.argmin(np.abs(self.times_s - self.peak_time_s)))
        for name, plan in self.plans.items():
            row: dict[str, Any] = {"witness": name, "bound": None if isinstance(plan, DuanPlan)
                                   else float(np.atleast_1d(plan.bound)[0])}
            if not np.any(np.isfinite(plan.lab_time_s)):
                row.update({"certifiable": False})
                out.append(row)
                continue
            i, t, lt = best_measurement_time(plan.times_s, plan.total, plan.overhead_s)
            if isinstance(plan, DuanPlan):
                row["bound"] = float(plan.bound[i])
                value = float(plan.value[i])
                settings = {"x1,x2'": plan.per_setting[i, 0], "p1,p2'": plan.per_setting[i, 1]}
            elif isinstance(plan, CovariancePlan):
                row["bound"] = 0.0
                value = float(plan.value[i])
                settings = dict(zip(plan.settings, plan.per_setting[i]))
            else:
                value = float(plan.values[i])
                settings = {lab: n for lab, n in zip(plan.settings, plan.per_setting[i]) if n > 0}
                row["single_shot_sd"] = {lab: float(sd) for lab, sd, n in
                                         zip(plan.settings, plan.standard_deviation_one_shot[i], plan.per_setting[i])
                                         if n > 0}
            row.update({"certifiable": True, "best_time_s": t, "value": value,
                        "settings": len(settings), "per_setting": {k: int(v) for k, v in settings.items()},
                        "total_repetitions": int(plan.total[i]), "lab_time_s": lt})
            if peak_i is not None:
                row["lab_time_at_peak_s"] = float(plan.lab_time_s[peak_i])
                row["total_at_peak"] = float(plan.total[peak_i])
            if name in self.frames:
                row["frames_at_best_time"] = self.frames[name]
            if name in self.checks:
                c = self.checks[name]
                row["monte_carlo"] = {"trials": c.trials, "seed": c.seed, "agrees": c.agrees,
                                      "certified_fraction": c.certified_fraction,
                                      "predicted_certified_fraction": c.predicted_certified_fraction,
                                      "coverage_plugin": c.coverage_plugin}
            out.append(row)
        return out

    def as_text(self) -> str:
        k = next(iter(self.plans.values())).sigmas if self.plans else float("nan")
        opts = self.options
        head = [f"certification plan: {k:.3f} standard deviations"
                + (f" (one-sided confidence {opts.confidence})" if opts.confidence is not None else "")
                + (f", power {opts.power}" if opts.power is not None else "")
                + f"; {opts.split} split; overhead {opts.overhead_s:g} s per repetition"]
        if self.peak_time_s is not None:
            head.append(f"maximum {self.peak_measure} at t = {self.peak_time_s:.4g} s")
        cols = ["witness", "best t [s]", "value", "bound", "settings", "reps/setting", "total reps",
                "lab time [s]", "lab time at peak [s]"]
        lines = []
        for row in self.rows():
            if not row["certifiable"]:
                lines.append([row["witness"], "never", "-", _g(row["bound"]), "-", "-", "inf", "inf", "inf"])
                continue
            per = list(row["per_setting"].values())
            per_txt = f"{min(per)}" if min(per) == max(per) else f"{min(per)}-{max(per)}"
            lines.append([row["witness"], _g(row["best_time_s"]), _g(row["value"]), _g(row["bound"]),
                          str(row["settings"]), per_txt, str(row["total_repetitions"]), _g(row["lab_time_s"]),
                          _g(row.get("lab_time_at_peak_s"))])
        widths = [max(len(c), *(len(line[j]) for line in lines)) if lines else len(c) for j, c in enumerate(cols)]
        table = ["  ".join(c.ljust(w) for c, w in zip(cols, widths))]
        table += ["  ".join(v.ljust(w) for v, w in zip(line, widths)) for line in lines]
        tail = [f"skipped {name}: {why}" for name, why in self.skipped.items()]
        for name, c in self.checks.items():
            tail.append(f"Monte-Carlo {name}: {c.trials} seeded records (seed {c.seed}) "
                        f"{'agree' if c.agrees else 'DISAGREE'} with the analytic count; certified "
                        f"{c.certified_fraction:.3f} vs predicted {c.predicted_certified_fraction:.3f}; "
                        f"plug-in interval coverage {c.coverage_plugin:.4f} vs nominal {c.predicted_coverage:.4f}")
        return "\n".join(head + table + tail)

    def to_json_dict(self) -> dict:
        series = {}
        for name, plan in self.plans.items():
            entry = {"total_repetitions": _finite_list(plan.total), "lab_time_s": _finite_list(plan.lab_time_s)}
            if isinstance(plan, DuanPlan):
                entry.update({"value": plan.value.tolist(), "bound": plan.bound.tolist(), "a0": plan.a0.tolist(),
                              "rotation_rad": plan.rotation_rad.tolist()})
            elif isinstance(plan, CovariancePlan):
                entry.update({"value": plan.value.tolist(), "bound": 0.0, "settings": list(plan.settings),
                              "bias_one_shot": plan.bias_one_shot.tolist(),
                              "per_setting": [_finite_list(r) for r in plan.per_setting]})
            else:
                entry.update({"value": plan.values.tolist(), "bound": plan.bound, "settings": list(plan.settings),
                              "per_setting": [_finite_list(r) for r in plan.per_setting]})
            series[name] = entry
        return {"sigmas": next(iter(self.plans.values())).sigmas if self.plans else None,
                "confidence": self.options.confidence, "power": self.options.power, "split": self.options.split,
                "overhead_s": self.options.overhead_s, "peak_measure": self.peak_measure,
                "peak_time_s": self.peak_time_s, "times_s": self.times_s.tolist(), "rows": self.rows(),
                "series": series, "skipped": dict(self.skipped)}

    def plot(self, ax=None):
        return plot_repetitions(self, ax=ax)

    def _repr_html_(self) -> str:
        import html

        return f"<pre>{html.escape(self.as_text())}</pre>"


def _g(value) -> str:
    if value is None:
        return "-"
    if isinstance(value, float) and not math.isfinite(value):
        return "inf"
    return f"{value:.4g}"


def _finite_list(arr) -> list:
    """JSON has no infinity: write null where a plan cannot certify."""
    return [float(v) if np.isfinite(v) else None for v in np.asarray(arr, dtype=float)]


def _peak(result: Result) -> tuple[str | None, float | None]:
    for name in ("log_negativity", "negativity", "concurrence"):
        if name in result.series:
            values = np.asarray(result.series[name], dtype=float)
            return name, float(result.times_s[int(np.argmax(values))])
    return None, None


def certify_result(result: Result, options: CertifyOptions | None = None, *,
                   covariances: np.ndarray | None = None, position_scale_m: np.ndarray | None = None) -> CertificationReport:
    """Plan the certification of ``result`` with every applicable witness.

    Superposition results need ``result.states`` with two subsystems; oscillator results need
    ``covariances`` (n_times, 4, 4) of the two bodies' modes in gqsim's Gaussian convention
    (vacuum = I, [x, p] = i) and ``position_scale_m`` (2,): X_i = ell_i x_i [m], used to convert
    the readout imprecision (see :func:`oscillator_covariances`).
    """
    options = options or CertifyOptions()
    times = np.asarray(result.times_s, dtype=float)
    plans: dict[str, RepetitionPlan | DuanPlan | CovariancePlan] = {}
    skipped: dict[str, str] = {}
    checks: dict[str, MonteCarloCheck] = {}
    frames: dict[str, dict] = {}
    if result.states is not None and len(result.dims) == 2:
        dims = tuple(int(d) for d in result.dims)
        states = np.asarray(result.states)
        witnesses: list[Witness] = []
        if "spin_correlation" in options.builtin:
            if dims == (2, 2):
                w = spin_correlation_witness()
                vals = w.value(states)
                sign = 1 if vals[int(np.argmax(np.abs(vals)))] >= 0 else -1
                witnesses.append(spin_correlation_witness(sign))
            else:
                skipped["spin_correlation"] = f"needs two qubits; this run has branch counts {dims}"
        witnesses += [c.build(dims) for c in options.custom]
        # witnesses re-designed for the state at each time (the experiment measures the one for its time)
        designs = {}
        if "optimal_ppt" in options.builtin:
            designs["optimal_ppt"] = lambda rho: optimal_ppt_witness(rho, dims)
        if "spin_correlation_optimised" in options.builtin:
            if dims == (2, 2):
                designs["spin_correlation_optimised"] = optimised_spin_witness
            else:
                skipped["spin_correlation_optimised"] = f"needs two qubits; this run has branch counts {dims}"
        for name, design in designs.items():
            plans[name] = plan_ppt_scan(states, dims, times, readout=options.readout, design=design, name=name,
                                        **options.plan_kwargs)
        for w in witnesses:
            plans[w.name] = plan_repetitions(setting_table(w, states, options.readout), times, **options.plan_kwargs)
        for name in ("duan", "estimated_log_negativity", "covariance_witness"):
            if name in options.builtin:
                skipped[name] = "applies to oscillator runs"
        for name, design in designs.items():
            plan = plans[name]
            if np.any(np.isfinite(plan.lab_time_s)):
                w = design(states[best_measurement_time(times, plan.total, plan.overhead_s)[0]])
                # the local rotations the experiment applies before a branch-basis readout
                frames[name] = {"frame_a": _complex_json(w.frame("a")), "frame_b": _complex_json(w.frame("b")),
                                "expression": w.expression}
        if options.trials:
            for name, plan in plans.items():
                if not np.any(np.isfinite(plan.lab_time_s)):
                    continue
                i = best_measurement_time(times, plan.total, plan.overhead_s)[0]
                w = designs[name](states[i]) if name in designs else next(x for x in witnesses if x.name == name)
                table = setting_table(w, states[i][None], options.readout)
                shots = np.array([plan.per_setting[i, plan.settings.index(st.label)] for st in table.settings])
                checks[name] = monte_carlo_check(table, shots, sigmas=plan.sigmas, trials=options.trials,
                                                 seed=options.seed)
    elif covariances is not None:
        cov = np.asarray(covariances, dtype=float)
        ex = ep = 0.0
        if {"duan", "estimated_log_negativity", "covariance_witness"} & set(options.builtin):
            scale = np.ones(2) if position_scale_m is None else np.asarray(position_scale_m, dtype=float)
            # X = ell x and P = (hbar/ell) p, so added noise variances convert as below (scaled units);
            # the plans take one noise level per quadrature, so the two bodies' values are averaged.
            ex = float(np.mean((options.position_imprecision_m / scale) ** 2))
            ep = float(np.mean((options.momentum_imprecision_kg_m_s * scale / hbar) ** 2))
        if "duan" in options.builtin:
            plans["duan"] = duan_plan(cov, times, imprecision_x=ex, imprecision_p=ep, confidence=options.confidence,
                                      sigmas=options.sigmas, power=options.power, overhead_s=options.overhead_s)
        if "covariance_witness" in options.builtin:
            plans["covariance_witness"] = covariance_witness_plan(
                cov, times, imprecision_x=ex, imprecision_p=ep, confidence=options.confidence, sigmas=options.sigmas,
                power=options.power, overhead_s=options.overhead_s)
        if "estimated_log_negativity" in options.builtin:
            plans["estimated_log_negativity"] = log_negativity_plan(
                cov, times, imprecision_x=ex, imprecision_p=ep, confidence=options.confidence, sigmas=options.sigmas,
                power=options.power, overhead_s=options.overhead_s)
        if options.trials:
            for name, plan in plans.items():
                if not np.any(np.isfinite(plan.lab_time_s)):
                    continue
                i = best_measurement_time(times, plan.total, plan.overhead_s)[0]
                if isinstance(plan, DuanPlan):
                    checks[name] = duan_monte_carlo_check(plan, index=i, trials=options.trials, seed=options.seed)
                else:
                    checks[name] = covariance_monte_carlo_check(cov, plan, index=i, imprecision_x=ex, imprecision_p=ep,
                                                                trials=options.trials, seed=options.seed)
        for name in ("optimal_ppt", "spin_correlation", "spin_correlation_optimised"):
            if name in options.builtin:
                skipped[name] = "applies to superposition (branch) runs"
        if options.custom:
            skipped.update({c.label: "custom expressions apply to superposition runs" for c in options.custom})
    else:
        raise PhysicsError("result", repr(result), "has neither two-body density matrices nor covariance matrices "
                                                  "to plan a measurement on")
    if not plans:
        raise PhysicsError("witnesses.builtin", list(options.builtin), "no witness applies to this run")
    peak_measure, peak_time = _peak(result)
    return CertificationReport(times_s=times, plans=plans, peak_measure=peak_measure, peak_time_s=peak_time,
                               options=options, checks=checks, skipped=skipped, frames=frames)


def _complex_json(matrix: np.ndarray) -> dict:
    return {"real": np.real(matrix).tolist(), "imag": np.imag(matrix).tolist()}


def oscillator_covariances(protocol, result=None) -> tuple[np.ndarray, np.ndarray]:
    """Covariances (n_times, 4, 4) of the two bodies' modes and their length scales ell [m].

    Read from the run's own ``covariance`` series (lab frame, scaled quadratures) when
    ``result`` carries one; otherwise the exact Gaussian engine of :mod:`gqsim.oscillators`
    is run. One mode is kept per side.
    """
    from gqsim.oscillators import pair_covariances

    return pair_covariances(protocol, result)


def plot_repetitions(report: CertificationReport, ax=None):
    """Total repetitions vs measurement time for each witness (log scale); returns ``ax``.

    Dots mark each witness's best time (least lab time); the dashed line marks the time of
    maximum entanglement.
    """
    if ax is None:
        import matplotlib.pyplot as plt

        _, ax = plt.subplots(figsize=(6.4, 4.0))
    for name, plan in report.plans.items():
        total = np.where(np.isfinite(plan.total), plan.total, np.nan)
        (line,) = ax.plot(plan.times_s, total, label=name)
        if np.any(np.isfinite(plan.lab_time_s)):
            i = best_measurement_time(plan.times_s, plan.total, plan.overhead_s)[0]
            ax.plot([plan.times_s[i]], [plan.total[i]], "o", color=line.get_color())
    if report.peak_time_s is not None:
        ax.axvline(report.peak_time_s, linestyle="--", color="0.5", label=f"max {report.peak_measure}")
    ax.set_yscale("log")
    ax.set_xlabel("measurement time t [s]")
    ax.set_ylabel("repetitions to certify")
    ax.legend(loc="best", fontsize="small")
    return ax


def write_certification(report: CertificationReport, out_dir: str | Path) -> list[Path]:
    """Write ``certify.json``, ``certify.csv`` (per-time totals and lab times) and ``certify.png``."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    paths = [out / "certify.json", out / "certify.csv", out / "certify.png"]
    paths[0].write_text(json.dumps(report.to_json_dict(), indent=1), encoding="utf-8")
    with paths[1].open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        names = list(report.plans)
        writer.writerow(["time_s"] + [f"{n}_total_repetitions" for n in names] + [f"{n}_lab_time_s" for n in names])
        for i, t in enumerate(report.times_s):
            writer.writerow([repr(float(t))] + [_csv(report.plans[n].total[i]) for n in names]
                            + [_csv(report.plans[n].lab_time_s[i]) for n in names])
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.4, 4.0))
    plot_repetitions(report, ax=fig.add_subplot())
    fig.tight_layout()
    fig.savefig(paths[2], dpi=120)
    return paths


def _csv(value: float) -> str:
    return repr(float(value)) if np.isfinite(value) else "inf"
