"""Batched route: many grid points of a two-qubit superposition sweep in one vectorised call.

Scope (checked by :func:`batched_support`; anything else runs point by point): two bodies
with two branches each placed by ``[arrangement]``, equal branch weights, no split or
recombine ramp, no spin T1, the closed-form engine, and axes among :data:`BATCHED_PATHS`.

Physics (the same as the closed-form engine, written for a whole batch at once)
------------------------------------------------------------------------------
Phases while held: phi_ab = G m_A m_B t / (hbar r_ab) (Eq. (1)-(2) of [Bose2017], from
memory), so the local-unitary invariant entangling phase is theta(t) = omega t with
omega = (G m_A m_B / hbar)(1/r_LR + 1/r_RL - 1/r_LL - 1/r_RR) (Eq. (3) of [Bose2017],
from memory; shared references §1.2, §1.5-1.6). Branch coherences decay element-wise,
p = exp(-Gamma_A(t)), q = exp(-Gamma_B(t)) (Sec. 3.4 of [BreuerPetruccione2002], from memory).
Up to local diagonal unitaries (which leave the log-negativity unchanged, [VidalWerner2002])
the state is the dephased phase state

    rho = (1/4) sum exp(i theta (a b - a' b')) p^[a!=a'] q^[b!=b'] |ab><a'b'| .

Its partial transpose has the characteristic polynomial (derived here with a computer-algebra
factorisation; checked in tests against the eigenvalues of the explicit 4x4 matrices)

    [(4 l - 1 - pq)^2 - (p + q)^2 + 4 pq s^2] [(4 l - 1 + pq)^2 - (p - q)^2 - 4 pq s^2] = 0,
    s = sin(theta/2),

so its eigenvalues are (1 + pq +- sqrt((p+q)^2 - 4pq s^2))/4 and (1 - pq +- sqrt((p-q)^2 + 4pq s^2))/4.
E_N = log ||rho^{T_B}||_1 (Eq. (4) of [VidalWerner2002]). For p = q = 1 this gives
E_N = log2(1 + |sin(theta/2)|), the pure-state identity of shared references §1.4.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba
import numpy as np
from scipy.constants import G, hbar

from gqsim.physics.measures import LOG_BASES, log_negativity, partial_transpose
from gqsim.protocol.reader import Protocol
from gqsim.record import CERTIFICATION_FIGURES, MAX_TIE_FLOOR, MAX_TIE_RELATIVE, first_near_max
from gqsim.superposition.setup import DEFAULT_POINTS
from gqsim.superposition.run import ENTANGLEMENT_SIGNAL_FLOOR

__all__ = ["BATCHED_PATHS", "batched_support", "QubitBatch", "gather_batch", "evaluate_batch",
           "evaluate_batch_numpy", "evaluate_batch_reference", "reference_states", "NOISE_SOURCES"]

_BODY_KEYS = ("mass_kg", "radius_m", "dephasing.rate_per_s", "dephasing.localisation_per_m2_s",
              "dephasing.saturation_per_s", "spin.t2_s")
#: key paths the batched route can vary
BATCHED_PATHS = frozenset(
    [f"bodies[{i}].{k}" for i in ("0", "1", "*") for k in _BODY_KEYS]
    + ["arrangement.centre_distance_m", "arrangement.branch_span_m", "timing.hold_s"]
)
#: protocol tables and body keys the batched model covers; anything else (extra interactions,
#: an environment, charges) sends the sweep to the one-by-one route
_BATCHED_TABLES = frozenset({"schema_version", "family", "about", "arrangement", "bodies", "timing", "field",
                             "time_grid", "output", "solver"})
_BATCHED_BODY_KEYS = frozenset({"label", "mass_kg", "radius_m", "dephasing", "spin", "amplitudes"})
#: the decoherence sources the batched model has, in noise-budget order (body 0 then body 1,
#: each: protocol dephasing, spin pure dephasing; the first wins a tie), named as
#: gqsim.studies.decoherence names them: the ``dominant_noise`` figure
NOISE_SOURCES = ("none", "protocol dephasing table", "spin pure dephasing (T2)",
                 "protocol dephasing table", "spin pure dephasing (T2)")


#: Relative margin within which an overlap test is left to the one-by-one route, so that
#: borderline points get exactly the per-point decision and message (common practice).
_OVERLAP_MARGIN = 1e-9


def batched_support(spec) -> tuple[bool, str]:
    """Whether the batched route can run ``spec`` exactly; returns (ok, reason if not)."""
    base: Protocol = spec.base
    if base.family != "superposition":
        return False, f"family {base.family!r} has no batched route yet"
    data = base.data
    extra = sorted(set(data) - _BATCHED_TABLES)
    if extra:
        return False, f"table [{extra[0]}] is not part of the batched model"
    for i, body in enumerate(data["bodies"]):
        unknown = sorted(set(body) - _BATCHED_BODY_KEYS)
        if unknown:
            return False, f"bodies[{i}].{unknown[0]} is not part of the batched model"
    arr = data.get("arrangement")
    if arr is None:
        return False, "bodies placed without [arrangement]"
    if arr.get("branch_count", 2) != 2:
        return False, "more than two branches per body"
    timing = data["timing"]
    if timing.get("split_s", 0.0) != 0.0 or timing.get("recombine_s", 0.0) != 0.0:
        return False, "split/recombine ramps"
    if data.get("solver", {}).get("engine", "auto") == "lindblad":
        return False, "the protocol asks for the lindblad engine"
    for i, body in enumerate(data["bodies"]):
        if "t1_s" in body.get("spin", {}):
            return False, "spin T1 needs the lindblad engine"
        if "amplitudes" in body:
            mags = np.abs([complex(*a) for a in body["amplitudes"]])
            if not np.isclose(mags[0], mags[1], rtol=0, atol=1e-15):
                return False, "unequal branch weights"
        if "mass_kg" not in body:
            return False, "a body's mass follows from radius and density"
    if set(CERTIFICATION_FIGURES) & set(spec.figures):
        return False, "certification figures need a measurement plan per point"
    for axis in spec.axes:
        if axis.path not in BATCHED_PATHS:
            return False, f"axis {axis.path} is not among the batched keys"
    return True, ""


@dataclass(frozen=True, kw_only=True)
class QubitBatch:
    """Per-point parameters of a batch, all (n,) float arrays unless noted [SI units]."""

    mass_a: np.ndarray
    mass_b: np.ndarray
    radius_sum: np.ndarray
    distance: np.ndarray
    span: np.ndarray
    hold: np.ndarray
    times: np.ndarray  # (n, n_times)
    deph_full: np.ndarray  # (n, 4) coherence decay rates at full split, NOISE_SOURCES[1:] order [1/s]
    deph_zero: np.ndarray  # (n, 4) the same after recombination (branches together) [1/s]
    in_line: bool
    log_base: str


def _value(spec, points: np.ndarray, path: str, default: float) -> np.ndarray:
    """(n,) values of ``path`` at the flat grid indices ``points`` (base value where not swept)."""
    idx = np.unravel_index(points, spec.shape)
    for k, axis in enumerate(spec.axes):
        if axis.path == path:
            return np.asarray(axis.values, dtype=float)[idx[k]]
    return np.full(points.size, float(default) if default is not None else np.nan)


def _body_value(spec, points, index: int, key: str, default) -> np.ndarray:
    out = _value(spec, points, f"bodies[*].{key}", default)
    specific = f"bodies[{index}].{key}"
    if any(a.path == specific for a in spec.axes):
        out = _value(spec, points, specific, default)
    return out


def gather_batch(spec, points: np.ndarray) -> QubitBatch:
    """Collect the parameters of the flat grid indices ``points`` (n,) without building protocols."""
    data = spec.base.data
    arr = data["arrangement"]
    n = points.size
    bodies = data["bodies"]
    mass = [_body_value(spec, points, i, "mass_kg", bodies[i]["mass_kg"]) for i in (0, 1)]
    radius = [_body_value(spec, points, i, "radius_m", bodies[i].get("radius_m", 0.0)) for i in (0, 1)]
    distance = _value(spec, points, "arrangement.centre_distance_m", arr["centre_distance_m"])
    span = _value(spec, points, "arrangement.branch_span_m", arr["branch_span_m"])
    hold = _value(spec, points, "timing.hold_s", data["timing"]["hold_s"])
    grid = data.get("time_grid", {})
    if "times_s" in grid:
        times = np.broadcast_to(np.asarray(grid["times_s"], dtype=float), (n, len(grid["times_s"])))
    else:
        start = float(grid.get("start_s", 0.0))
        count = int(grid.get("points", DEFAULT_POINTS))
        if "stop_s" in grid:
            times = np.broadcast_to(np.linspace(start, float(grid["stop_s"]), count), (n, count))
        else:  # the default grid ends when the hold ends, point by point
            times = np.linspace(start, hold, count, axis=-1)
    full, zero = [], []
    for i in (0, 1):
        deph = bodies[i].get("dephasing", {"model": "none"})
        model = deph["model"]
        if model == "constant":
            rate = _body_value(spec, points, i, "dephasing.rate_per_s", deph.get("rate_per_s", 0.0))
            f_full, f_zero = rate, rate
        elif model == "separation_squared":
            lam = _body_value(spec, points, i, "dephasing.localisation_per_m2_s", deph["localisation_per_m2_s"])
            sat = _body_value(spec, points, i, "dephasing.saturation_per_s", deph.get("saturation_per_s"))
            raw = lam * span**2
            f_full = np.where(np.isnan(sat), raw, np.minimum(raw, sat))
            f_zero = np.zeros(n)
        else:
            f_full = f_zero = np.zeros(n)
        t2 = _body_value(spec, points, i, "spin.t2_s", bodies[i].get("spin", {}).get("t2_s"))
        spin = np.where(np.isnan(t2), 0.0, 1.0 / np.where(np.isnan(t2), 1.0, t2))
        full += [f_full, spin]
        zero += [f_zero, spin]
    out = data.get("output", {})
    return QubitBatch(mass_a=mass[0], mass_b=mass[1], radius_sum=radius[0] + radius[1], distance=distance,
                      span=span, hold=hold, times=np.asarray(times, dtype=float),
                      deph_full=np.stack(full, axis=1), deph_zero=np.stack(zero, axis=1),
                      in_line=arr["style"] == "in_line", log_base=out.get("log_base", "2"))


def needs_single_route(batch: QubitBatch) -> np.ndarray:
    """(n,) True where a point may be invalid (overlap, empty grid): the one-by-one route decides."""
    closest = np.abs(batch.distance - batch.span) if batch.in_line else batch.distance
    overlap = closest <= batch.radius_sum * (1 + _OVERLAP_MARGIN) + _OVERLAP_MARGIN * batch.span
    empty_grid = ~(batch.times[:, -1] > batch.times[:, 0])
    return overlap | empty_grid


def entangling_rate(batch: QubitBatch) -> np.ndarray:
    """(n,) omega = (G m_A m_B/hbar)(1/r_LR + 1/r_RL - 1/r_LL - 1/r_RR) [rad/s]
    (Eq. (3) of [Bose2017], from memory; shared references §1.5-1.6)."""
    d, s = batch.distance, batch.span
    if batch.in_line:
        inverse = 1.0 / (d + s) + 1.0 / np.abs(d - s) - 2.0 / d
    else:
        inverse = 2.0 / np.hypot(d, s) - 2.0 / d
    return G * batch.mass_a * batch.mass_b / hbar * inverse


def _phase_and_coherence(batch: QubitBatch):
    t = batch.times
    hold = batch.hold[:, None]
    held = np.clip(t, 0.0, hold)
    after = np.clip(t - hold, 0.0, None)
    theta = entangling_rate(batch)[:, None] * held
    rate_a_full, rate_a_zero, rate_b_full, rate_b_zero = _body_rates(batch)
    p = np.exp(-(rate_a_full[:, None] * held + rate_a_zero[:, None] * after))
    q = np.exp(-(rate_b_full[:, None] * held + rate_b_zero[:, None] * after))
    return theta, p, q


def pt_eigenvalues(theta: np.ndarray, p: np.ndarray, q: np.ndarray) -> np.ndarray:
    """(..., 4) eigenvalues of the partial transpose of the dephased phase state (module docstring)."""
    s2 = np.sin(theta / 2) ** 2
    pq = p * q
    plus = np.sqrt(np.clip((p + q) ** 2 - 4 * pq * s2, 0.0, None))
    minus = np.sqrt((p - q) ** 2 + 4 * pq * s2)
    return np.stack([1 + pq + plus, 1 + pq - plus, 1 - pq + minus, 1 - pq - minus], axis=-1) / 4


def evaluate_batch(batch: QubitBatch) -> dict[str, np.ndarray]:
    """Every sweep figure for the batch, each (n,) (``dominant_noise``: a source name of NOISE_SOURCES).

    Runs the compiled kernel :func:`_qubit_kernel`; :func:`evaluate_batch_numpy` is the plain
    numpy version of the same formulas and :func:`evaluate_batch_reference` the explicit-matrix
    route, both kept for the tests.
    """
    n = batch.hold.size
    rate = entangling_rate(batch)
    times = batch.times
    if times.strides[0] == 0:  # one grid shared by every point: pass it once
        times = times[:1]
    times = np.ascontiguousarray(times)
    ra_full, ra_zero, rb_full, rb_zero = _body_rates(batch)
    max_en = np.empty(n)
    t_max = np.empty(n)
    min_pt = np.empty(n)
    _qubit_kernel(rate, batch.hold, times, ra_full, ra_zero, rb_full, rb_zero,
                  batch.log_base == "2", MAX_TIE_RELATIVE, MAX_TIE_FLOOR, max_en, t_max, min_pt)
    return _scalar_figures(batch, rate, max_en, t_max, min_pt)


def _body_rates(batch: QubitBatch):
    return (batch.deph_full[:, 0] + batch.deph_full[:, 1], batch.deph_zero[:, 0] + batch.deph_zero[:, 1],
            batch.deph_full[:, 2] + batch.deph_full[:, 3], batch.deph_zero[:, 2] + batch.deph_zero[:, 3])


@numba.njit(cache=True, parallel=True)
def _qubit_kernel(rate, hold, times, ra_full, ra_zero, rb_full, rb_zero, base2, tie_rel, tie_floor, max_en,
                  t_max, min_pt):  # pragma: no cover - compiled; checked against evaluate_batch_numpy in tests
    n = rate.size
    step = 0 if times.shape[0] == 1 else 1  # (1, n_times): the same grid for every point
    nt = times.shape[1]
    for i in numba.prange(n):
        row = i * step
        scratch = np.empty(nt)
        best = 0.0
        lowest = np.inf
        for k in range(nt):
            t = times[row, k]
            held = min(max(t, 0.0), hold[i])
            after = max(t - hold[i], 0.0)
            s = math.sin(rate[i] * held / 2)
            s2 = s * s
            p = math.exp(-(ra_full[i] * held + ra_zero[i] * after))
            q = math.exp(-(rb_full[i] * held + rb_zero[i] * after))
            pq = p * q
            plus = math.sqrt(max((p + q) ** 2 - 4 * pq * s2, 0.0))
            minus = math.sqrt((p - q) ** 2 + 4 * pq * s2)
            e2 = (1 + pq - plus) / 4
            e4 = (1 - pq - minus) / 4
            norm = (abs(1 + pq + plus) / 4 + abs(e2) + abs(1 - pq + minus) / 4 + abs(e4))
            scratch[k] = norm
            best = max(best, norm)
            if t > 0:
                lowest = min(lowest, e2, e4)
        en = math.log(max(best, 1.0))
        if base2:
            en = en / math.log(2.0)
        en = max(0.0, en)
        floor = en - max(tie_rel * en, tie_floor)
        first = 0
        if floor > 0:  # E_N(t) >= floor  <=>  norm(t) >= base**floor
            level = math.exp(floor * (math.log(2.0) if base2 else 1.0))
            for k in range(nt):
                if scratch[k] >= level:
                    first = k
                    break
        max_en[i] = en
        t_max[i] = times[row, first]
        min_pt[i] = lowest


def evaluate_batch_numpy(batch: QubitBatch) -> dict[str, np.ndarray]:
    """The batch figures through plain numpy arrays over (point, time) (reference for the kernel)."""
    theta, p, q = _phase_and_coherence(batch)
    eig = pt_eigenvalues(theta, p, q)
    log, _ = LOG_BASES[batch.log_base]
    en = np.maximum(0.0, log(np.maximum(np.abs(eig).sum(axis=-1), 1.0)))
    return _figures(batch, en, eig.min(axis=-1))


def _figures(batch: QubitBatch, en: np.ndarray, lam_min: np.ndarray) -> dict[str, np.ndarray]:
    rows = np.arange(en.shape[0])
    k = first_near_max(en)
    positive = batch.times > 0
    lowest = np.where(positive, lam_min, np.inf).min(axis=1)
    return _scalar_figures(batch, entangling_rate(batch), en[rows, k], batch.times[rows, k], lowest)


def _scalar_figures(batch: QubitBatch, rate, max_en, t_max, min_pt) -> dict[str, np.ndarray]:
    noise = np.concatenate([np.zeros((rate.size, 1)), batch.deph_full], axis=1)
    dominant = np.where(noise.max(axis=1) > 0, np.argmax(noise, axis=1), 0)
    return {
        "max_log_negativity": max_en,
        "time_of_max_s": t_max,
        "entangled": (max_en > ENTANGLEMENT_SIGNAL_FLOOR).astype(np.int8),
        "min_pt_eigenvalue": min_pt,
        "entangling_rate_rad_s": rate,
        "dephasing_threshold_per_s": np.abs(rate) / 2,
        "dominant_noise": np.asarray(NOISE_SOURCES)[dominant],
    }




def reference_states(batch: QubitBatch) -> np.ndarray:
    """(n, n_times, 4, 4) explicit density matrices of the dephased phase state (numpy reference)."""
    theta, p, q = _phase_and_coherence(batch)
    a = np.array([0, 0, 1, 1])
    b = np.array([0, 1, 0, 1])
    phase = np.multiply.outer(theta, a * b)  # (n, T, 4)
    rho = np.exp(1j * (phase[..., :, None] - phase[..., None, :])) / 4
    rho = rho * np.where(a[:, None] != a[None, :], 1.0, 0.0) * p[..., None, None] \
        + rho * np.where(a[:, None] == a[None, :], 1.0, 0.0)
    rho = rho * np.where(b[:, None] != b[None, :], 1.0, 0.0) * q[..., None, None] \
        + rho * np.where(b[:, None] == b[None, :], 1.0, 0.0)
    return rho


def evaluate_batch_reference(batch: QubitBatch) -> dict[str, np.ndarray]:
    """The same figures through explicit matrices and gqsim.physics.measures (slow; tests compare)."""
    rho = reference_states(batch)
    n, nt = rho.shape[:2]
    flat = rho.reshape(n * nt, 4, 4)
    en = log_negativity(flat, (2, 2), batch.log_base).reshape(n, nt)
    pt = partial_transpose(flat, (2, 2))
    lam = np.linalg.eigvalsh(0.5 * (pt + pt.conj().transpose(0, 2, 1)))[:, 0].reshape(n, nt)
    return _figures(batch, en, lam)
