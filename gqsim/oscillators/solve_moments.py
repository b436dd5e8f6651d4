"""Exact Gaussian engine: mean and covariance propagated with matrix exponentials.

It integrates, in the scaled units of :mod:`gqsim.oscillators.model` (hbar = 1,
tau = omega_unit t), the master equation written out in :mod:`gqsim.oscillators.channels`,

    d rho/dtau = -i [1/2 r^T H r - h^T r, rho] + sum_k D[c_k . r] rho (- i gamma_v/2 [x, {p, rho}]),

through its exact moment equations (sigma_jk = <{dr_j, dr_k}>, vacuum sigma = I):

    d rbar/dtau = A rbar - Omega h,    d sigma/dtau = A sigma + sigma A^T + D,

with A = Omega H + A_open piecewise constant over the stages. Over a step dt,

    sigma(t + dt) = Phi sigma(t) Phi^T + Q,   Phi = e^{A dt},   Q = int_0^dt e^{A s} D e^{A^T s} ds,

and Phi, Q come from one block exponential (Theorem 1 of [VanLoan1978], number from memory):
expm([[-A, D], [0, A^T]] dt) = [[., F12], [0, F22]] with F22 = Phi^T and Q = F22^T F12.
The mean's constant drive rides along in the same exponential (augmented drift [[A, b], [0, 0]]),
so each distinct (stage, step) costs one (2n+1)-block exponential. No ODE stepping: the result is
exact up to floating-point rounding. A uniform grid reuses one step propagator per stage, and the
recursion over the grid runs in a compiled (numba) kernel. With conditional position measurement
the covariance obeys the
Riccati equation d sigma/dtau = A sigma + sigma A^T + D - sigma M sigma, solved exactly by the
linear fractional form sigma = Y X^{-1}, d/dtau [X; Y] = [[-A^T, M], [D, A]] [X; Y]
(Sec. 3 of [Genoni2016] for the equation; the linearisation is standard Riccati theory,
common practice).

Equation numbers cited in this module are recalled, not checked against the papers (from memory).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit
from scipy.linalg import expm

from gqsim.errors import EngineError, PhysicsError
from gqsim.oscillators.channels import OpenDynamics
from gqsim.oscillators.model import OscillatorModel, initial_moments, symplectic_form

__all__ = ["GaussianTrajectory", "van_loan", "evolve_gaussian", "evolve_gaussian_precise", "ground_state_covariance",
           "condition_numbers", "CONDITION_LIMIT"]

#: extended-precision path: step lengths equal to this many digits share one cached propagator
#: (uniform grids computed with linspace differ in the last bits).
_STEP_KEY_DIGITS = 13


class GaussianTrajectory:
    """Means (n_times, 2n) and covariances (n_times, 2n, 2n) on the output grid, scaled units."""

    def __init__(self, times_s: np.ndarray, means: np.ndarray, covariances: np.ndarray):
        self.times_s = times_s
        self.means = means
        self.covariances = covariances
        #: covariances in the local interaction frame (same entanglement, well conditioned);
        #: equal to ``covariances`` on the float64 path
        self.interaction_covariances = covariances


def van_loan(drift: np.ndarray, diffusion: np.ndarray, dt: float) -> tuple[np.ndarray, np.ndarray]:
    """Phi = e^{A dt} and Q = int_0^dt e^{A s} D e^{A^T s} ds.

    Block-exponential identity, Theorem 1 of [VanLoan1978] (theorem number from memory).

    Parameters
    ----------
    drift : (m, m) A
    diffusion : (m, m) D, symmetric
    dt : step in the model's time unit
    """
    m = drift.shape[0]
    block = np.zeros((2 * m, 2 * m))
    block[:m, :m] = -drift
    block[:m, m:] = diffusion
    block[m:, m:] = drift.T
    f = expm(block * dt)
    phi = f[m:, m:].T
    q = phi @ f[:m, m:]
    return phi, 0.5 * (q + q.T)


def _mean_step(drift: np.ndarray, force: np.ndarray, dt: float) -> tuple[np.ndarray, np.ndarray]:
    """Exact affine step rbar -> Phi rbar + u for d rbar/dt = A rbar + force."""
    m = drift.shape[0]
    aug = np.zeros((m + 1, m + 1))
    aug[:m, :m] = drift
    aug[:m, m] = force
    f = expm(aug * dt)
    return f[:m, :m], f[:m, m]


@njit(cache=True)
def _run_plan(phis_m, us, phis, phis_t, qs, plan, ends, mean0, cov0):  # pragma: no cover - compiled
    """sigma <- Phi sigma Phi^T + Q and rbar <- Phi_m rbar + u along ``plan``; record after each ``ends``."""
    m = cov0.shape[0]
    means = np.empty((ends.size, m))
    covs = np.empty((ends.size, m, m))
    mean = mean0.copy()
    cov = cov0.copy()
    piece = 0
    for k in range(ends.size):
        while piece < ends[k]:
            j = plan[piece]
            mean = phis_m[j] @ mean + us[j]
            cov = phis[j] @ cov @ phis_t[j] + qs[j]
            cov = 0.5 * (cov + cov.T)
            piece += 1
        means[k] = mean
        covs[k] = cov
    return means, covs


def _run_plan_riccati(ordered, cache, plan, ends, mean, cov, n):
    means = np.empty((len(ends), 2 * n))
    covs = np.empty((len(ends), 2 * n, 2 * n))
    piece = 0
    for k, end in enumerate(ends):
        while piece < end:
            (phi_m, u), (_, f) = cache[ordered[plan[piece]]]
            mean = phi_m @ mean + u
            x = f[:2 * n, :2 * n] + f[:2 * n, 2 * n:] @ cov
            y = f[2 * n:, :2 * n] + f[2 * n:, 2 * n:] @ cov
            cov = np.linalg.solve(x.T, y.T).T
            cov = 0.5 * (cov + cov.T)
            piece += 1
        means[k] = mean
        covs[k] = cov
    return means, covs


def _riccati_step(drift, diffusion, meas, dt):
    m = drift.shape[0]
    block = np.zeros((2 * m, 2 * m))
    block[:m, :m] = -drift.T
    block[:m, m:] = meas
    block[m:, :m] = diffusion
    block[m:, m:] = drift
    return expm(block * dt)


def _round_steps(dt: np.ndarray) -> np.ndarray:
    """Round step lengths to 40 mantissa bits (~12 digits) so equal steps share one propagator."""
    mant, expo = np.frexp(dt)
    return np.ldexp(np.round(mant * 2.0**40) / 2.0**40, expo)


def _make_plan(times: np.ndarray, boundaries: np.ndarray, step):
    """Indices of cached step propagators for every piece, and the piece count after each time.

    Intervals inside one stage are one piece (vectorised); intervals that cross stage boundaries
    are split by :func:`_pieces`. A uniform grid (linspace, equal up to rounding) uses one step.
    """
    starts = np.concatenate(([0.0], times[:-1]))
    durations = times - starts
    interior = durations[1:]
    if interior.size > 1 and np.ptp(interior) <= 1e-12 * interior.mean():
        durations = durations.copy()
        durations[1:] = interior.mean()
    tiny = 1e-14 * boundaries[-1]
    last = len(boundaries) - 2
    s_start = np.clip(np.searchsorted(boundaries, starts + tiny, side="right") - 1, 0, last)
    s_stop = np.clip(np.searchsorted(boundaries, times - tiny, side="right") - 1, 0, last)
    rounded = _round_steps(np.where(durations > 0, durations, 1.0))
    active = durations > tiny
    if np.all(s_start[active] == s_stop[active]):
        # no interval crosses a stage boundary: vectorised plan
        pairs = np.stack([s_start[active].astype(float), rounded[active]], axis=1)
        unique, inverse = np.unique(pairs, axis=0, return_inverse=True)
        keys = {}
        for stage, dt in unique:
            keys[(int(stage), float(dt))] = len(keys)
            step(int(stage), float(dt))
        return list(np.ravel(inverse)), list(np.cumsum(active)), keys
    keys: dict = {}
    plan: list[int] = []
    ends: list[int] = []
    for k in range(times.size):
        if durations[k] <= tiny:
            pass
        elif s_start[k] == s_stop[k]:
            key = (int(s_start[k]), float(rounded[k]))
            if key not in keys:
                keys[key] = len(keys)
                step(*key)
            plan.append(keys[key])
        else:
            for stage, dt in _pieces(boundaries, float(starts[k]), float(times[k])):
                key = (stage, float(_round_steps(np.array([dt]))[0]))
                if key not in keys:
                    keys[key] = len(keys)
                    step(*key)
                plan.append(keys[key])
        ends.append(len(plan))
    return plan, ends, keys


def _pieces(boundaries: np.ndarray, start: float, stop: float):
    """Split [start, stop] at stage boundaries into (stage index, length) pieces."""
    out = []
    t = start
    n_stages = len(boundaries) - 1
    tiny = 1e-14 * boundaries[-1]
    while stop - t > tiny:
        s = int(np.searchsorted(boundaries, t, side="right") - 1)
        s = min(max(s, 0), n_stages - 1)
        end = min(stop, boundaries[s + 1])
        if end - t <= tiny:  # t sits on a boundary up to rounding: move to the next stage
            s = min(s + 1, n_stages - 1)
            end = min(stop, boundaries[s + 1])
        out.append((s, end - t))
        t = end
    return out


def evolve_gaussian(model: OscillatorModel, dynamics: OpenDynamics,
                    times_s: np.ndarray | None = None, *, initial: tuple | None = None) -> GaussianTrajectory:
    """Propagate the initial Gaussian state of ``model`` over ``times_s`` [s] exactly.

    Returns a :class:`GaussianTrajectory` in the scaled units of the model (quadratures x, p
    with [x, p] = i; sigma_jk = <{dr_j, dr_k}>, vacuum sigma = I). ``initial = (mean, cov)``
    propagates given first and second moments instead (the moment equations hold for any
    state under quadratic dynamics; the Fock engine uses this to size its cutoff).
    """
    if initial is None and not all(b.initial.kind == "gaussian" for b in model.setup.bodies):
        raise PhysicsError("bodies.initial.kind", [b.initial.kind for b in model.setup.bodies],
                           "the Gaussian engine needs Gaussian initial states; use solver.engine = \"fock\"")
    if initial is None and model.anharmonic:
        raise PhysicsError("solver.anharmonic_order", model.setup.solver.anharmonic_order,
                           "cubic/quartic terms are not Gaussian; use solver.engine = \"fock\"")
    times = np.asarray(model.setup.times_s if times_s is None else times_s, dtype=float)
    n = model.n_modes
    omega = symplectic_form(n)
    unit = model.scales.omega_unit_rad_s
    boundaries = model.stage_boundaries_s()
    drifts = [omega @ st.hamiltonian + dynamics.drift for st in model.stages]
    forces = [-omega @ st.drive for st in model.stages]  # dr/dtau = Omega grad H
    conditional = bool(np.any(dynamics.measurement))
    cache: dict = {}

    def step(stage: int, dt: float):
        key = (stage, dt)
        if key not in cache:
            tau = key[1] * unit
            a = drifts[stage]
            if conditional:
                cov_step = ("riccati", _riccati_step(a, dynamics.diffusion, dynamics.measurement, tau))
                cache[key] = (_mean_step(a, forces[stage], tau), cov_step)
            else:
                # one block exponential for both moments: the affine drift [[A, b], [0, 0]] carries
                # the mean's drive, and the top-left block of its Van Loan integral is Q
                m = a.shape[0]
                aug = np.zeros((m + 1, m + 1))
                aug[:m, :m] = a
                aug[:m, m] = forces[stage]
                diff = np.zeros((m + 1, m + 1))
                diff[:m, :m] = dynamics.diffusion
                phi_aug, q_aug = van_loan(aug, diff, tau)
                phi = phi_aug[:m, :m]
                cache[key] = ((phi, phi_aug[:m, m]), ("lyapunov", phi, q_aug[:m, :m]))
        return cache[key]

    mean, cov = initial_moments(model) if initial is None else (np.array(initial[0]), np.array(initial[1]))
    # plan: every piece of every interval as an index into the cached step propagators
    plan, ends, keys = _make_plan(times, boundaries, step)
    ordered = sorted(keys, key=keys.get)
    if conditional:
        means, covs = _run_plan_riccati(ordered, cache, plan, ends, mean, cov, n)
    else:
        phis_m = np.array([cache[k][0][0] for k in ordered])
        us = np.array([cache[k][0][1] for k in ordered])
        phis = np.array([cache[k][1][1] for k in ordered])
        qs = np.array([cache[k][1][2] for k in ordered])
        phis_t = np.ascontiguousarray(np.transpose(phis, (0, 2, 1)))
        means, covs = _run_plan(phis_m, us, phis, phis_t, qs, np.array(plan, dtype=np.int64),
                                np.array(ends, dtype=np.int64), mean, cov)
    if not (np.all(np.isfinite(covs)) and np.all(np.isfinite(means))):
        raise EngineError("gaussian engine: non-finite covariance (an inverted or free stage grew the state "
                          "beyond floating-point range); shorten the stage")
    return GaussianTrajectory(times, means, covs)


def ground_state_covariance(hamiltonian: np.ndarray) -> np.ndarray:
    """Covariance (vacuum units) of the ground state of H = 1/2 x^T V x + 1/2 p^T T p.

    ``hamiltonian`` is the (2n, 2n) matrix of a stage (interleaved x, p ordering, no x-p terms).
    With q = T^{-1/2} x, pi = T^{1/2} p the Hamiltonian becomes 1/2 pi^2 + 1/2 q^T W q,
    W = T^{1/2} V T^{1/2}, whose ground state has Var(q) = W^{-1/2}/2, Var(pi) = W^{1/2}/2
    (normal modes, Ch. 6 of [Goldstein2002]; Gaussian ground state, [Serafini2017]). Raises
    PhysicsError when H is not positive definite (no ground state).
    """
    v = hamiltonian[0::2, 0::2]
    t = hamiltonian[1::2, 1::2]
    if np.any(hamiltonian[0::2, 1::2]):
        raise PhysicsError("hamiltonian", "x-p terms", "ground_state_covariance needs H without x-p cross terms")
    tw, tu = np.linalg.eigh(t)
    if np.any(tw <= 0):
        raise PhysicsError("hamiltonian", "kinetic block", "must be positive definite")
    t_half = tu @ np.diag(np.sqrt(tw)) @ tu.T
    w = t_half @ v @ t_half
    ww, wu = np.linalg.eigh(0.5 * (w + w.T))
    if np.any(ww <= 0):
        raise PhysicsError("hamiltonian", "potential block", "has a non-positive normal mode: no ground state")
    w_inv_half = wu @ np.diag(ww ** -0.5) @ wu.T
    w_half = wu @ np.diag(ww ** 0.5) @ wu.T
    t_inv_half = tu @ np.diag(tw ** -0.5) @ tu.T
    n = v.shape[0]
    cov = np.zeros((2 * n, 2 * n))
    cov[0::2, 0::2] = t_half @ w_inv_half @ t_half
    cov[1::2, 1::2] = t_inv_half @ w_half @ t_inv_half
    return 0.5 * (cov + cov.T)


#: a covariance with condition number above this loses entanglement information in float64
#: (symplectic eigenvalues then carry absolute errors ~ condition x 1e-16, above the 1e-11 E_N
#: resolution): such runs are repeated in the interaction frame with extended precision.
CONDITION_LIMIT = 1e4


def condition_numbers(covs: np.ndarray) -> np.ndarray:
    """Condition number of every covariance in a stack (n_times,)."""
    w = np.linalg.eigvalsh(covs)
    # a smallest eigenvalue at or below float64 resolution of the largest means "beyond float64 range"
    resolved = w[:, 0] > w[:, -1] * np.finfo(float).eps
    return np.where(resolved, w[:, -1] / np.where(resolved, w[:, 0], 1.0), np.inf)


def _local_generator(full: np.ndarray) -> np.ndarray:
    """Block-diagonal (per-mode 2x2) part of a drift matrix."""
    out = np.zeros_like(full)
    for i in range(0, full.shape[0], 2):
        out[i:i + 2, i:i + 2] = full[i:i + 2, i:i + 2]
    return out


def _frame_growth(model: OscillatorModel, times: np.ndarray) -> float:
    """Largest norm of the local free-motion propagator L(t) over the grid (float64 estimate)."""
    omega = symplectic_form(model.n_modes)
    unit = model.scales.omega_unit_rad_s
    boundaries = model.stage_boundaries_s()
    frame = np.eye(2 * model.n_modes)
    worst, t = 1.0, 0.0
    for target in times:
        for stage, dt in _pieces(boundaries, t, target):
            frame = expm(_local_generator(omega @ model.stages[stage].hamiltonian) * dt * unit) @ frame
        worst = max(worst, float(np.linalg.norm(frame, 2)))
        t = target
    return worst


def evolve_gaussian_precise(model: OscillatorModel, dynamics: OpenDynamics, times_s: np.ndarray | None = None,
                            *, digits: int | None = None) -> GaussianTrajectory:
    """Exact propagation for ill-conditioned states, in the local interaction frame, with ``digits`` digits.

    Free fall and inverted stages shear a wave packet so strongly (condition numbers ~ (omega t)^4)
    that a float64 covariance no longer holds the correlations that carry entanglement. Here the
    covariance is kept in the frame of the local, uncoupled, noiseless motion L(t) = exp(A_0 t)
    (A_0 the per-mode blocks of Omega H): sigma = L sigma_I L^T. The step is the same Van Loan
    result as :func:`evolve_gaussian` (Theorem 1 of [VanLoan1978], number from memory),
    sigma_I' = M sigma_I M^T + L'^{-1} Q L'^{-T},  M = L'^{-1} Phi L,  L' = exp(A_0 dt) L,
    evaluated in ``digits``-digit arithmetic (mpmath) and rounded at the end. Because L is a local
    symplectic map, every entanglement measure of sigma equals that of sigma_I, which stays
    well conditioned. The trajectory carries both: ``covariances`` (lab frame, each entry correct
    to float64 rounding) and ``interaction_covariances``.
    """
    import mpmath

    if np.any(dynamics.measurement):
        raise PhysicsError("solver.conditional", True,
                           "conditional measurement is not available for strongly sheared (free/inverted) states")
    times = np.asarray(model.setup.times_s if times_s is None else times_s, dtype=float)
    n = model.n_modes
    omega = symplectic_form(n)
    unit = model.scales.omega_unit_rad_s
    boundaries = model.stage_boundaries_s()
    if digits is None:
        # rounding in sigma_I ~ 10^-dps ||L||^4: keep it below 1e-25
        digits = 25 + int(math.ceil(4 * math.log10(_frame_growth(model, times))))
    ctx = mpmath.mp.clone()
    ctx.dps = digits
    mat = ctx.matrix
    omega_mp = mat(omega.tolist())
    hams = [omega @ st.hamiltonian for st in model.stages]
    drifts = [h + dynamics.drift for h in hams]
    forces = [-omega @ st.drive for st in model.stages]
    dim = 2 * n
    cache: dict = {}

    def to_np(m) -> np.ndarray:
        return np.array([[float(m[i, j]) for j in range(m.cols)] for i in range(m.rows)])

    def step(stage: int, dt: float):
        key = (stage, float(f"{dt:.{_STEP_KEY_DIGITS}e}"))
        if key not in cache:
            tau = ctx.mpf(key[1]) * ctx.mpf(unit)
            a = mat(drifts[stage].tolist())
            block = ctx.zeros(2 * dim, 2 * dim)
            for i in range(dim):
                for j in range(dim):
                    block[i, j] = -a[i, j] * tau
                    block[i, dim + j] = ctx.mpf(dynamics.diffusion[i, j]) * tau
                    block[dim + i, dim + j] = a[j, i] * tau
            f = ctx.expm(block)
            phi = f[dim:, dim:].T
            q = phi * f[:dim, dim:]
            q = (q + q.T) / 2
            local = ctx.expm(mat(_local_generator(hams[stage]).tolist()) * tau)
            cache[key] = (_mean_step(drifts[stage], forces[stage], key[1] * unit), phi, q, local)
        return cache[key]

    def inverse_symplectic(m):
        return -omega_mp * m.T * omega_mp  # S^{-1} = -Omega S^T Omega for symplectic S (exact)

    mean, cov0 = initial_moments(model)
    sig_i = mat(cov0.tolist())
    frame = ctx.eye(dim)
    means = np.empty((times.size, dim))
    covs = np.empty((times.size, dim, dim))
    covs_i = np.empty((times.size, dim, dim))
    t = 0.0
    for k, target in enumerate(times):
        for stage, dt in _pieces(boundaries, t, target):
            (phi_m, u), phi, q, local = step(stage, dt)
            mean = phi_m @ mean + u
            new_frame = local * frame
            inv = inverse_symplectic(new_frame)
            m = inv * phi * frame
            sig_i = m * sig_i * m.T + inv * q * inv.T
            sig_i = (sig_i + sig_i.T) / 2
            frame = new_frame
        t = target
        means[k] = mean
        covs_i[k] = to_np(sig_i)
        covs[k] = to_np(frame * sig_i * frame.T)
    if not (np.all(np.isfinite(covs)) and np.all(np.isfinite(covs_i))):
        raise EngineError("gaussian engine (interaction frame): non-finite covariance; shorten the stage")
    traj = GaussianTrajectory(times, means, covs)
    traj.interaction_covariances = covs_i
    traj.digits = digits
    return traj
