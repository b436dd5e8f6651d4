"""General Lindblad engine: the one module where gqsim talks to QuTiP's mesolve.

Master equation integrated (Lindblad form, [Lindblad1976]; [GKS1976]):

    d rho/dt = -(i/hbar) [H(t), rho]
               + sum_k ( L_k rho L_k^dag - (1/2) {L_k^dag L_k, rho} ),

    H(t)/hbar = sum_ab ((E_ab(t) - E_00(t))/hbar) |ab><ab|   (branch basis; E_00 only adds a global phase)

with, per body,
  * branch decoherence, two branches: L = sqrt(F(Delta(t))/2) sigma_z
    (gives d rho_01/dt = -F rho_01);
    three or more branches, constant rate gamma: L_k = sqrt(gamma) |k><k| for every branch k;
  * spin pure dephasing gamma_phi = 1/T2 - 1/(2 T1) folded into F above;
  * spin relaxation (two branches only): L = sqrt(1/T1) |0><1| (toward branch 0).

The uniform-field branch phases are applied afterwards as an exact local unitary:
they commute with H and every channel above is covariant under local diagonal
unitaries, so this is exact and keeps ~1e17 rad/s field frequencies away from the
integrator. QuTiP objects never leave this module.
"""

from __future__ import annotations

import numpy as np
import qutip

from gqsim.superposition.channels import ConstantDephasing, NoDephasing, SeparationSquaredDephasing, SumOfDephasing
from gqsim.superposition.solvers import Evolution
from gqsim.errors import EngineError, PhysicsError
from gqsim.superposition.model import SuperpositionModel

__all__ = ["evolve", "ENGINE_NAME"]

ENGINE_NAME = "lindblad"


def _is_constant(channel) -> bool:
    if isinstance(channel, (ConstantDephasing, NoDephasing)):
        return True
    if isinstance(channel, SumOfDephasing):
        return all(_is_constant(p) for p in channel.parts)
    return False


def _constant_rate(channel) -> float:
    if isinstance(channel, ConstantDephasing):
        return channel.rate
    if isinstance(channel, SumOfDephasing):
        return sum(_constant_rate(p) for p in channel.parts)
    return 0.0


def _embed(op: np.ndarray, which: int, dims: tuple[int, int]) -> qutip.Qobj:
    eye = [qutip.qeye(d) for d in dims]
    eye[which] = qutip.Qobj(op)
    return qutip.tensor(*eye)


def _collapse_operators(model: SuperpositionModel, channels: tuple) -> list:
    setup = model.setup
    timing = setup.timing
    dims = model.dims
    ops: list = []
    moving = timing.split_s > 0 or timing.recombine_s > 0
    for which, (body, channel) in enumerate(zip(setup.bodies, channels)):
        n = body.n_branches
        if isinstance(channel, NoDephasing):
            pass
        elif n == 2:
            sz = _embed(np.diag([1.0, -1.0]), which, dims)
            distance = float(body.branch_separations_m[0, 1])
            if _is_constant(channel) or not moving:
                rate = float(channel.rate_per_s(np.array(distance)))
                if rate > 0:
                    ops.append(np.sqrt(rate / 2) * sz)
            else:
                def coeff(t, _ch=channel, _d=distance):
                    sigma = float(timing.split_fraction(np.array([t]))[0])
                    return np.sqrt(float(_ch.rate_per_s(np.array(sigma * _d))) / 2)
                ops.append(qutip.QobjEvo([sz, coeff]))
        elif _is_constant(channel):
            rate = _constant_rate(channel)
            for k in range(n):
                proj = np.zeros((n, n))
                proj[k, k] = 1.0
                ops.append(np.sqrt(rate) * _embed(proj, which, dims))
        else:
            kind = "separation_squared" if isinstance(channel, SeparationSquaredDephasing) else type(channel).__name__
            raise PhysicsError(f"{body.key}.dephasing.model", kind,
                               "with three or more branches the lindblad engine supports only constant dephasing; "
                               "use solver.engine = 'closed_form'")
        if body.spin.t1_s is not None:
            if n != 2:
                raise PhysicsError(f"{body.key}.spin.t1_s", body.spin.t1_s, "spin T1 is modelled for two branches only")
            lower = np.array([[0.0, 1.0], [0.0, 0.0]])
            ops.append(np.sqrt(1.0 / body.spin.t1_s) * _embed(lower, which, dims))
    return ops


def _hamiltonian(model: SuperpositionModel):
    timing = model.setup.timing
    dims = model.dims
    size = dims[0] * dims[1]

    def diag_rad_s(sigma: float) -> np.ndarray:
        e = model.relative_pair_energies_j(np.array([sigma]))[0].ravel()
        from scipy.constants import hbar

        return e / hbar  # relative to branch pair (0, 0): a global phase, dropped

    if timing.split_s == 0 and timing.recombine_s == 0 and model.setup.times_s[-1] <= timing.total_s:
        return qutip.Qobj(np.diag(diag_rad_s(1.0)), dims=[list(dims), list(dims)])

    projectors = []
    for k in range(size):
        p = np.zeros((size, size))
        p[k, k] = 1.0
        projectors.append(qutip.Qobj(p, dims=[list(dims), list(dims)]))
    terms = []
    for k in range(size):
        def coeff(t, _k=k):
            sigma = float(timing.split_fraction(np.array([t]))[0])
            return float(diag_rad_s(sigma)[_k])
        terms.append([projectors[k], coeff])
    return qutip.QobjEvo(terms)


def evolve(model: SuperpositionModel, channels: tuple, times_s: np.ndarray, *,
           rtol: float = 1e-10, atol: float = 1e-12) -> Evolution:
    """Integrate the master equation above with QuTiP's mesolve on ``times_s`` [s].

    Returns an :class:`Evolution` with numpy (n_times, D, D) states.
    """
    times = np.asarray(times_s, dtype=float)
    dims = model.dims
    psi0 = model.initial_amplitudes()
    rho0 = qutip.Qobj(np.outer(psi0, psi0.conj()), dims=[list(dims), list(dims)])
    h = _hamiltonian(model)
    c_ops = _collapse_operators(model, channels)
    # mesolve starts at times[0]; prepend t = 0 if the grid starts later.
    tlist = times if times[0] == 0.0 else np.concatenate(([0.0], times))
    max_step = (model.setup.timing.split_s or model.setup.timing.recombine_s or np.inf) / 20
    options = {"rtol": rtol, "atol": atol, "nsteps": 10**7, "store_states": True, "progress_bar": False}
    if np.isfinite(max_step) and max_step > 0:
        options["max_step"] = max_step
    try:
        out = qutip.mesolve(h, rho0, tlist, c_ops=c_ops, options=options)
    except Exception as exc:  # QuTiP raises many types; report as an engine failure
        raise EngineError(f"QuTiP mesolve failed: {exc}") from exc
    states = np.stack([s.full() for s in out.states])
    if times[0] != 0.0:
        states = states[1:]
    fa, fb = model.field_phases_rad(times)
    if np.any(fa) or np.any(fb):
        phase = (fa[:, :, None] + fb[:, None, :]).reshape(times.size, -1)
        u = np.exp(1j * phase)
        states = states * u[:, :, None] * u[:, None, :].conj()
    if not np.all(np.isfinite(states)):
        raise EngineError("lindblad engine produced non-finite states")
    return Evolution(times_s=times, states=states, engine=ENGINE_NAME,
                     stats={"solver": "qutip.mesolve", "qutip": qutip.__version__, "rtol": rtol, "atol": atol})
