"""Closed-form engine for branch superpositions with element-wise decoherence.

Master equation solved exactly (H diagonal in the branch basis |a b>, all channels
element-wise and commuting with H):

    d rho/dt = -(i/hbar) [H(t), rho] + sum_{bodies} D_body(t) rho,
    H(t) = sum_ab E_ab(t) |ab><ab| + local field terms,
    (D_A rho)_{ab,a'b'} = -F_A(Delta_aa'(t)) rho_{ab,a'b'}  (and likewise for B),

whose solution is, for rho(0) = |psi0><psi0| with psi0 = sum_ab c_a d_b |ab>,

    rho_{ab,a'b'}(t) = c_a d_b c*_a' d*_b' exp(i[Phi_ab(t) - Phi_a'b'(t)])
                       exp(-Gamma^A_aa'(t) - Gamma^B_bb'(t)),

with Phi_ab = phi_ab + phi^field_a + phi^field_b and Gamma = int F dt
(pure-dephasing solution, e.g. Sec. 3.4 of [BreuerPetruccione2002], from memory;
shared §1.8). No time stepping, hence no step-size error.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from gqsim.superposition.channels import decay_exponents
from gqsim.superposition.solvers import Evolution
from gqsim.errors import PhysicsError
from gqsim.superposition.model import SuperpositionModel

__all__ = ["evolve", "branch_parameters", "states_from_parameters", "ENGINE_NAME"]

ENGINE_NAME = "closed_form"


def evolve(model: SuperpositionModel, channels: tuple, times_s: np.ndarray) -> Evolution:
    """Exact states on ``times_s`` [s]; ``channels`` is one branch-decoherence channel per body.

    Raises
    ------
    PhysicsError
        if a body has spin T1 (amplitude damping does not commute with H).
    """
    setup = model.setup
    for body in setup.bodies:
        if body.spin.t1_s is not None:
            raise PhysicsError(f"{body.key}.spin.t1_s", body.spin.t1_s,
                               "spin T1 needs the lindblad engine (solver.engine = 'lindblad' or 'auto')")
    times = np.asarray(times_s, dtype=float)
    total, ga, gb = branch_parameters(model, channels, times)
    return Evolution(times_s=times, states=states_from_parameters(model, total, ga, gb),
                     engine=ENGINE_NAME, stats={"method": "exact element-wise"})


def branch_parameters(model: SuperpositionModel, channels: tuple, times: np.ndarray):
    """The exact solution's ingredients: joint phases Phi_ab (n, d_A, d_B) [rad] (up to a global
    phase, from the cancellation-free relative phases) and the decay
    exponents Gamma^A (n, d_A, d_A), Gamma^B (n, d_B, d_B)."""
    setup = model.setup
    phases = model.relative_phases_rad(times)
    if np.any(setup.acceleration_m_s2):
        fa, fb = model.field_phases_rad(times)
        total = phases + fa[:, :, None] + fb[:, None, :]
    else:
        total = phases
    a, b = setup.bodies
    ga = decay_exponents(channels[0], a, setup.timing, times)
    same = channels[0] == channels[1] and np.array_equal(a.branch_separations_m, b.branch_separations_m)
    gb = ga if same else decay_exponents(channels[1], b, setup.timing, times)
    return total, ga, gb


def states_from_parameters(model: SuperpositionModel, total: np.ndarray, ga: np.ndarray, gb: np.ndarray):
    """rho_{ab,a'b'} = c_a d_b c*_a' d*_b' e^{i(Phi_ab - Phi_a'b')} e^{-Gamma^A_aa' - Gamma^B_bb'}."""
    amps = model.initial_amplitudes().reshape(model.dims).astype(np.complex128)
    return _build_states(np.ascontiguousarray(total, dtype=np.float64), amps,
                         np.ascontiguousarray(ga, dtype=np.float64), np.ascontiguousarray(gb, dtype=np.float64))


@numba.njit(cache=True, fastmath=True)
def _build_states(total, amps, ga, gb):  # pragma: no cover - compiled
    n, da, db = total.shape
    size = da * db
    rho = np.empty((n, size, size), dtype=np.complex128)
    psi = np.empty(size, dtype=np.complex128)
    qa = np.empty((da, da))
    qb = np.empty((db, db))
    for k in range(n):
        for a in range(da):
            for a2 in range(da):
                qa[a, a2] = math.exp(-ga[k, a, a2])
        for b in range(db):
            for b2 in range(db):
                qb[b, b2] = math.exp(-gb[k, b, b2])
        for a in range(da):
            for b in range(db):
                phase = total[k, a, b]
                psi[a * db + b] = amps[a, b] * complex(np.cos(phase), np.sin(phase))
        for a in range(da):
            for b in range(db):
                left = psi[a * db + b]
                for a2 in range(da):
                    for b2 in range(db):
                        rho[k, a * db + b, a2 * db + b2] = (left * psi[a2 * db + b2].conjugate()
                                                            * qa[a, a2] * qb[b, b2])
    return rho
