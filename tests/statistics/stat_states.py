"""Closed-form test states for the witness-design and statistics tests (built here, not by gqsim)."""

from __future__ import annotations

import numpy as np


def cz_plus_plus(theta: float) -> np.ndarray:
    """CZ(theta)|+>|+> = (|00> + |01> + |10> + e^{i theta}|11>)/2 (physics-references Sec. 1.2)."""
    psi = np.array([1, 1, 1, np.exp(1j * theta)]) / 2
    return np.outer(psi, psi.conj())


def branch_phase_state(phases: np.ndarray) -> np.ndarray:
    """(1/sqrt(d_a d_b)) sum_ij exp(i phi_ij)|ij> for a (d_a, d_b) phase table (physics-references Sec. 1.2)."""
    da, db = phases.shape
    psi = np.exp(1j * np.asarray(phases)).reshape(-1) / np.sqrt(da * db)
    return np.outer(psi, psi.conj())


def werner(p: float) -> np.ndarray:
    """p |Psi-><Psi-| + (1 - p) I/4 (physics-references Sec. 5.4)."""
    psi = np.array([0, 1, -1, 0]) / np.sqrt(2)
    return p * np.outer(psi, psi) + (1 - p) * np.eye(4) / 4


def dephased(rho: np.ndarray, dims: tuple[int, int], gamma_t: float) -> np.ndarray:
    """Multiply rho_{ij,kl} by exp(-gamma t [(i != k) + (j != l)]) (physics-references Sec. 1.8)."""
    da, db = dims
    i, j, k, l = np.ogrid[:da, :db, :da, :db]
    factor = np.exp(-gamma_t * ((i != k).astype(float) + (j != l).astype(float)))
    return (rho.reshape(da, db, da, db) * factor).reshape(da * db, da * db)


def random_density(rng: np.random.Generator, dim: int, rank: int | None = None) -> np.ndarray:
    """Random density matrix G G^dag / Tr with G complex Gaussian (dim x rank)."""
    rank = rank or dim
    g = rng.normal(size=(dim, rank)) + 1j * rng.normal(size=(dim, rank))
    rho = g @ g.conj().T
    return rho / np.trace(rho).real


def random_separable(rng: np.random.Generator, dims: tuple[int, int], n_terms: int = 4) -> np.ndarray:
    """A random convex mixture of product states rho_A (x) rho_B (separable by Werner's definition)."""
    weights = rng.dirichlet(np.ones(n_terms))
    da, db = dims
    return sum(w * np.kron(random_density(rng, da), random_density(rng, db)) for w in weights)
