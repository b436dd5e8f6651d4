"""Batched route for two trapped oscillators: the exact Gaussian covariance propagation of many
grid points at once.

Scope (checked by :func:`gaussian_support`; anything else runs point by point): family
``oscillators``, two bodies with one mode each, Gaussian initial states, one stage, no
conditional measurement, the quadratic model (``anharmonic_order`` <= 2), a time grid starting at
t = 0. Each point's model and open-system terms come from gqsim.oscillators itself (environment
folded into the channels -> setup -> model -> channels, the same code as ``gqsim.simulate``); only the evolution and the measures are
batched:

* points that differ only in keys of the initial covariance (squeezing, its angle, the initial
  occupation or temperature; :func:`covariance_only`) share one model build and one propagator,
  and get their own initial covariance from the function ``initial_moments`` uses;
* one Van Loan block exponential per distinct model for the step propagator (Theorem 1 of
  [VanLoan1978]): expm([[-A, D], [0, A^T]] dt) gives Phi = e^{A dt} and Q, evaluated for all
  models together by :func:`stacked_expm` (A = Omega H + A_open, scaled units, vacuum sigma = I);
* the recursion sigma_{k+1} = Phi sigma_k Phi^T + Q, the log-negativity at every grid time
  (Eq. (16) of [VidalWerner2002]) and the smallest eigenvalue of sigma~ + i Omega over t > 0
  (Eq. (8) of [Simon2000]) in one compiled pass, :func:`gqsim.sweeps.gaussian_kernel.propagate_and_measure`,
  whose numpy reference (gqsim.oscillators.measures on the stacked covariances) the tests compare.

The per-point model build (~0.3-0.5 ms of Python) bounds maps in which every point has its own
model; ``benchmarks/bench_sweep_fast_path.py`` measures both kinds of map.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import expm

from gqsim.errors import GqsimError
from gqsim.sweeps.spec import CERTIFICATION_FIGURES, set_path, split_path

__all__ = ["gaussian_support", "evaluate_gaussian_points", "stacked_expm", "covariance_only"]


def gaussian_support(spec) -> tuple[bool, str]:
    """Whether the batched Gaussian route applies to ``spec``; (ok, reason if not)."""
    data = spec.base.data
    if set(CERTIFICATION_FIGURES) & set(spec.figures):
        return False, "certification figures need a measurement plan per point"
    bodies = data["bodies"]
    if len(bodies) != 2 or any(len(b.get("modes", ())) != 1 for b in bodies):
        return False, "the batched Gaussian route needs two bodies with one mode each"
    if any(b.get("initial", {}).get("kind", "gaussian") != "gaussian" for b in bodies):
        return False, "non-Gaussian initial states"
    if len(data.get("stages", ())) != 1:
        return False, "more than one stage"
    solver = data.get("solver", {})
    if solver.get("engine", "auto") == "fock" or solver.get("conditional", False) \
            or solver.get("anharmonic_order", 2) > 2:
        return False, "the protocol asks for the Fock engine, conditional measurement or anharmonic terms"
    grid = data.get("time_grid", {})
    if float(grid.get("start_s", 0.0)) != 0.0 or "times_s" in grid:
        return False, "the batched Gaussian route needs a uniform time grid from t = 0"
    return True, ""


#: Taylor degree and the norm each matrix is scaled below before squaring: the remainder
#: 0.25^21/21! ~ 1e-32 is far below double rounding (common practice for scaling and squaring).
_TAYLOR_DEGREE = 20
_SCALED_NORM = 0.25
#: above this 1-norm (long steps of stiff stages) scipy's Pade routine with per-matrix scaling
#: takes over: a common scaling of the whole stack would square the small ones needlessly
_FALLBACK_NORM = 32.0


def stacked_expm(matrices: np.ndarray) -> np.ndarray:
    """e^M for a stack (n, m, m) by scaling and squaring with a Taylor polynomial (Sec. 3 of
    [MolerVanLoan2003], from memory), all matrices together; scipy.linalg.expm (Pade) is
    the reference in the tests and the fallback for very large norms."""
    norm = np.abs(matrices).sum(axis=-2).max(initial=0.0)
    if not np.isfinite(norm) or norm > _FALLBACK_NORM:
        return expm(matrices)
    squarings = max(0, int(np.ceil(np.log2(norm / _SCALED_NORM)))) if norm > 0 else 0
    x = matrices / 2.0**squarings
    eye = np.broadcast_to(np.eye(matrices.shape[-1]), matrices.shape)
    out = eye + x / _TAYLOR_DEGREE
    for k in range(_TAYLOR_DEGREE - 1, 0, -1):  # Horner: I + X/k (I + X/(k+1) (...))
        out = eye + (x @ out) / k
    for _ in range(squarings):
        out = out @ out
    return out


#: keys of a body's ``initial`` table that change the initial covariance and nothing else: points
#: that differ only in these share one model (drift, diffusion, propagator)
_COVARIANCE_KEYS = ("squeeze_r", "squeeze_angle_rad", "occupation", "temperature_k")


def covariance_only(path: str) -> bool:
    """Whether the sweep key ``path`` changes only the initial covariance (not the model)."""
    tokens = split_path(path)
    return len(tokens) >= 4 and tokens[0] == "bodies" and tokens[2] == "initial" and tokens[3] in _COVARIANCE_KEYS


@dataclass(frozen=True)
class _Dynamics:
    """One point's model in the form the stacked propagation needs (scaled units)."""

    model: object
    drift: np.ndarray
    diffusion: np.ndarray
    tau: float
    cov0: np.ndarray
    times: np.ndarray


def _dynamics_of(base_data: dict, values: dict) -> _Dynamics:
    from gqsim.oscillators.channels import build_channels
    from gqsim.oscillators.model import build_model, initial_moments, symplectic_form
    from gqsim.oscillators.run import with_environment
    from gqsim.oscillators.setup import setup_from_protocol

    data = _copy(base_data)
    for path, value in values.items():
        set_path(data, path, value.item() if isinstance(value, np.generic) else value)
    model = build_model(setup_from_protocol(with_environment(data)))
    dynamics = build_channels(model)
    if model.anharmonic or not model.is_gaussian or np.any(dynamics.measurement):
        raise ValueError("outside the batched Gaussian scope")
    times = np.asarray(model.setup.times_s, dtype=float)
    steps = np.diff(times)
    if times[0] != 0.0 or (steps.size and np.ptp(steps) > 1e-12 * steps.max()):
        raise ValueError("non-uniform grid")
    drift = symplectic_form(2) @ model.stages[0].hamiltonian + dynamics.drift
    tau = (steps[0] if steps.size else 0.0) * model.scales.omega_unit_rad_s
    return _Dynamics(model, drift, dynamics.diffusion, tau, initial_moments(model)[1], times)


def _copy(node):
    if isinstance(node, dict):
        return {k: _copy(v) for k, v in node.items()}
    if isinstance(node, list):
        return [_copy(v) for v in node]
    return node


def _initial_states(base_data: dict, values: dict) -> tuple:
    """Each body's InitialState with the covariance-only sweep values applied (GqsimError if invalid)."""
    from gqsim.oscillators.setup import initial_state_from_table

    data = {"bodies": _copy(base_data["bodies"])}
    for path, value in values.items():
        set_path(data, path, value.item() if isinstance(value, np.generic) else value)
    return tuple(initial_state_from_table(body.get("initial", {}), f"bodies[{i}]")
                 for i, body in enumerate(data["bodies"]))


def evaluate_gaussian_points(spec, points: np.ndarray) -> tuple[dict, np.ndarray]:
    """Figures of the flat grid indices ``points`` (n,) and a (n,) mask of points left to the
    one-by-one route (models that fail to build, or fall outside the batched scope).

    Points that differ only in covariance-only keys (:func:`covariance_only`) share one model
    build and one propagator; their initial covariances are set per point with the same
    :func:`gqsim.oscillators.model.squeezed_thermal_covariance` that ``initial_moments`` uses.
    """
    from gqsim.oscillators.model import squeezed_thermal_covariance
    from gqsim.oscillators.run import EN_FLOOR
    from gqsim.sweeps.batched import first_near_max
    from gqsim.sweeps.gaussian_kernel import propagate_and_measure

    base = spec.base.to_dict()
    n = points.size
    figures = {"max_log_negativity": np.full(n, np.nan), "time_of_max_s": np.full(n, np.nan),
               "entangled": np.full(n, -1, dtype=np.int8), "min_pt_eigenvalue": np.full(n, np.nan),
               "entangling_rate_rad_s": np.full(n, np.nan), "dephasing_threshold_per_s": np.full(n, np.nan),
               "dominant_noise": np.full(n, -1, dtype=np.int8)}
    initial_paths = {a.path for a in spec.axes if covariance_only(a.path)}
    single = np.zeros(n, dtype=bool)
    groups: dict[tuple, int] = {}
    dynamics: list[_Dynamics] = []
    group_of = np.zeros(n, dtype=np.intp)
    states_cache: dict[tuple, tuple] = {}
    mode_params = np.zeros((n, 2, 3))  # (occupation, r, angle) of each body's one mode
    for j, p in enumerate(points):
        values = spec.point_values(p)
        key = tuple(v for path, v in values.items() if path not in initial_paths)
        g = groups.get(key)
        if g is None:
            try:
                dyn = _dynamics_of(base, values)
            except (GqsimError, ValueError):
                single[j] = True
                continue  # retried by the group's next point: the failure may be this point's initial state
            groups[key] = g = len(dynamics)
            dynamics.append(dyn)
        group_of[j] = g
        if initial_paths:
            ikey = tuple(v for path, v in values.items() if path in initial_paths)
            states = states_cache.get(ikey)
            if states is None:
                try:
                    states = _initial_states(base, {k: v for k, v in values.items() if k in initial_paths})
                except GqsimError:
                    single[j] = True
                    continue
                states_cache[ikey] = states
            omega = dynamics[g].model.scales.omega_ref_rad_s
            for b, init in enumerate(states):
                mode_params[j, b] = (init.occupation_at(float(omega[b])), *init.squeezing(0))
    ok = np.flatnonzero(~single)
    if ok.size == 0:
        return figures, single
    if len({dyn.times.size for dyn in dynamics}) != 1:  # differing grid lengths cannot share one stack
        single[ok] = True
        return figures, single
    m = 4
    drift = np.stack([dyn.drift for dyn in dynamics])
    block = np.zeros((len(dynamics), 2 * m, 2 * m))
    block[:, :m, :m] = -drift
    block[:, :m, m:] = np.stack([dyn.diffusion for dyn in dynamics])
    block[:, m:, m:] = np.swapaxes(drift, 1, 2)
    f = stacked_expm(block * np.array([dyn.tau for dyn in dynamics])[:, None, None])
    phi = np.swapaxes(f[:, m:, m:], 1, 2)
    q = phi @ f[:, :m, m:]
    q = 0.5 * (q + np.swapaxes(q, 1, 2))
    groups_ok = group_of[ok]
    cov0 = np.stack([dynamics[g].cov0 for g in groups_ok])
    if initial_paths:
        for b in range(2):
            cov0[:, 2 * b:2 * b + 2, 2 * b:2 * b + 2] = squeezed_thermal_covariance(*mode_params[ok, b].T)
    times = np.stack([dyn.times for dyn in dynamics])[groups_ok]
    want_min = "min_pt_eigenvalue" in spec.figures
    en, lam = propagate_and_measure(np.ascontiguousarray(phi[groups_ok]), np.ascontiguousarray(q[groups_ok]),
                                    cov0, times.shape[1], want_min)
    if not (np.all(np.isfinite(en)) and (not want_min or np.all(np.isfinite(lam)))):
        single[ok] = True  # let the engine itself report the overflow
        return figures, single
    k = first_near_max(en)
    rows = np.arange(ok.size)
    figures["max_log_negativity"][ok] = en[rows, k]
    figures["time_of_max_s"][ok] = times[rows, k]
    figures["entangled"][ok] = np.any(en > EN_FLOOR, axis=1).astype(np.int8)
    if want_min:
        figures["min_pt_eigenvalue"][ok] = lam
    return figures, single
