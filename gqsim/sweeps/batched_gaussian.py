"""Batched route for two trapped oscillators: the exact Gaussian covariance propagation of many
grid points at once.

Scope (checked by :func:`gaussian_support`; anything else runs point by point): family
``oscillators``, two bodies with one mode each, Gaussian initial states, one stage, no
conditional measurement, the quadratic model (``anharmonic_order`` <= 2), a time grid starting at
t = 0. Each point's model and open-system terms come from gqsim.oscillators itself (setup ->
model -> channels, the same code as ``gqsim.simulate``); only the evolution and the measures are
batched:

* one Van Loan block exponential per point for the step propagator (Theorem 1 of
  [VanLoan1978]): expm([[-A, D], [0, A^T]] dt) gives Phi = e^{A dt} and Q, evaluated for all
  points together by :func:`stacked_expm`; then sigma_{k+1} = Phi sigma_k Phi^T + Q
  for all points together (A = Omega H + A_open, scaled units, vacuum sigma = I);
* the log-negativity of all (point, time) covariances in one stacked call of
  gqsim.oscillators.measures.log_negativity (symplectic eigenvalues of the partial transpose,
  Eq. (16) of [VidalWerner2002] with Eq. (3) of [Simon2000]). The invariant formula
  nu~^2 = (D~ -+ sqrt(D~^2 - 4 det sigma))/2 is not used: near product states the discriminant
  cancels and E_N would carry errors of sqrt(eps) ~ 1e-8, above the weak-coupling signal;
* the smallest eigenvalue of sigma~ + i Omega (Eq. (8) of [Simon2000]) for min_pt_eigenvalue,
  as the one-by-one route reports it.
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import expm

from gqsim.errors import GqsimError
from gqsim.sweeps.spec import CERTIFICATION_FIGURES, set_path

__all__ = ["gaussian_support", "evaluate_gaussian_points", "stacked_expm"]


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


def _model_of(base_data: dict, values: dict):
    from gqsim.oscillators.channels import build_channels
    from gqsim.oscillators.model import build_model, initial_moments, symplectic_form
    from gqsim.oscillators.setup import setup_from_protocol

    data = _copy(base_data)
    for path, value in values.items():
        set_path(data, path, value.item() if isinstance(value, np.generic) else value)
    model = build_model(setup_from_protocol(data))
    dynamics = build_channels(model)
    if model.anharmonic or not model.is_gaussian or np.any(dynamics.measurement):
        raise ValueError("outside the batched Gaussian scope")
    times = np.asarray(model.setup.times_s, dtype=float)
    steps = np.diff(times)
    if times[0] != 0.0 or (steps.size and np.ptp(steps) > 1e-12 * steps.max()):
        raise ValueError("non-uniform grid")
    drift = symplectic_form(2) @ model.stages[0].hamiltonian + dynamics.drift
    tau = (steps[0] if steps.size else 0.0) * model.scales.omega_unit_rad_s
    return drift, dynamics.diffusion, tau, initial_moments(model)[1], times


def _copy(node):
    if isinstance(node, dict):
        return {k: _copy(v) for k, v in node.items()}
    if isinstance(node, list):
        return [_copy(v) for v in node]
    return node


def evaluate_gaussian_points(spec, points: np.ndarray) -> tuple[dict, np.ndarray]:
    """Figures of the flat grid indices ``points`` (n,) and a (n,) mask of points left to the
    one-by-one route (models that fail to build, or fall outside the batched scope)."""
    from gqsim.oscillators.measures import log_negativity, simon_min_eigenvalue
    from gqsim.oscillators.run import EN_FLOOR
    from gqsim.sweeps.batched import first_near_max

    base = spec.base.to_dict()
    n = points.size
    single = np.zeros(n, dtype=bool)
    pieces = []
    for j, p in enumerate(points):
        try:
            pieces.append(_model_of(base, spec.point_values(p)))
        except (GqsimError, ValueError):
            single[j] = True
            pieces.append(None)
    ok = np.flatnonzero(~single)
    figures = {"max_log_negativity": np.full(n, np.nan), "time_of_max_s": np.full(n, np.nan),
               "entangled": np.full(n, -1, dtype=np.int8), "min_pt_eigenvalue": np.full(n, np.nan),
               "entangling_rate_rad_s": np.full(n, np.nan), "dephasing_threshold_per_s": np.full(n, np.nan),
               "dominant_noise": np.full(n, -1, dtype=np.int8)}
    if ok.size == 0:
        return figures, single
    sizes = {pieces[j][4].size for j in ok}
    if len(sizes) != 1:  # differing grid lengths cannot share one stack: leave them one by one
        single[ok] = True
        return figures, single
    drift = np.stack([pieces[j][0] for j in ok])
    diffusion = np.stack([pieces[j][1] for j in ok])
    tau = np.array([pieces[j][2] for j in ok])
    cov = np.stack([pieces[j][3] for j in ok])
    times = np.stack([pieces[j][4] for j in ok])
    m = drift.shape[-1]
    block = np.zeros((ok.size, 2 * m, 2 * m))
    block[:, :m, :m] = -drift
    block[:, :m, m:] = diffusion
    block[:, m:, m:] = np.swapaxes(drift, 1, 2)
    f = stacked_expm(block * tau[:, None, None])
    phi = np.swapaxes(f[:, m:, m:], 1, 2)
    q = phi @ f[:, :m, m:]
    q = 0.5 * (q + np.swapaxes(q, 1, 2))
    phi_t = np.swapaxes(phi, 1, 2)
    covs = np.empty((ok.size, times.shape[1], m, m))
    covs[:, 0] = cov
    for k in range(1, times.shape[1]):
        cov = phi @ cov @ phi_t + q
        cov = 0.5 * (cov + np.swapaxes(cov, 1, 2))
        covs[:, k] = cov
    if not np.all(np.isfinite(covs)):
        single[ok] = True  # let the engine itself report the overflow
        return figures, single
    flat = covs.reshape(-1, m, m)
    en = log_negativity(flat, [1]).reshape(times.shape)
    k = first_near_max(en)
    rows = np.arange(ok.size)
    figures["max_log_negativity"][ok] = en[rows, k]
    figures["time_of_max_s"][ok] = times[rows, k]
    figures["entangled"][ok] = np.any(en > EN_FLOOR, axis=1).astype(np.int8)
    if "min_pt_eigenvalue" in spec.figures:
        lam = simon_min_eigenvalue(flat, [1]).reshape(en.shape)
        figures["min_pt_eigenvalue"][ok] = np.where(times > 0, lam, np.inf).min(axis=1)
    return figures, single
