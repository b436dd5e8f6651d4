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

import numpy as np

from gqsim.channels import decay_exponents
from gqsim.engines import Evolution
from gqsim.errors import PhysicsError
from gqsim.model import SuperpositionModel

__all__ = ["evolve", "ENGINE_NAME"]

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
    phases = model.phases_rad(times)
    fa, fb = model.field_phases_rad(times)
    total = phases + fa[:, :, None] + fb[:, None, :]
    amps = model.initial_amplitudes().reshape(model.dims)
    psi = (amps[None] * np.exp(1j * total)).reshape(times.size, -1)
    rho = psi[:, :, None] * psi[:, None, :].conj()
    ga = decay_exponents(channels[0], setup.bodies[0], setup.timing, times)
    gb = decay_exponents(channels[1], setup.bodies[1], setup.timing, times)
    if np.any(ga) or np.any(gb):
        exponent = ga[:, :, None, :, None] + gb[:, None, :, None, :]
        n, dA, dB = times.size, *model.dims
        rho *= np.exp(-exponent).reshape(n, dA * dB, dA * dB)
    return Evolution(times_s=times, states=rho, engine=ENGINE_NAME, stats={"method": "exact element-wise"})
