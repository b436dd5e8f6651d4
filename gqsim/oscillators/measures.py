"""Entanglement and information measures of Gaussian states, from covariance matrices.

Conventions: quadratures x = (a + a^dag)/sqrt2, p = -i(a - a^dag)/sqrt2 ([x, p] = i); phase-space
vector r = (x_1, p_1, x_2, p_2, ...); covariance sigma_jk = <{dr_j, dr_k}> = 2 Re Cov(r_j, r_k),
so the vacuum has sigma = I (Simon's V = sigma / 2). Entropies and logarithmic negativity are
in nats (natural log). Every function accepts one matrix (2n, 2n) or a stack (n_times, 2n, 2n)
and returns a scalar per matrix.

Equation numbers cited in this module are recalled, not checked against the papers (from memory).
"""

from __future__ import annotations

import numpy as np
from scipy.special import xlogy

from gqsim.oscillators.model import symplectic_form

__all__ = [
    "symplectic_eigenvalues", "partial_transpose", "log_negativity", "simon_invariant",
    "simon_min_eigenvalue", "duan_optimised", "purity", "von_neumann_entropy",
    "mutual_information", "reduce",
]


def _stack(cov) -> tuple[np.ndarray, bool]:
    arr = np.asarray(cov, dtype=float)
    single = arr.ndim == 2
    return (arr[None] if single else arr), single


def _out(values: np.ndarray, single: bool):
    return float(values[0]) if single else values


def reduce(cov, modes) -> np.ndarray:
    """Covariance of the modes with indices ``modes`` (partial trace of a Gaussian state)."""
    idx = np.ravel([[2 * m, 2 * m + 1] for m in modes])
    arr = np.asarray(cov)
    return arr[..., idx[:, None], idx[None, :]]


def partial_transpose(cov, modes_b) -> np.ndarray:
    """Covariance of the partially transposed state: p -> -p on the modes ``modes_b``.

    Eq. (3) of [Simon2000]: transposition is time reversal, which flips momenta.
    """
    arr = np.array(cov, dtype=float, copy=True)
    sign = np.ones(arr.shape[-1])
    for m in modes_b:
        sign[2 * m + 1] = -1.0
    return arr * sign[:, None] * sign[None, :]


def symplectic_eigenvalues(cov) -> np.ndarray:
    """Symplectic eigenvalues nu_k (vacuum nu = 1), sorted ascending, (..., n).

    The nu_k are the moduli of the eigenvalues of i Omega sigma (Williamson's theorem,
    Sec. 3.x of [Serafini2017], from memory). With the Cholesky factor sigma = L L^T, i Omega sigma
    is similar to i K with K = L^T Omega L real antisymmetric, whose eigenvalues +-nu are the
    square roots of those of the symmetric K^T K: one batched real symmetric eigenproblem, which
    stays accurate when symplectic eigenvalues are nearly degenerate (weak entanglement), where
    a non-symmetric eigensolver would lose half the digits. Needs sigma positive definite (true
    of every physical covariance and of its partial transpose).
    """
    arr, single = _stack(cov)
    try:
        low = np.linalg.cholesky(arr)
    except np.linalg.LinAlgError:
        raise ValueError("covariance matrix is not positive definite (not a physical state)") from None
    omega = symplectic_form(arr.shape[-1] // 2)
    k = np.swapaxes(low, -1, -2) @ omega @ low
    ev = np.linalg.eigvalsh(np.swapaxes(k, -1, -2) @ k)  # nu_k^2, each twice
    nu = np.sqrt(np.clip(ev[..., ::2], 0.0, None))
    return nu[0] if single else nu


def log_negativity(cov, modes_b):
    """Logarithmic negativity E_N = sum_k max(0, -ln nu~_k) [nats] for the bipartition modes_b | rest.

    nu~_k are the symplectic eigenvalues of the partially transposed covariance (vacuum units);
    Eq. (16) of [VidalWerner2002] for Gaussian states, with Eq. (3) of [Simon2000].
    """
    arr, single = _stack(cov)
    nu = symplectic_eigenvalues(partial_transpose(arr, modes_b))
    return _out(np.sum(np.maximum(0.0, -np.log(nu)), axis=-1), single)


def _blocks(cov):
    v = 0.5 * np.asarray(cov, dtype=float)  # Simon's V, vacuum I/2
    return v[..., :2, :2], v[..., 2:, 2:], v[..., :2, 2:]


def simon_invariant(cov):
    """Simon's separability function for two modes, >= 0 for every separable state.

    det A det B + (1/4 - |det C|)^2 - tr(A J C J B J C^T J) - (det A + det B)/4, with
    V = sigma/2 = [[A, C], [C^T, B]] and J = [[0, 1], [-1, 0]]; Eq. (17) of [Simon2000]
    (equation number from memory). Negative for every entangled two-mode Gaussian state.
    """
    arr, single = _stack(cov)
    a, b, c = _blocks(arr)
    j = np.array([[0.0, 1.0], [-1.0, 0.0]])
    # 2x2 determinants written out: LAPACK's LU divides by the pivot, which overflows (a
    # spurious divide-by-zero) when a correlation block holds subnormal numbers
    da, db, dc = (m[..., 0, 0] * m[..., 1, 1] - m[..., 0, 1] * m[..., 1, 0] for m in (a, b, c))
    tr = np.trace(a @ j @ c @ j @ b @ j @ np.swapaxes(c, -1, -2) @ j, axis1=-2, axis2=-1)
    value = da * db + (0.25 - np.abs(dc)) ** 2 - tr - 0.25 * (da + db)
    return _out(value, single)


def simon_min_eigenvalue(cov, modes_b):
    """Smallest eigenvalue of sigma~ + i Omega (sigma~ the partial transpose), vacuum units.

    Negative iff the partial transpose violates the uncertainty principle sigma + i Omega >= 0,
    i.e. iff the state is NPT (Eq. (8) of [Simon2000], scaled to sigma = 2V).
    """
    arr, single = _stack(cov)
    pt = partial_transpose(arr, modes_b)
    omega = symplectic_form(arr.shape[-1] // 2)
    return _out(np.linalg.eigvalsh(pt + 1j * omega)[..., 0], single)


def duan_optimised(cov) -> dict:
    """Duan criterion for two modes, optimised over local phase rotations and the scaling a.

    u = a x1' + x2'/a, v = a p1' - p2'/a with x_j' = x_j cos t_j + p_j sin t_j, p_j' likewise;
    separable states satisfy Var(u) + Var(v) >= a^2 + 1/a^2 (Eq. (4) of [Duan2000]). With
    sigma = 2 Cov: Var(u) + Var(v) = a^2 s1 + s2/a^2 + c(t1 + t2), where s_j = tr(sigma_jj)/2 are
    rotation invariant and the cross term c = tr(R(phi) Z C) (Z = diag(1, -1), C the 2x2
    correlation block of sigma, phi = -(t1 + t2)) has minimum -K, K = |(M11 + M22, M12 - M21)|,
    M = Z C. The ratio (a^2 s1 + s2/a^2 - K)/(a^2 + 1/a^2) is minimised in closed form:
    a^2 = [-(s1 - s2) + sqrt((s1 - s2)^2 + K^2)]/K (evaluated as K/(s1 - s2 + sqrt(...)) when
    s1 > s2, which avoids cancellation). Local squeezing is not optimised over, so this
    is a sufficient entanglement test; Simon's criterion is the necessary and sufficient one.

    Returns
    -------
    dict with arrays (or floats) ``value`` (Var(u) + Var(v)), ``bound`` (a^2 + 1/a^2),
    ``scaling`` (a > 0) and ``rotation_rad`` (phi = -(t1 + t2), the combined local rotation;
    phi = pi means the EPR pair x1 + x2, p1 - p2 ... with a flipped sign).
    """
    arr, single = _stack(cov)
    s1 = 0.5 * (arr[:, 0, 0] + arr[:, 1, 1])
    s2 = 0.5 * (arr[:, 2, 2] + arr[:, 3, 3])
    c = arr[:, :2, 2:]
    m = c * np.array([1.0, -1.0])[:, None]
    u1 = m[:, 0, 0] + m[:, 1, 1]
    u2 = m[:, 0, 1] - m[:, 1, 0]
    k = np.hypot(u1, u2)
    # cross term tr(R(phi) M) = cos(phi) u1 + sin(phi) u2 is minimal at phi = atan2(-u2, -u1)
    phi = np.arctan2(-u2, -u1)
    diff = s1 - s2
    root = np.hypot(diff, k)
    # for s1 > s2 the textbook form cancels (to 0 when K << s1 - s2, weak coupling of unequal
    # modes); K/(d + sqrt(d^2 + K^2)) is the same number without the cancellation
    safe_k = np.where(k > 0, k, 1.0)
    a2 = np.where(k > 0, np.where(diff > 0, k / np.where(diff > 0, diff + root, 1.0), (root - diff) / safe_k), 1.0)
    value = a2 * s1 + s2 / a2 - k
    bound = a2 + 1.0 / a2
    out = {"value": value, "bound": bound, "scaling": np.sqrt(a2), "rotation_rad": phi}
    return {key: _out(v, single) for key, v in out.items()}


def purity(cov):
    """Purity tr(rho^2) = 1/sqrt(det sigma) (vacuum units); Eq. (x) of [Serafini2017] (from memory)."""
    arr, single = _stack(cov)
    sign, logdet = np.linalg.slogdet(arr)
    return _out(np.exp(-0.5 * logdet), single)


def _entropy_from_nu(nu: np.ndarray) -> np.ndarray:
    plus = (nu + 1.0) / 2.0
    minus = np.clip((nu - 1.0) / 2.0, 0.0, None)
    return np.sum(xlogy(plus, plus) - xlogy(minus, minus), axis=-1)


def von_neumann_entropy(cov):
    """S = sum_k g(nu_k), g(nu) = ((nu+1)/2) ln((nu+1)/2) - ((nu-1)/2) ln((nu-1)/2) [nats].

    Eq. (x) of [Serafini2017] (Holevo-Sohma-Hirota entropy of Gaussian states; from memory).
    """
    arr, single = _stack(cov)
    return _out(_entropy_from_nu(symplectic_eigenvalues(arr)), single)


def mutual_information(cov, modes_a, modes_b):
    """I(A:B) = S(A) + S(B) - S(AB) [nats] for the modes ``modes_a`` and ``modes_b``."""
    arr, single = _stack(cov)
    both = list(modes_a) + list(modes_b)
    value = (von_neumann_entropy(reduce(arr, modes_a)) + von_neumann_entropy(reduce(arr, modes_b))
             - von_neumann_entropy(reduce(arr, both)))
    return _out(np.asarray(value), single)
