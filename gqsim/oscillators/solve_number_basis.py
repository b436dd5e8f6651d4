"""Fock engine: the oscillator model in a truncated number basis, integrated by QuTiP mesolve.

For what the Gaussian engine cannot do: the cubic and quartic terms of the pair potential
(to test the second-order approximation) and non-Gaussian initial states (Fock, cat). It
integrates the master equation of :mod:`gqsim.oscillators.channels` (scaled units, hbar = 1)

    d rho/dtau = -i [H, rho] + sum_k D[L_k] rho (- i gamma_v/2 [x, {p, rho}]),
    H = 1/2 r^T H r + sum_pairs (order-3 and order-4 terms of V(|R + u_b - u_a|), AnharmonicTerm),

with x = (a + a^dag)/sqrt2, p = -i(a - a^dag)/sqrt2 truncated at ``cutoff`` phonons per mode,
through :mod:`gqsim.oscillators.qutip_adapter`. It works in the frame centred on the static
equilibrium: the constant pair force only shifts the mean (no effect on entanglement for the
quadratic part), so protocol displacements are refused here.

Cutoff: chosen from the largest mean phonon number n_max of any mode over the run (second
moments propagated exactly by the Gaussian moment equations, which hold for any state under
quadratic dynamics) so that a squeezed-vacuum-like tail (n/(n+1))^(N/2) falls below the
tolerance; then verified by a second run at a larger cutoff. The reported truncation error is
max_t |E_N(N) - E_N(N')|; a :class:`TruncationWarning` is raised when a mode's top level holds
more population than ``solver.fock_top_population``.

Equation numbers cited in this module are recalled, not checked against the papers (from memory).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
from scipy import sparse
from scipy.linalg import expm

from gqsim.errors import ConvergenceError, PhysicsError
from gqsim.oscillators import measures
from gqsim.oscillators.channels import OpenDynamics
from gqsim.oscillators.solve_moments import evolve_gaussian
from gqsim.oscillators.model import OscillatorModel
from gqsim.oscillators.qutip_adapter import evolve_density_matrix

__all__ = ["TruncationWarning", "FockRun", "evolve_fock", "single_mode_state", "fock_log_negativity",
           "MAX_HILBERT_DIMENSION"]

#: largest total Hilbert-space dimension the Fock engine accepts (the Liouvillian has D^2 rows).
MAX_HILBERT_DIMENSION = 1600


class TruncationWarning(UserWarning):
    """The top Fock level of a mode holds more population than the set threshold."""


@dataclass(frozen=True)
class FockRun:
    """Series and summary of a converged Fock-engine run."""

    series: dict
    summary: dict
    notes: tuple[str, ...] = field(default_factory=tuple)


def _ladder(n: int) -> np.ndarray:
    return np.diag(np.sqrt(np.arange(1, n, dtype=float)), k=1)


def single_mode_state(initial, occupation: float, cutoff: int, mode: int = 0) -> np.ndarray:
    """Density matrix (cutoff, cutoff) of one mode's initial state, renormalised after truncation.

    Gaussian: S(xi) rho_th S(xi)^dag with S(xi) = exp((xi* a^2 - xi a^dag^2)/2), xi = r e^{2 i theta}
    (so theta = 0 squeezes x), built in a larger basis and truncated (Eq. (x) of [Serafini2017],
    from memory). Fock: |n><n|. Cat: |alpha> +- |-alpha> with coherent amplitudes
    e^{-alpha^2/2} alpha^n / sqrt(n!) (Glauber; textbook).
    """
    if initial.kind == "fock":
        if initial.fock_n >= cutoff:
            raise ConvergenceError(f"fock engine: cutoff {cutoff} cannot hold the Fock state n = {initial.fock_n}")
        rho = np.zeros((cutoff, cutoff))
        rho[initial.fock_n, initial.fock_n] = 1.0
        return rho
    if initial.kind == "cat":
        alpha = initial.cat_amplitude
        n = np.arange(cutoff)
        coeff = np.exp(-alpha**2 / 2 + n * math.log(alpha) - 0.5 * np.array([math.lgamma(k + 1) for k in n])) \
            if alpha > 0 else (n == 0).astype(float)
        keep = (n % 2 == 0) if initial.cat_parity == "even" else (n % 2 == 1)
        psi = np.where(keep, coeff, 0.0)
        psi = psi / np.linalg.norm(psi)
        return np.outer(psi, psi)
    r, angle = initial.squeezing(mode)
    n_bar_total = (2 * occupation + 1) * math.cosh(2 * r) / 2
    big = max(2 * cutoff, cutoff + 40 + int(20 * n_bar_total))
    ratio = occupation / (occupation + 1) if occupation > 0 else 0.0
    pops = (1 - ratio) * ratio ** np.arange(big) if occupation > 0 else (np.arange(big) == 0).astype(float)
    rho = np.diag(pops).astype(complex)
    if r > 0:
        a = _ladder(big)
        xi = r * np.exp(2j * angle)
        s = expm(0.5 * (np.conj(xi) * a @ a - xi * a.T @ a.T))
        rho = s @ rho @ s.conj().T
    rho = rho[:cutoff, :cutoff]
    return rho / np.trace(rho).real


def _embed_sparse(op, which: int, n_modes: int, cutoff: int):
    out = sparse.identity(1, format="csr")
    for m in range(n_modes):
        out = sparse.kron(out, op if m == which else sparse.identity(cutoff), format="csr")
    return out


def _partial_transpose(rho: np.ndarray, dims: list[int], transpose: list[int]) -> np.ndarray:
    n = len(dims)
    t = rho.reshape(dims + dims)
    perm = list(range(2 * n))
    for m in transpose:
        perm[m], perm[n + m] = n + m, m
    return t.transpose(perm).reshape(rho.shape)


def fock_log_negativity(rho: np.ndarray, dims: list[int], modes_b: list[int]) -> float:
    """E_N = ln ||rho^{T_B}||_1 [nats] (Eq. (3) of [VidalWerner2002], natural log)."""
    ev = np.linalg.eigvalsh(_partial_transpose(rho, dims, modes_b))
    return float(math.log(np.sum(np.abs(ev))))


def _entropy(rho: np.ndarray) -> float:
    ev = np.clip(np.linalg.eigvalsh(rho), 0.0, None)
    ev = ev[ev > 0]
    return float(-np.sum(ev * np.log(ev)))


def _reduce(rho: np.ndarray, dims: list[int], keep: list[int]) -> np.ndarray:
    n = len(dims)
    t = rho.reshape(dims + dims)
    letters = "abcdefghijklmnop"
    ket = [letters[m] for m in range(n)]
    bra = [letters[m] if m not in keep else letters[m].upper() for m in range(n)]
    out = "".join(letters[m] for m in keep) + "".join(letters[m].upper() for m in keep)
    red = np.einsum("".join(ket) + "".join(bra) + "->" + out, t)
    d = int(np.prod([dims[m] for m in keep]))
    return red.reshape(d, d)


def _check_supported(model: OscillatorModel, dynamics: OpenDynamics) -> None:
    for body in model.setup.bodies:
        if any(body.initial.displacement_m) or any(body.initial.velocity_m_s):
            raise PhysicsError(f"bodies[{body.label}].initial.displacement_m", list(body.initial.displacement_m),
                               "the fock engine evolves states centred on the static equilibrium; remove the "
                               "displacement/velocity or use the gaussian engine")
    if np.any(dynamics.measurement):
        raise PhysicsError("solver.conditional", True, "conditional measurement runs only on the gaussian engine")


def _initial_moments_of_states(model: OscillatorModel, states: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    n = model.n_modes
    cov = np.zeros((2 * n, 2 * n))
    for i, rho in enumerate(states):
        d = rho.shape[0]
        a = _ladder(d)
        x = (a + a.T) / math.sqrt(2)
        p = -1j * (a - a.T) / math.sqrt(2)
        ops = [x, p]
        mean = [np.trace(rho @ o).real for o in ops]
        for j in range(2):
            for k in range(2):
                anti = ops[j] @ ops[k] + ops[k] @ ops[j]
                cov[2 * i + j, 2 * i + k] = np.trace(rho @ anti).real - 2 * mean[j] * mean[k]
    return np.zeros(2 * n), cov


def _mode_states(model: OscillatorModel, cutoff: int) -> list[np.ndarray]:
    states = []
    i = 0
    for body in model.setup.bodies:
        for k, _axis in enumerate(body.modes):
            gaussian = body.initial.kind == "gaussian"
            occ = body.initial.occupation_at(model.scales.omega_ref_rad_s[i]) if gaussian else 0.0
            states.append(single_mode_state(body.initial, occ, cutoff, k))
            i += 1
    return states


def _support(rho: np.ndarray, tail: float) -> int:
    """Smallest N such that the populations above level N - 1 sum to less than ``tail``."""
    pops = np.clip(np.real(np.diag(rho)), 0.0, None)
    above = np.cumsum(pops[::-1])[::-1]  # above[k] = population in levels >= k
    idx = np.nonzero(above < tail)[0]
    return int(idx[0]) if idx.size else len(pops)


def estimate_cutoff(model: OscillatorModel, dynamics: OpenDynamics, tolerance: float) -> tuple[int, float]:
    """Starting cutoff for the convergence loop; returns (cutoff, largest mean phonon number).

    E_N of a nearly pure state depends on amplitudes, not populations (E_N = 2 ln sum sqrt(lambda_k)
    over Schmidt coefficients), so the discarded population must stay below tolerance^2. Levels
    are counted from the initial state's own support (Fock/cat inputs), plus a thermal tail
    (n/(n+1))^N for the phonons the dynamics adds (n = growth of the largest mean phonon number
    over the run, second moments propagated exactly by the Gaussian moment equations). This is a
    starting guess only; the cutoff comparison decides.
    """
    probe = _mode_states(model, 40)
    _, cov0 = _initial_moments_of_states(model, probe)
    traj = evolve_gaussian(model, dynamics, initial=(np.zeros(2 * model.n_modes), cov0))
    covs = traj.covariances
    phonons = np.stack([(covs[:, 2 * i, 2 * i] + covs[:, 2 * i + 1, 2 * i + 1]) / 4 - 0.5
                        for i in range(model.n_modes)], axis=1)
    n_max = float(phonons.max())
    tail = tolerance**2
    support = max(_support(rho, tail) for rho in probe)
    gaussian_start = all(b.initial.kind == "gaussian" for b in model.setup.bodies)
    added = n_max if gaussian_start else max(0.0, float((phonons - phonons[0]).max()))
    levels = math.log(tail) / math.log(added / (added + 1.0)) if added > 0 else 0.0
    start = support + int(math.ceil(levels)) if not gaussian_start else max(support, int(math.ceil(levels)))
    return max(start, 3), n_max


def _run(model: OscillatorModel, dynamics: OpenDynamics, cutoff: int) -> dict:
    n = model.n_modes
    dims = [cutoff] * n
    a = sparse.csr_matrix(_ladder(cutoff))
    x1 = (a + a.T) / math.sqrt(2)
    p1 = -1j * (a - a.T) / math.sqrt(2)
    xs = [_embed_sparse(x1, m, n, cutoff) for m in range(n)]
    ps = [_embed_sparse(p1, m, n, cutoff) for m in range(n)]
    r_ops = [op for m in range(n) for op in (xs[m], ps[m])]
    jumps = [sum(c * op for c, op in zip(row, r_ops) if c != 0) for row in dynamics.jumps]
    brownian = [(float(g), xs[m], ps[m]) for m, g in enumerate(dynamics.brownian_rate) if g > 0]
    anti = {(j, k): (r_ops[j] @ r_ops[k] + r_ops[k] @ r_ops[j]).tocsr()
            for j in range(2 * n) for k in range(j, 2 * n)}
    side_a = [i for label in model.setup.side_a for i in model.body_modes(label)]
    side_b = [i for i in range(n) if i not in side_a]
    rho = _mode_states(model, cutoff)[0]
    for st in _mode_states(model, cutoff)[1:]:
        rho = np.kron(rho, st)
    records: dict[str, list] = {"log_negativity": [], "cov": [], "purity": [], "mutual_information": [], "top": []}

    def expect(op, state) -> float:
        if state.ndim == 1:
            return float(np.vdot(state, op @ state).real)
        return float(op.multiply(state.T).sum().real)  # tr(rho op)

    def on_state(state: np.ndarray) -> None:
        if state.ndim == 1:
            # pure state: Schmidt decomposition across A | B gives E_N = 2 ln sum s_k (Vidal & Werner 2002)
            # and I(A:B) = 2 S(A); far cheaper than eigen-decompositions of rho
            psi = state.reshape(dims).transpose(side_a + side_b)
            da = cutoff ** len(side_a)
            s = np.linalg.svd(psi.reshape(da, -1), compute_uv=False)
            p = s**2 / np.sum(s**2)
            records["log_negativity"].append(float(2 * math.log(np.sum(np.sqrt(p)))))
            records["purity"].append(1.0)
            p = p[p > 0]
            records["mutual_information"].append(float(-2 * np.sum(p * np.log(p))))
            prob = np.abs(state.reshape(dims)) ** 2
            records["top"].append([float(np.take(prob, -1, axis=m).sum()) for m in range(n)])
        else:
            state = 0.5 * (state + state.conj().T)
            records["log_negativity"].append(fock_log_negativity(state, dims, side_b))
            records["purity"].append(float(np.vdot(state, state).real))
            records["mutual_information"].append(_entropy(_reduce(state, dims, side_a))
                                                 + _entropy(_reduce(state, dims, side_b)) - _entropy(state))
            records["top"].append([float(_reduce(state, dims, [m])[-1, -1].real) for m in range(n)])
        mean = np.array([expect(op, state) for op in r_ops])
        cov = np.empty((2 * n, 2 * n))
        for (j, k), op in anti.items():
            cov[j, k] = cov[k, j] = expect(op, state) - 2 * mean[j] * mean[k]
        records["cov"].append(cov)

    unit = model.scales.omega_unit_rad_s
    times = model.setup.times_s
    bounds = model.stage_boundaries_s()
    last_index = len(model.stages) - 1
    for s_index, stage in enumerate(model.stages):
        t0, t1 = bounds[s_index], bounds[s_index + 1]
        upper = times <= t1 if s_index < last_index else np.ones(times.shape, dtype=bool)
        lower = times >= t0 if s_index == 0 else times > t0
        inside = times[lower & upper]
        ham = sum(0.5 * stage.hamiltonian[j, k] * (r_ops[j] @ r_ops[k])
                  for j in range(2 * n) for k in range(2 * n) if stage.hamiltonian[j, k] != 0)
        for term in model.anharmonic:
            ham = ham + term.energy(xs, multiply=lambda p, q: p @ q)
        ham = (0.5 * (ham + ham.conj().T)).tocsr()
        later = inside[inside > t0]
        end = [] if later.size and later[-1] >= t1 else [t1]
        grid = np.concatenate(([t0], later, end))
        # which grid points are output times: t0 only if it is one (first stage), then every later
        # output time, never the appended stage end
        flags = [bool(inside.size and inside[0] == t0)] + [True] * later.size + [False] * len(end)
        counter = iter(flags)

        def keep(state, _flags=counter):
            if next(_flags):
                on_state(state)

        rho = evolve_density_matrix(ham, jumps, brownian, rho, dims, grid * unit, keep,
                                    rtol=model.setup.solver.rtol, atol=model.setup.solver.atol)
    out = {key: np.asarray(val) for key, val in records.items()}
    if out["log_negativity"].shape[0] != times.size:
        raise ConvergenceError(f"fock engine: recorded {out['log_negativity'].shape[0]} states for {times.size} times")
    return out


def evolve_fock(model: OscillatorModel, dynamics: OpenDynamics) -> FockRun:
    """Run the Fock engine with automatic cutoff choice and a convergence check."""
    _check_supported(model, dynamics)
    opts = model.setup.solver
    n = model.n_modes
    cutoff, n_max = estimate_cutoff(model, dynamics, opts.fock_tolerance)
    step = lambda c: max(2, c // 4)  # noqa: E731 - second cutoff for the convergence check
    if (cutoff + step(cutoff)) ** n > MAX_HILBERT_DIMENSION or cutoff + step(cutoff) > opts.fock_max_cutoff:
        raise ConvergenceError(f"fock engine: the state reaches {n_max:.3g} phonons per mode, which needs a cutoff "
                               f"of about {cutoff} for {n} modes (Hilbert dimension {cutoff**n}); the limit is "
                               f"fock_max_cutoff = {opts.fock_max_cutoff}, dimension {MAX_HILBERT_DIMENSION}. "
                               "Use the gaussian engine")
    low = _run(model, dynamics, cutoff)
    err = float("nan")  # no comparison made yet
    while True:
        high_cut = cutoff + step(cutoff)
        if high_cut ** n > MAX_HILBERT_DIMENSION or high_cut > opts.fock_max_cutoff:
            change = "is not yet checked" if np.isnan(err) else f"still changes by {err:.3g} nats"
            raise ConvergenceError(f"fock engine: E_N {change} at cutoff {cutoff} "
                                   f"(tolerance {opts.fock_tolerance:.3g}); limit reached")
        high = _run(model, dynamics, high_cut)
        err = float(np.max(np.abs(high["log_negativity"] - low["log_negativity"])))
        if err <= opts.fock_tolerance:
            break
        cutoff, low = high_cut, high
    top = float(np.max(high["top"]))
    notes = []
    if top > opts.fock_top_population:
        msg = (f"fock engine: the top level (cutoff {high_cut}) of a mode holds population {top:.3g} > "
               f"{opts.fock_top_population:.3g}")
        warnings.warn(msg, TruncationWarning, stacklevel=2)
        notes.append(msg)
    peak = float(np.max(high["log_negativity"]))
    if peak < 10 * opts.fock_tolerance:
        notes.append(f"fock engine: E_N peaks at {peak:.3g} nats, below 10 x the cutoff tolerance "
                     f"({opts.fock_tolerance:.3g} nats) and the ODE tolerances: these values are not resolved "
                     "here; use the gaussian engine")
    series = _series_from_moments(model, high)
    summary = {"fock_cutoff": high_cut, "fock_cutoff_compared": cutoff, "fock_truncation_error_nats": err,
               "fock_top_level_population": top, "fock_estimated_max_phonons": n_max}
    return FockRun(series=series, summary={"fock": summary}, notes=tuple(notes))


def _series_from_moments(model: OscillatorModel, rec: dict) -> dict:
    covs = rec["cov"]
    series = {"log_negativity": np.maximum(rec["log_negativity"], 0.0)}
    side_a = [i for label in model.setup.side_a for i in model.body_modes(label)]
    side_b = [i for i in range(model.n_modes) if i not in side_a]
    reduced = measures.reduce(covs, side_a + side_b)
    series["simon_min_eigenvalue"] = measures.simon_min_eigenvalue(reduced, list(range(len(side_a), model.n_modes)))
    if len(side_a) == 1 and len(side_b) == 1:
        series["simon"] = measures.simon_invariant(reduced)
        duan = measures.duan_optimised(reduced)
        series.update({"duan": duan["value"], "duan_bound": duan["bound"], "duan_scaling": duan["scaling"],
                       "duan_rotation_rad": duan["rotation_rad"]})
    series["purity"] = rec["purity"]
    series["mutual_information"] = rec["mutual_information"]
    series["covariance"] = covs
    for i, name in enumerate(model.mode_names):
        series[f"position_spread_m[{name}]"] = np.sqrt(model.scales.position_variance_m2(covs[:, 2 * i, 2 * i], i))
        series[f"phonons[{name}]"] = (covs[:, 2 * i, 2 * i] + covs[:, 2 * i + 1, 2 * i + 1]) / 4 - 0.5
    return series
