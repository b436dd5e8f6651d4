"""Run stage for trapped oscillators: protocol -> setup -> model -> channels -> engine -> Result.

``build(protocol)`` validates the physics down to the model; ``simulate(protocol, engine=...)``
returns a :class:`gqsim.record.Result` whose series are named as the trade spells them
(``log_negativity`` in nats, ``simon``, ``simon_min_eigenvalue``, ``duan``, ``purity``,
``mutual_information``, ``position_spread_m[<mode>]`` ...).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import replace
from typing import Any, Mapping

import numpy as np

from gqsim.errors import PhysicsError, ProtocolError
from gqsim.oscillators import analytic, measures
from gqsim.oscillators.channels import OpenDynamics, build_channels
from gqsim.oscillators.environment import fold_environment, oscillator_bodies, tally_of, with_environment
from gqsim.oscillators.solve_moments import (CONDITION_LIMIT, condition_numbers, evolve_gaussian,
                                                 evolve_gaussian_precise)
from gqsim.oscillators.model import OscillatorModel, build_model
from gqsim.oscillators.setup import setup_from_protocol
from gqsim.protocol.reader import Protocol, load_protocol
from gqsim.record import Provenance, Result, entangled_windows, package_versions

__all__ = ["build", "simulate", "simulate_model", "pair_covariances", "UNITS"]

#: units of every series this family reports (prefix match for per-mode series).
UNITS = {
    "log_negativity": "nats (ln)",
    "simon": "1",  # Simon's invariant with V = sigma/2; < 0 means entangled
    "simon_min_eigenvalue": "1",  # vacuum units; < 0 means the partial transpose is unphysical
    "duan": "1",  # Var(u) + Var(v) with vacuum variance 1/2; entangled when below duan_bound
    "duan_bound": "1",
    "duan_scaling": "1",
    "duan_rotation_rad": "rad",
    "purity": "1",
    "mutual_information": "nats (ln)",
    "position_spread_m": "m",
    "mean_displacement_m": "m",
    "phonons": "1",  # fluctuation quanta about the mean, preparation-trap ladder
    "covariance": "vacuum units",  # sigma_jk = <{dr_j, dr_k}>, r = (x1, p1, ...), x_i = X_i / ell_i
}

#: E_N below this is reported as "not entangled" in windows. Measured resolution of the Gaussian
#: engine: a product state evolved with no coupling over 10^4 steps of 0.3 trap periods shows
#: spurious E_N up to 3e-12 nats (expm rounding accumulating in the covariance); 1e-11 keeps a margin.
EN_FLOOR = 1e-11

_OSC_ENGINES = ("auto", "gaussian", "fock")


def _protocol(protocol) -> Protocol:
    return protocol if isinstance(protocol, Protocol) else load_protocol(protocol)


def build(protocol) -> OscillatorModel:
    """Validate ``protocol`` (path or :class:`Protocol`) down to the model and return it."""
    proto = _protocol(protocol)
    if proto.family != "oscillators":
        raise ProtocolError("family", proto.family, "gqsim.oscillators builds only family = \"oscillators\"")
    model = build_model(setup_from_protocol(with_environment(proto.data)))
    build_channels(model)  # validates the channel numbers too
    return model


def simulate(protocol, *, engine: str | None = None) -> Result:
    """Simulate an oscillators protocol; ``engine`` is "gaussian", "fock", "auto" or None (protocol's)."""
    proto = _protocol(protocol)
    if proto.family != "oscillators":
        raise ProtocolError("family", proto.family, "gqsim.oscillators builds only family = \"oscillators\"")
    plain = proto.to_dict()
    table = plain.pop("environment", None)
    setup, env, spheres = oscillator_bodies(plain, table)
    tally = tally_of(setup, env, spheres, plain.get("about", {}).get("title", ""))
    folded = plain if table is None else fold_environment(plain, setup, env, spheres)
    model = build_model(setup if table is None else setup_from_protocol(folded))
    build_channels(model)  # validates the channel numbers too
    result = simulate_model(model, engine=engine, protocol=proto)
    return replace(result, summary={**result.summary, "noise_budget": tally.summary_rows()})


def _choose_engine(model: OscillatorModel, engine: str | None) -> str:
    choice = engine or model.setup.solver.engine
    if choice not in _OSC_ENGINES:
        raise ProtocolError("engine", choice, f"oscillator protocols run with one of {list(_OSC_ENGINES)}")
    if choice == "auto":
        return "gaussian" if model.is_gaussian else "fock"
    if choice == "gaussian" and not model.is_gaussian:
        raise PhysicsError("engine", "gaussian", "this protocol has non-Gaussian parts (Fock/cat initial states or "
                           "anharmonic_order > 2); use the fock engine")
    return choice


def simulate_model(model: OscillatorModel, *, engine: str | None = None, protocol: Protocol | None = None) -> Result:
    """Run an already built model (notebook use) and return its :class:`Result`."""
    choice = _choose_engine(model, engine)
    dynamics = build_channels(model)
    if choice == "gaussian":
        traj = evolve_gaussian(model, dynamics)
        worst = float(np.max(condition_numbers(traj.covariances)))
        notes = ()
        if worst > CONDITION_LIMIT and not np.any(dynamics.measurement):
            traj = evolve_gaussian_precise(model, dynamics)
            shown = f"{worst:.2g}" if np.isfinite(worst) else "beyond float64 range"
            notes = (f"covariance condition number reached {shown} (free or inverted stages shear the wave "
                     f"packets): the run was repeated in the local interaction frame with {traj.digits}-digit "
                     "arithmetic; entanglement measures come from the interaction-frame covariance",)
        series, summary = gaussian_series(model, traj.means, traj.covariances, traj.interaction_covariances)
        summary["gaussian_path"] = "interaction frame, extended precision" if notes else "float64"
    else:
        from gqsim.oscillators.solve_number_basis import evolve_fock

        fock = evolve_fock(model, dynamics)
        series, summary = fock.series, dict(fock.summary)
        notes = fock.notes
    summary.update(_model_summary(model, dynamics))
    summary.update(_entanglement_summary(model.setup.times_s, series))
    summary["analytic"] = analytic_companions(model, series)
    units = {name: _unit(name) for name in series}
    notes = (tuple(notes) + _resolution_notes(model, series) + _expansion_notes(model, series)
             + _brownian_notes(model, series))
    prov = Provenance(protocol=protocol.data if protocol else {}, source=protocol.source if protocol else "<model>",
                      engine=choice, options={"engine": choice, **_solver_options(model)},
                      versions=package_versions())
    return Result(times_s=model.setup.times_s, series=series, units=units, summary=summary, provenance=prov,
                  family="oscillators", notes=tuple(notes))


def _resolution_notes(model: OscillatorModel, series: dict) -> tuple[str, ...]:
    """Warn in the result when the coupling is too weak for float64 to resolve its E_N."""
    if float(np.max(series["log_negativity"])) > EN_FLOOR:
        return ()
    ham = model.stages[0].hamiltonian[0::2, 0::2]
    off = np.abs(ham - np.diag(np.diag(ham)))
    lam = float(off.max()) / 2 if off.size else 0.0
    if 0 < lam < 100 * EN_FLOOR:
        return (f"the pair coupling is lambda ~ {lam:.3g} (in trap units); entanglement of that order is below "
                f"the float64 resolution of the engines (~{EN_FLOOR:.0e} nats), so E_N is reported as 0 where "
                "it is not resolved: use the analytic companions",)
    return ()


#: position spread / closest centre distance above which the second-order (Hessian) expansion is
#: flagged: the neglected cubic term is ~ (spread/d) times the kept quadratic one.
EXPANSION_LIMIT = 0.05


def _expansion_notes(model: OscillatorModel, series: dict) -> tuple[str, ...]:
    """Flag runs whose wave packets spread to a sizeable fraction of the body separation."""
    bodies = model.setup.bodies
    closest = min(float(np.linalg.norm(np.subtract(a.position_m, b.position_m)))
                  for i, a in enumerate(bodies) for b in bodies[i + 1:])
    spread = max(float(np.max(v)) for k, v in series.items() if k.startswith("position_spread_m["))
    if spread > EXPANSION_LIMIT * closest:
        return (f"the position spread reaches {spread / closest:.2g} of the closest centre distance: the "
                "second-order (Hessian) expansion of the pair potential needs spread << distance; check the "
                "cubic and quartic terms with solver.anharmonic_order = 4 on the fock engine where feasible",)
    return ()


#: k_B T / (hbar omega) below which the Caldeira-Leggett equation is flagged (it is derived for
#: k_B T >> hbar omega and is not completely positive; common practice).
BROWNIAN_TEMPERATURE_RATIO = 5.0


def _brownian_notes(model: OscillatorModel, series: dict) -> tuple[str, ...]:
    """Flag Caldeira-Leggett damping outside its high-temperature range, and unphysical states."""
    from scipy.constants import hbar, k as k_B

    out = []
    for body in model.setup.bodies:
        ch = body.channels
        if ch.damping_model != "brownian" or not ch.damping_rate_per_s > 0:
            continue
        for i in model.body_modes(body.label):
            ratio = k_B * ch.bath_temperature_k / (hbar * model.scales.omega_ref_rad_s[i])
            if ratio < BROWNIAN_TEMPERATURE_RATIO:
                out.append(f"{model.mode_names[i]}: Caldeira-Leggett damping at k_B T = {ratio:.3g} hbar omega; the "
                           "equation holds for k_B T >> hbar omega and is not completely positive, so states can "
                           "turn unphysical; prefer damping_model = \"quantum_optical\" here")
                break
    if "covariance" in series and out:
        nu = measures.symplectic_eigenvalues(series["covariance"])
        if np.any(nu < 1 - 1e-9):
            out.append(f"the covariance violates the uncertainty principle (smallest symplectic eigenvalue "
                       f"{float(nu.min()):.6g} < 1): the Caldeira-Leggett state is unphysical")
    return tuple(out)


def _unit(name: str) -> str:
    base = name.split("[")[0]
    return UNITS.get(base, "1")


def _solver_options(model: OscillatorModel) -> dict:
    s = model.setup.solver
    return {"fock_tolerance": s.fock_tolerance, "fock_max_cutoff": s.fock_max_cutoff,
            "anharmonic_order": s.anharmonic_order, "conditional": s.conditional}


def _sides(model: OscillatorModel) -> tuple[list[int], list[int]]:
    side_a = [i for label in model.setup.side_a for i in model.body_modes(label)]
    side_b = [i for i in range(model.n_modes) if i not in side_a]
    return side_a, side_b


def _pairs(model: OscillatorModel):
    bodies = model.setup.bodies
    return [(a.label, b.label) for a, b in itertools.combinations(bodies, 2)]


def gaussian_series(model: OscillatorModel, means: np.ndarray, covs: np.ndarray,
                    frame_covs: np.ndarray | None = None) -> tuple[dict, dict]:
    """Every reported series from means (n_t, 2n) and covariances (n_t, 2n, 2n) in scaled units.

    ``frame_covs`` are the same states in a local symplectic frame (better conditioned); the
    entanglement measures, invariant under local symplectic maps, are taken from them, while the
    Duan combination, spreads and phonons are lab-frame quantities.
    """
    lab = covs
    covs = lab if frame_covs is None else frame_covs
    side_a, side_b = _sides(model)
    both = side_a + side_b
    series: dict[str, np.ndarray] = {}
    reduced = measures.reduce(covs, both)
    b_local = list(range(len(side_a), len(both)))
    series["log_negativity"] = measures.log_negativity(reduced, b_local)
    series["simon_min_eigenvalue"] = measures.simon_min_eigenvalue(reduced, b_local)
    if len(side_a) == 1 and len(side_b) == 1:
        series["simon"] = measures.simon_invariant(reduced)
        duan = measures.duan_optimised(measures.reduce(lab, both))
        series["duan"] = duan["value"]
        series["duan_bound"] = duan["bound"]
        series["duan_scaling"] = duan["scaling"]
        series["duan_rotation_rad"] = duan["rotation_rad"]
    series["purity"] = measures.purity(covs)
    series["mutual_information"] = measures.mutual_information(covs, side_a, side_b)
    if len(model.setup.bodies) > 2:
        for la, lb in _pairs(model):
            ma, mb = model.body_modes(la), model.body_modes(lb)
            pair = measures.reduce(covs, ma + mb)
            local_b = list(range(len(ma), len(ma) + len(mb)))
            series[f"log_negativity[{la}|{lb}]"] = measures.log_negativity(pair, local_b)
    # the covariance itself, lab frame, scaled quadratures (X_i = ell_i x_i, P_i = hbar p_i / ell_i)
    series["covariance"] = lab
    scales = model.scales
    for i, name in enumerate(model.mode_names):
        var = scales.position_variance_m2(lab[:, 2 * i, 2 * i], i)
        series[f"position_spread_m[{name}]"] = np.sqrt(var)
        series[f"mean_displacement_m[{name}]"] = means[:, 2 * i] * scales.length_m[i]
        # fluctuation phonons about the mean (the static pull of the pair force is a classical
        # displacement, not heating)
        series[f"phonons[{name}]"] = (lab[:, 2 * i, 2 * i] + lab[:, 2 * i + 1, 2 * i + 1]) / 4 - 0.5
    return series, {}


#: tolerance on the sign-type criteria (Simon, Duan) before they count as signalling entanglement:
#: their values are O(1) combinations of covariance entries, so a few float64 ulps.
CRITERION_FLOOR = 1e-12


def _entanglement_summary(times: np.ndarray, series: dict) -> dict:
    """One entry per series (max, time of max, windows where it signals entanglement)."""
    out: dict = {}
    for name, values in series.items():
        if values.ndim != 1:
            continue
        k = int(np.argmax(values))
        entry = {"max": float(values[k]), "time_of_max_s": float(times[k])}
        base = name.split("[")[0]
        signal = None
        if base in ("log_negativity",):
            signal = values > EN_FLOOR
        elif base in ("simon", "simon_min_eigenvalue"):
            j = int(np.argmin(values))
            entry.update({"min": float(values[j]), "time_of_min_s": float(times[j])})
            signal = values < -CRITERION_FLOOR
        elif base == "duan":
            ratio = values / series["duan_bound"]
            j = int(np.argmin(ratio))
            entry.update({"min": float(values[j]), "time_of_min_s": float(times[j]),
                          "bound_at_min": float(series["duan_bound"][j]),
                          "scaling_a_at_min": float(series["duan_scaling"][j]),
                          "rotation_rad_at_min": float(series["duan_rotation_rad"][j]),
                          "combination": "u = a x1' + x2'/a, v = a p1' - p2'/a, local rotations t1 + t2 = "
                                         "-rotation_rad"})
            signal = values < series["duan_bound"] * (1 - CRITERION_FLOOR)
        if signal is not None:
            windows = entangled_windows(times, signal)
            entry["entangled_windows_s"] = [[w.start_s, w.stop_s] for w in windows]
            entry["signals_entanglement"] = bool(windows)
        out[name] = entry
    return out


def _model_summary(model: OscillatorModel, dynamics: OpenDynamics) -> dict:
    names = model.mode_names
    scales = model.scales
    couplings = []
    for i, j in itertools.combinations(range(model.n_modes), 2):
        g = model.coupling_rad_s[i, j]
        if g != 0:
            couplings.append({"modes": f"{names[i]}-{names[j]}", "g_rad_s": float(g),
                              "stiffness_n_per_m": float(model.pair_stiffness_n_per_m[i, j])})
    shifts = {names[i]: float(model.pair_stiffness_n_per_m[i, i] / (2 * scales.mass_kg[i] * scales.omega_ref_rad_s[i]))
              for i in range(model.n_modes)}
    return {
        "title": model.setup.title,
        "modes": list(names),
        "bipartition": f"{'+'.join(model.setup.side_a)} | rest",
        "potentials": list(model.potentials),
        "couplings": couplings,
        "frequency_shifts_rad_s": shifts,
        "static_displacement_m": {names[i]: float(model.static_displacement_m[i]) for i in range(model.n_modes)},
        "zero_point_m": {names[i]: float(scales.zero_point_m[i]) for i in range(model.n_modes)},
        "covariance_order": [f"{q}[{name}]" for name in names for q in ("x", "p")],
        "covariance_scale_m": {names[i]: float(scales.length_m[i]) for i in range(model.n_modes)},
        "stages": [{"label": s.label, "duration_s": s.duration_s} for s in model.stages],
        "channels": list(dynamics.labels),
        "conventions": "x = (a + a^dag)/sqrt2, p = -i(a - a^dag)/sqrt2 of each preparation trap; "
                       "sigma_jk = <{dr_j, dr_k}> (vacuum = identity); E_N in nats",
    }


def analytic_companions(model: OscillatorModel, series: dict) -> dict:
    """Closed-form values next to the simulated ones with their ratio (two single-mode bodies).

    Which formula applies is decided from the protocol: a trapped quench (every stage trapped
    at the preparation frequency) gets the 2 lambda and thermal-threshold laws; a protocol whose
    last stage is free gets the free-fall law. The ground-state value is printed as a reference.
    """
    bodies = model.setup.bodies
    out: dict = {}
    if len(bodies) != 2 or model.n_modes != 2:
        out["note"] = "analytic companions are printed for two single-mode bodies only"
        return _flatten(out)
    a, b = bodies
    sep = np.subtract(b.position_m, a.position_m)
    d = float(np.linalg.norm(sep))
    wa, wb = model.scales.omega_ref_rad_s
    g = analytic.coupling_rate_rad_s(a.mass_kg, b.mass_kg, wa, wb, d)
    g_model = abs(float(model.coupling_rad_s[0, 1]))
    axis_a, axis_b = "xyz".index(a.modes[0]), "xyz".index(b.modes[0])
    axial = axis_a == axis_b and math.isclose(abs(sep[axis_a]), d, rel_tol=1e-12)
    if axial:
        out["coupling_g_rad_s"] = _pair(g, g_model, "gravity alone: 2 G m1 m2 x_zpf1 x_zpf2 / (hbar d^3)",
                                        "model Hessian coupling (all pair potentials)")
    # lambda from the model's own coupling, so the laws below also hold with other pair potentials
    lam = g_model / math.sqrt(wa * wb)
    out["lambda"] = float(lam)
    en = series["log_negativity"]
    times = model.setup.times_s
    gravity_only = tuple(model.potentials) == ("gravity",)
    if axial and a.mass_kg == b.mass_kg and wa == wb:
        if gravity_only:
            out["ground_state_log_negativity"] = {
                "analytic": float(analytic.gravity_ground_state_log_negativity(lam)),
                "formula": "-1/4 ln(1 - 4 lambda) = 1/2 ln(omega_+/omega_-)"}
        trapped = all(np.allclose(2 * math.pi * np.asarray(s.trap_hz), [wa, wb]) and not s.inverted
                      for s in model.setup.stages)
        if trapped:
            n0 = a.initial.occupation_at(wa)
            r, angle = a.initial.squeezing(0)
            if n0 == 0 and r == 0:
                out["quench_max"] = _pair(2 * lam, float(en.max()), "2 lambda (E_N max over the run)",
                                          "simulated E_N max")
            if n0 == 0 and r > 0 and abs(math.sin(angle)) < 1e-12:
                wt = wa * float(times[-1])
                out["squeezed_growth"] = _pair(float(analytic.squeezed_quench_envelope(lam, wt, r)), float(en.max()),
                                               "2 lambda omega t sinh(2r) at the last time", "simulated E_N max")
            if r == 0:
                out["thermal_threshold_occupation"] = float(analytic.thermal_threshold_occupation(lam))
                out["thermal_quench_max"] = _pair(float(analytic.thermal_quench_max(lam, n0)), float(en.max()),
                                                  "max(0, 2 lambda - ln(1 + 2n))", "simulated E_N max")
        last = model.setup.stages[-1]
        if all(f == 0 for f in last.trap_hz) and len(model.setup.stages) >= 1:
            t_free = times[-1] - model.stage_boundaries_s()[-2]
            if t_free > 0 and a.initial.occupation_at(wa) == 0 and gravity_only:
                value = float(analytic.free_fall_log_negativity(a.mass_kg, wa, d, t_free, a.initial.squeezing(0)[0]))
                en_before = float(np.interp(model.stage_boundaries_s()[-2], times, en))
                out["free_fall"] = _pair(value, float(en[-1] - en_before),
                                         "(2/3) e^{2r} (G m/d^3) omega0 t^3 over the last (free) stage",
                                         "simulated E_N gained in the free stage")
    return _flatten(out)


def _pair(analytic_value: float, simulated: float, formula: str, against: str) -> dict:
    ratio = simulated / analytic_value if analytic_value != 0 else float("nan")
    return {"analytic": float(analytic_value), "simulated": float(simulated),
            "ratio": ratio if math.isfinite(ratio) else None, "formula": formula, "simulated_is": against}


def _flatten(companions: dict) -> dict:
    """{name: {analytic, simulated, ratio, ...}} -> flat scalar keys the summary table prints."""
    flat: dict = {}
    for key, value in companions.items():
        if isinstance(value, dict):
            for sub, item in value.items():
                flat[f"{key}_{sub}"] = item
        else:
            flat[key] = value
    return flat


def pair_covariances(protocol, result=None) -> tuple[np.ndarray, np.ndarray]:
    """Covariances (n_times, 4, 4) of the two bodies' modes and their length scales ell [m].

    Read from the run's own ``covariance`` series (lab frame, scaled quadratures) when
    ``result`` carries one; otherwise the exact covariance propagation is run. One mode is kept
    per side (the certification study's Duan plan reads them).
    """
    model = build(protocol)
    side_a, side_b = _sides(model)
    if len(side_a) != 1 or len(side_b) != 1:
        raise PhysicsError("bodies", f"{len(side_a)} + {len(side_b)} modes",
                           "the Duan plan needs exactly one mode on each side")
    if result is not None and "covariance" in result.series:
        covariances = np.asarray(result.series["covariance"])
    else:
        covariances = evolve_gaussian(model, build_channels(model)).covariances
    modes = side_a + side_b
    return measures.reduce(covariances, modes), np.asarray(model.scales.length_m)[modes]
