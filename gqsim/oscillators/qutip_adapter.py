"""The one module of the oscillator family that talks to QuTiP. Numpy in, numpy out.

Integrates, with QuTiP's ``mesolve`` (dimensionless units, hbar = 1),

    d rho/dtau = -i [H, rho] + sum_k (L_k rho L_k^dag - 1/2 {L_k^dag L_k, rho})
                 - i (gamma_j / 2) [x_j, {p_j, rho}]   (optional Caldeira-Leggett terms),

and hands every stored state to a numpy callback. Closed dynamics of a pure state runs as
the Schroedinger equation (``sesolve``) on the ket. QuTiP objects never leave this module.
"""

from __future__ import annotations

from typing import Callable, Sequence

import numpy as np
import qutip

from gqsim.errors import EngineError

__all__ = ["evolve_density_matrix"]

#: a density matrix whose largest eigenvalue is within this of 1 is evolved as a ket (closed
#: dynamics only); purity is then exact to rounding.
_PURE_TOLERANCE = 1e-12


def _pure_ket(rho: np.ndarray) -> np.ndarray | None:
    w, v = np.linalg.eigh(0.5 * (rho + rho.conj().T))
    if abs(w[-1] - 1.0) > _PURE_TOLERANCE:
        return None
    return v[:, -1]


def _evolve_ket(h, ket, dims, taus, on_state, *, rtol, atol):
    psi = qutip.Qobj(ket, dims=[list(dims), [1] * len(dims)])
    last = {}

    def record(t, state):
        vec = state.full()[:, 0]
        on_state(vec)
        last["psi"] = vec
        return 0.0

    try:
        qutip.sesolve(h, psi, np.asarray(taus, dtype=float), e_ops=[record],
                      options={"rtol": rtol, "atol": atol, "nsteps": 10**7, "store_states": False,
                               "progress_bar": False})
    except Exception as exc:  # QuTiP integration failures become one gqsim error
        raise EngineError(f"fock engine: QuTiP sesolve failed ({type(exc).__name__}: {exc})") from exc
    return np.outer(last["psi"], last["psi"].conj())


def evolve_density_matrix(hamiltonian: np.ndarray, jumps: Sequence[np.ndarray],
                          brownian: Sequence[tuple[float, np.ndarray, np.ndarray]], rho0: np.ndarray,
                          dims: Sequence[int], taus: np.ndarray, on_state: Callable[[np.ndarray], None],
                          *, rtol: float, atol: float) -> np.ndarray:
    """Evolve ``rho0`` over ``taus`` and call ``on_state(rho)`` at every time; return the last state.

    Parameters
    ----------
    hamiltonian : (D, D) Hermitian H (units of hbar omega_unit), dense or scipy.sparse
    jumps : Lindblad operators L_k, each (D, D), dense or scipy.sparse
    brownian : (gamma_j, x_j, p_j) triples of the Caldeira-Leggett term
    rho0 : (D, D) initial density matrix
    dims : subsystem dimensions (product = D)
    taus : (n,) dimensionless times, taus[0] the time of rho0
    on_state : callback receiving each state in time order: a (D,) ket when the evolution is closed
        and the state pure, otherwise a (D, D) density matrix (numpy arrays either way)
    rtol, atol : ODE tolerances handed to QuTiP
    """
    qdims = [list(dims), list(dims)]
    # sparse (CSR) operators: truncated ladder operators are banded, and a dense Liouvillian
    # would make every right-hand-side evaluation a D^2 x D^2 dense product
    h = qutip.Qobj(hamiltonian, dims=qdims).to("CSR")
    c_ops = [qutip.Qobj(op, dims=qdims).to("CSR") for op in jumps]
    liouv = qutip.liouvillian(h, c_ops)
    for gamma, x, p in brownian:
        xq, pq = qutip.Qobj(x, dims=qdims).to("CSR"), qutip.Qobj(p, dims=qdims).to("CSR")
        # [x, {p, rho}] = x p rho + x rho p - p rho x - rho p x
        comm = (qutip.spre(xq * pq) + qutip.spre(xq) * qutip.spost(pq)
                - qutip.spre(pq) * qutip.spost(xq) - qutip.spost(pq * xq))
        liouv = liouv - 0.5j * gamma * comm
    last = {}
    if not c_ops and not brownian:
        ket = _pure_ket(rho0)
        if ket is not None:
            return _evolve_ket(h, ket, dims, taus, on_state, rtol=rtol, atol=atol)
    rho = qutip.Qobj(rho0, dims=qdims)

    def record(t, state):
        arr = state.full()
        on_state(arr)
        last["rho"] = arr
        return 0.0

    try:
        qutip.mesolve(liouv, rho, np.asarray(taus, dtype=float), e_ops=[record],
                      options={"rtol": rtol, "atol": atol, "nsteps": 10**7, "store_states": False,
                               "progress_bar": False})
    except Exception as exc:  # QuTiP integration failures become one gqsim error
        raise EngineError(f"fock engine: QuTiP mesolve failed ({type(exc).__name__}: {exc})") from exc
    return last["rho"]
