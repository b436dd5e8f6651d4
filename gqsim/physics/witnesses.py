"""Witness stage: the two-spin correlation witness read out on the embedded spins.

W = |<X (x) Z> + <Y (x) Y>| (Pauli X, Z on body A's spin, Z/Y on body B's); a value
above 1 certifies entanglement because x1 z2 + y1 y2 <= 1 for product Bloch vectors
and, by convexity, for every separable state (witness of [Bose2017]; bound derived
in shared §1.5). Branch 0 is |0> (Z = +1).

Over local unitaries U_A (x) U_B the witness becomes |sum_k u_k^T T v_k| with T the
correlation matrix T_ij = <s_i (x) s_j> and (u_1, u_2), (v_1, v_2) orthonormal
pairs of Bloch axes; its maximum is the sum of the two largest singular values of
T (Ky Fan's maximum principle), reached by the top singular vectors. For a pure
state the singular values are (1, C, C), so the optimum is 1 + C (shared §1.5).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["correlation_matrix", "spin_witness_lab", "spin_witness_optimised", "optimal_witness_frame", "WitnessFrame",
           "SEPARABLE_BOUND"]

SEPARABLE_BOUND = 1.0

_PAULI = np.array([[[0, 1], [1, 0]], [[0, -1j], [1j, 0]], [[1, 0], [0, -1]]], dtype=complex)


def correlation_matrix(rho: np.ndarray) -> np.ndarray:
    """T_ij = Tr[rho (s_i (x) s_j)], i, j in (x, y, z); (3, 3) or (n, 3, 3)."""
    rho = np.asarray(rho)
    single = rho.ndim == 2
    stack = (rho[None] if single else rho).reshape(-1, 2, 2, 2, 2)
    t = np.einsum("nabcd,ica,jdb->nij", stack, _PAULI, _PAULI).real
    return t[0] if single else t


def spin_witness_lab(rho: np.ndarray) -> np.ndarray:
    """|<X (x) Z> + <Y (x) Y>| in the branch (lab) frame.

    Read off the matrix elements directly (basis |00>, |01>, |10>, |11>):
    <X Z> = 2 Re(rho_{00,10} - rho_{01,11}), <Y Y> = 2 Re(rho_{01,10} - rho_{00,11}).
    """
    r = np.asarray(rho)
    xz = 2 * np.real(r[..., 0, 2] - r[..., 1, 3])
    yy = 2 * np.real(r[..., 1, 2] - r[..., 0, 3])
    return np.abs(xz + yy)


@dataclass(frozen=True)
class WitnessFrame:
    """Measurement axes (unit Bloch vectors) that maximise the witness.

    Measure body A along ``a_axes[0]`` in place of X and ``a_axes[1]`` in place of Y;
    body B along ``b_axes[0]`` in place of Z and ``b_axes[1]`` in place of Y.
    """

    a_axes: np.ndarray  # (2, 3)
    b_axes: np.ndarray  # (2, 3)

    def as_dict(self) -> dict:
        return {"body_a_axes": self.a_axes.round(12).tolist(), "body_b_axes": self.b_axes.round(12).tolist()}


def spin_witness_optimised(rho: np.ndarray) -> np.ndarray:
    """Maximum of the witness over local unitaries: s1 + s2, the two largest singular
    values of the correlation matrix; (n,) or scalar."""
    s = np.linalg.svd(correlation_matrix(rho), compute_uv=False)
    return s[..., 0] + s[..., 1]


def optimal_witness_frame(rho: np.ndarray) -> WitnessFrame:
    """The measurement axes that reach :func:`spin_witness_optimised` for one (4, 4) state."""
    u, _, vh = np.linalg.svd(correlation_matrix(rho))
    return WitnessFrame(a_axes=u[:, :2].T.copy(), b_axes=vh[:2].copy())
