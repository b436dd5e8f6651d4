"""Witness/statistics stage: entanglement measures of bipartite density matrices.

All functions take a single (D, D) matrix or a stack (n, D, D) and are vectorised
over the leading axis. ``dims = (d_A, d_B)`` gives the subsystem dimensions.
gqsim owns these measures and tests them on closed-form states (Bell, Werner,
phase states) and against QuTiP's partial transpose and concurrence.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "partial_transpose",
    "pt_trace_norm",
    "negativity",
    "log_negativity",
    "concurrence",
    "purity",
    "LOG_BASES",
]

#: log base name -> (numpy log function, unit label)
LOG_BASES = {"2": (np.log2, "ebit (log2)"), "e": (np.log, "nat (ln)")}


def _stack(rho: np.ndarray) -> tuple[np.ndarray, bool]:
    rho = np.asarray(rho)
    single = rho.ndim == 2
    return (rho[None] if single else rho), single


def partial_transpose(rho: np.ndarray, dims: tuple[int, int], subsystem: int = 1) -> np.ndarray:
    """Partial transpose on subsystem 0 (A) or 1 (B) ([Peres1996]); shape preserved."""
    stack, single = _stack(rho)
    da, db = dims
    t = stack.reshape(-1, da, db, da, db)
    t = t.transpose(0, 1, 4, 3, 2) if subsystem == 1 else t.transpose(0, 3, 2, 1, 4)
    out = t.reshape(stack.shape)
    return out[0] if single else out


def pt_trace_norm(rho: np.ndarray, dims: tuple[int, int]) -> np.ndarray:
    """Trace norm ||rho^{T_B}||_1 = sum |eigenvalues| of the (Hermitian) partial transpose."""
    stack, single = _stack(rho)
    pt = partial_transpose(stack, dims)
    pt = 0.5 * (pt + pt.conj().transpose(0, 2, 1))
    norm = np.abs(np.linalg.eigvalsh(pt)).sum(axis=-1)
    return norm[0] if single else norm


def negativity(rho: np.ndarray, dims: tuple[int, int]) -> np.ndarray:
    """N = (||rho^{T_B}||_1 - 1)/2, the sum of |negative eigenvalues| of rho^{T_B}
    (Eq. (2)-(3) of [VidalWerner2002]). Clipped at 0 below machine noise."""
    return np.maximum(0.0, (pt_trace_norm(rho, dims) - 1.0) / 2.0)


def log_negativity(rho: np.ndarray, dims: tuple[int, int], base: str = "2") -> np.ndarray:
    """E_N = log ||rho^{T_B}||_1 (Eq. (4) of [VidalWerner2002]); base "2" (ebits) or "e" (nats)."""
    log, _ = LOG_BASES[base]
    return np.maximum(0.0, log(np.maximum(pt_trace_norm(rho, dims), 1.0)))


_SYSY = np.kron([[0, -1j], [1j, 0]], [[0, -1j], [1j, 0]])


def concurrence(rho: np.ndarray) -> np.ndarray:
    """Wootters concurrence of two qubits, C = max(0, l1 - l2 - l3 - l4), with l_i the
    decreasing square roots of the eigenvalues of rho (sy x sy) rho* (sy x sy)
    (Eq. (4)-(6) of [Wootters1998]). Computed through the Hermitian matrix
    sqrt(rho) rho~ sqrt(rho), which has the same eigenvalues."""
    stack, single = _stack(rho)
    if stack.shape[-1] != 4:
        raise ValueError(f"concurrence needs two-qubit (4x4) states, got {stack.shape[-2:]}")
    herm = 0.5 * (stack + stack.conj().transpose(0, 2, 1))
    w, v = np.linalg.eigh(herm)
    sqrt_rho = (v * np.sqrt(np.clip(w, 0, None))[:, None, :]) @ v.conj().transpose(0, 2, 1)
    tilde = _SYSY @ herm.conj() @ _SYSY
    m = sqrt_rho @ tilde @ sqrt_rho
    m = 0.5 * (m + m.conj().transpose(0, 2, 1))
    lam = np.sqrt(np.clip(np.linalg.eigvalsh(m), 0, None))[:, ::-1]
    c = np.maximum(0.0, lam[:, 0] - lam[:, 1:].sum(axis=-1))
    return c[0] if single else c


def purity(rho: np.ndarray) -> np.ndarray:
    """Tr rho^2 (1 for pure states, 1/D for the maximally mixed state)."""
    stack, single = _stack(rho)
    p = np.einsum("nij,nji->n", stack, stack).real
    return p[0] if single else p
