"""Witness/statistics stage: exact measures of dephased two-qubit phase states, no linear algebra.

State family. Two two-branch bodies with equal-weight branches (|c_0| = |c_1|, |d_0| = |d_1|),
a diagonal Hamiltonian and element-wise branch dephasing: this is every state the closed-form
engine produces for qubits with equal-weight branches. Write q_A = exp(-Gamma_A) and
q_B = exp(-Gamma_B) for the coherence factors and theta for the entangling phase. Up to local
diagonal unitaries (which leave every measure below unchanged)

    rho = CZ(theta) (tau_A (x) tau_B) CZ(theta)^dag,    tau_K = (I + q_K X)/2,

because element-wise dephasing of a qubit is a phase-flip channel, which commutes with CZ.
Conjugating by CZ(theta) gives, with c = cos(theta/2), s = sin(theta/2) and up to local rotations,

    rho = (1/4)[II + q_A c XI + q_B c IX + q_A q_B XX + q_A s YZ + q_B s ZY].

Derivations (ours; the starting facts are textbook):
* The operator XX commutes with every term, so rho^{T_B} splits into two 2x2 blocks with
  XX = eps = +-1, in which it reads (1/4)[(1 + eps q_A q_B) I + c (q_A + eps q_B) XI
  + s (q_A - eps q_B) YZ], with XI and YZ anticommuting. Hence the eigenvalues of the partial
  transpose are (1/4)[1 + eps q_A q_B +- sqrt(c^2 (q_A + eps q_B)^2 + s^2 (q_A - eps q_B)^2)]
  and N, E_N follow (Eq. (2)-(4) of [VidalWerner2002]).
* After Hadamards on both qubits the state commutes with ZZ (an X-state), whose Wootters
  concurrence is 2 max(0, |rho_14| - sqrt(rho_22 rho_33), |rho_23| - sqrt(rho_11 rho_44))
  ([Wootters1998] applied to X-states), giving
  C = (1/2) max(0, (q_A + q_B)|s| - sqrt((1 + a - b - z)(1 - a + b - z)),
                   |q_A - q_B||s| - sqrt((1 + a + b + z)(1 - a - b + z)))
  with a = q_A c, b = q_B c, z = q_A q_B. For q_A = q_B = q this is q|s| - (1 - q^2)/2
  (shared §1.8).
* The correlation matrix has singular values (q_A q_B, q_A |s|, q_B |s|); the witness
  optimised over local unitaries is the sum of the two largest (see gqsim.physics.witnesses).
* Purity: Tr rho^2 = (1 + q_A^2)(1 + q_B^2)/4.
The tests compare every formula with the general linear-algebra route and with QuTiP.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from gqsim.physics.measures import LOG_BASES

# Long series go through a compiled loop with the same formulas (one pass instead of ~25);
# the tests check both paths against each other.
_KERNEL_FROM = 64

__all__ = ["phase_state_measures"]


def phase_state_measures(theta: np.ndarray, q_a: np.ndarray, q_b: np.ndarray, log_base: str = "2") -> dict:
    """Closed-form measures of the dephased phase state described in the module docstring.

    Parameters
    ----------
    theta : (n,) entangling phase [rad]
    q_a, q_b : (n,) coherence factors exp(-Gamma) of bodies A and B, in [0, 1]

    Returns
    -------
    dict with (n,) arrays ``log_negativity`` (in ``log_base``), ``negativity``, ``concurrence``,
    ``witness_optimised`` and ``purity``.
    """
    theta = np.asarray(theta, dtype=float)
    qa = np.asarray(q_a, dtype=float)
    qb = np.asarray(q_b, dtype=float)
    if theta.ndim == 1 and theta.size >= _KERNEL_FROM:
        neg, conc, witness, pur = _kernel(np.ascontiguousarray(theta), np.ascontiguousarray(qa),
                                          np.ascontiguousarray(qb))
        log, _ = LOG_BASES[log_base]
        return {"log_negativity": log(1 + 2 * neg), "negativity": neg, "concurrence": conc,
                "witness_optimised": witness, "purity": pur}
    c = np.cos(theta / 2)
    s = np.abs(np.sin(theta / 2))
    lam_min = np.minimum(
        1 + qa * qb - np.sqrt(c**2 * (qa + qb) ** 2 + s**2 * (qa - qb) ** 2),
        1 - qa * qb - np.sqrt(c**2 * (qa - qb) ** 2 + s**2 * (qa + qb) ** 2),
    ) / 4
    neg = np.maximum(0.0, -lam_min) + 0.0  # + 0.0 turns -0.0 into 0.0
    log, _ = LOG_BASES[log_base]
    a, b, z = qa * c, qb * c, qa * qb
    conc = 0.5 * np.maximum(np.maximum(
        (qa + qb) * s - np.sqrt(np.clip((1 + a - b - z) * (1 - a + b - z), 0, None)),
        np.abs(qa - qb) * s - np.sqrt(np.clip((1 + a + b + z) * (1 - a - b + z), 0, None))), 0.0)
    sv1, sv2, sv3 = qa * qb, qa * s, qb * s  # sum of the two largest = total - smallest
    witness = sv1 + sv2 + sv3 - np.minimum(np.minimum(sv1, sv2), sv3)
    return {
        "log_negativity": log(1 + 2 * neg),
        "negativity": neg,
        "concurrence": conc,
        "witness_optimised": witness,
        "purity": (1 + qa**2) * (1 + qb**2) / 4,
    }


@numba.njit(cache=True)
def _kernel(theta, qa, qb):  # pragma: no cover - compiled; the formulas of phase_state_measures
    n = theta.size
    neg = np.empty(n)
    conc = np.empty(n)
    witness = np.empty(n)
    pur = np.empty(n)
    for k in range(n):
        a_, b_ = qa[k], qb[k]
        c = math.cos(theta[k] / 2)
        s = abs(math.sin(theta[k] / 2))
        lam1 = 1 + a_ * b_ - math.sqrt(c * c * (a_ + b_) ** 2 + s * s * (a_ - b_) ** 2)
        lam2 = 1 - a_ * b_ - math.sqrt(c * c * (a_ - b_) ** 2 + s * s * (a_ + b_) ** 2)
        neg[k] = max(0.0, -min(lam1, lam2) / 4) + 0.0
        a, b, z = a_ * c, b_ * c, a_ * b_
        p1 = (1 + a - b - z) * (1 - a + b - z)
        p2 = (1 + a + b + z) * (1 - a - b + z)
        c1 = (a_ + b_) * s - math.sqrt(max(p1, 0.0))
        c2 = abs(a_ - b_) * s - math.sqrt(max(p2, 0.0))
        conc[k] = 0.5 * max(max(c1, c2), 0.0)
        s1, s2, s3 = a_ * b_, a_ * s, b_ * s
        witness[k] = s1 + s2 + s3 - min(min(s1, s2), s3)
        pur[k] = (1 + a_ * a_) * (1 + b_ * b_) / 4
    return neg, conc, witness, pur
