"""Compiled kernel of the batched two-oscillator route: covariance propagation, logarithmic
negativity and Simon's smallest eigenvalue for many grid points in one parallel pass.

Conventions are those of :mod:`gqsim.oscillators.measures`: two modes, r = (x1, p1, x2, p2),
sigma_jk = <{dr_j, dr_k}> (vacuum sigma = I), Omega = diag(J, J) with J = [[0, 1], [-1, 0]],
partial transposition of mode 2 flips p2 (Eq. (3) of [Simon2000]), E_N in nats. Per grid point
i the covariance follows the exact step recursion of gqsim.oscillators.solve_moments,

    sigma_0 = cov0_i,   sigma_{k+1} = sym(Phi_i sigma_k Phi_i^T + Q_i),   sym(s) = (s + s^T)/2,

one point per parallel task (the point's T covariances stay in task-local scratch; no (n, T, 4, 4)
stack is formed unless asked for).

Log-negativity without cancellation
-----------------------------------
E_N = sum_j max(0, -ln nu~_j) (Eq. (16) of [VidalWerner2002]), nu~_j the symplectic eigenvalues of
the partial transpose sigma~. The textbook invariant form nu~_-^2 = (D~ - sqrt(D~^2 - 4 det sigma))/2
loses half the digits near product states (its discriminant cancels), so the kernel goes through
the standard form instead (derived here; the standard form itself is Sec. III of [Simon2000],
from memory). With sigma = [[A, C], [C^T, B]] (2x2 blocks), a = sqrt(det A), b = sqrt(det B):

* S_A = A / a has det 1, and L_A = (S_A + I)/sqrt(tr S_A + 2) is its symmetric square root
  (Cayley-Hamilton: (S + I)^2 = (tr S + 2) S when det S = 1), a symplectic 2x2 matrix; with
  adj(M) the adjugate, L_A^{-1} = adj(A + a I)/sqrt(a (tr A + 2a)). Likewise for B.
* C' = L_A^{-1} C L_B^{-T} is the correlation block after the local symplectic map that turns
  A, B into a I, b I; its signed singular value decomposition C' = R1 diag(c1, c2) R2^T with
  rotations R1, R2 is closed form: with E = (p + s)/2, F = (p - s)/2, G = (r + q)/2,
  H = (r - q)/2 for C' = [[p, q], [r, s]], c1 = hypot(E, H) + hypot(F, G) >= |c2|,
  c2 = hypot(E, H) - hypot(F, G) (so c1 c2 = det C). Rotations are local symplectic maps, so
  sigma is locally equivalent to [[a I, diag(c1, c2)], [diag(c1, c2), b I]] and sigma~ to the same
  with c2 -> -c2 (the momentum flip turns R2 into another rotation).
* In that form x and p decouple: nu~^2 are the eigenvalues of [[a, c1], [c1, b]] [[a, -c2], [-c2, b]],
  D~ = a^2 + b^2 - 2 c1 c2,  disc = (a^2 - b^2)^2 + 4 (a c1 - b c2)(b c1 - a c2),
  nu~_+^2 = (D~ + sqrt(disc))/2,  nu~_-^2 = det sigma / nu~_+^2,  det sigma = (ab - c1^2)(ab - c2^2).
  For entangled states c1 c2 = det C < 0, so every term is a sum of non-negative parts; the
  smaller root comes from the product, never from the cancelling difference.

Smallest eigenvalue of sigma~ + i Omega
---------------------------------------
The Hermitian 4x4 matrix (Eq. (8) of [Simon2000], scaled to sigma = 2V) is reduced to real
symmetric tridiagonal form by three complex Givens similarities (zeroing (3,0), (2,0), (3,1),
then dropping the phases of the subdiagonal), and the tridiagonal matrix is diagonalised by
implicit QR steps with Wilkinson shifts (the textbook symmetric QR algorithm; common practice).
Both stages are orthogonal/unitary, hence backward stable: the eigenvalues carry errors of a few
eps ||sigma||, as LAPACK's do, also near the vacuum where the two smallest eigenvalues (0, 0, 2, 2
for sigma = I) are degenerate; a characteristic-polynomial formula would lose half the digits there.

Only the minimum over k >= 1 is wanted, so it is computed exactly where it can change: first at
the time of the smallest nu~_-^2, then at each other time unless an LDL^H factorisation of
sigma~_k + i Omega - (running minimum - margin) I has only positive pivots (Sylvester's law of
inertia: then no eigenvalue lies below). The margin, 16 eps (tr sigma + 1) >= 16 eps ||sigma~ + i Omega||,
keeps a constant state from being recomputed at every time and bounds the difference to the exact
minimum. Typical trajectories need one or a few eigenvalue problems per point; the worst case (the
minimum keeps falling after the time of the smallest nu~_-^2) solves one per time, ~3x slower.

Failure signals: a covariance that is not finite or not positive definite gives E_N = NaN at
that time (and a NaN minimum eigenvalue for its point); such points belong to the one-by-one
route, which reports the error itself. The numpy reference :func:`propagate_and_measure_numpy`
applies gqsim.oscillators.measures to the stacked covariances; the tests compare both.
"""

from __future__ import annotations

import math
import operator

import numba
import numpy as np

from gqsim.errors import ProtocolError

__all__ = ["propagate_and_measure", "propagate_and_measure_numpy", "propagate_covariances",
           "propagate_covariances_numpy", "measure_covariances"]

#: unit roundoff of float64: deflation threshold of the tridiagonal QR (eps ||T||, backward stable)
_EPS = float(np.finfo(float).eps)
#: implicit QR with Wilkinson shifts converges in ~2 steps per eigenvalue (cubically in practice;
#: common practice); far more than that means non-finite input
_MAX_QR_STEPS = 60
#: below this modulus squares lose digits to underflow (sqrt of the smallest normal double)
_TINY = math.sqrt(float(np.finfo(float).tiny))
#: ``keep`` argument of the kernel when the covariances are not wanted
_NO_KEEP = np.empty((0, 0, 4, 4))
#: margin, in units of tr sigma + 1 (>= ||sigma~ + i Omega||), below the running minimum at which a
#: time may be skipped: above the usual rounding of the LDL^H test, so that a constant state is not
#: recomputed at every time, and far below the 1e-12 the sweep routes promise
_SKIP_MARGIN = 16 * _EPS


def _checked(name: str, value, n: int | None) -> np.ndarray:
    arr = np.ascontiguousarray(value, dtype=float)
    if arr.ndim != 3 or arr.shape[1:] != (4, 4) or (n is not None and arr.shape[0] != n):
        want = "(n, 4, 4)" if n is None else f"({n}, 4, 4) like phi"
        raise ProtocolError(f"{name}.shape", arr.shape, f"a stack of two-mode matrices of shape {want}")
    return arr


def _inputs(phi, q, cov0, n_times):
    phi = _checked("phi", phi, None)
    q = _checked("q", q, phi.shape[0])
    cov0 = _checked("cov0", cov0, phi.shape[0])
    try:
        steps = operator.index(n_times)
    except TypeError:
        raise ProtocolError("n_times", n_times, "a whole number of grid times >= 1") from None
    if steps < 1:
        raise ProtocolError("n_times", n_times, "a whole number of grid times >= 1")
    return phi, q, cov0, steps


def propagate_and_measure(phi, q, cov0, n_times: int, want_min_eigenvalue: bool = True):
    """E_N(t_k) and min_k>=1 lambda_min(sigma~_k + i Omega) of many two-mode Gaussian points.

    Compiled, parallel over points; the formulas are those of the module docstring (E_N: Eq. (16)
    of [VidalWerner2002]; Simon's eigenvalue: Eq. (8) of [Simon2000]).

    Parameters
    ----------
    phi : (n, 4, 4) step propagator Phi of each point
    q : (n, 4, 4) step noise Q of each point (symmetric)
    cov0 : (n, 4, 4) covariance at the first grid time (vacuum = I)
    n_times : number of grid times T >= 1 (T - 1 steps)
    want_min_eigenvalue : compute the Simon eigenvalue (the costlier half)

    Returns
    -------
    en : (n, T) log-negativity [nats]; NaN where the covariance is not finite or not positive definite
    min_eig : (n,) smallest eigenvalue of sigma~_k + i Omega over k = 1 .. T-1 (vacuum units);
        +inf when T = 1, NaN for every point when ``want_min_eigenvalue`` is false
    """
    phi, q, cov0, steps = _inputs(phi, q, cov0, n_times)
    n = phi.shape[0]
    en = np.empty((n, steps))
    min_eig = np.empty(n)
    _propagate_measure_kernel(phi, q, cov0, steps, bool(want_min_eigenvalue), en, min_eig, _NO_KEEP)
    return en, min_eig


def propagate_covariances(phi, q, cov0, n_times: int) -> np.ndarray:
    """The covariances (n, T, 4, 4) of the recursion in the module docstring, as the measuring
    kernel forms them (for checks and callers that need the states themselves)."""
    phi, q, cov0, steps = _inputs(phi, q, cov0, n_times)
    n = phi.shape[0]
    out = np.empty((n, steps, 4, 4))
    _propagate_measure_kernel(phi, q, cov0, steps, False, np.empty((n, steps)), np.empty(n), out)
    return out


def measure_covariances(covs) -> tuple[np.ndarray, np.ndarray]:
    """E_N [nats] and the smallest eigenvalue of sigma~ + i Omega of each covariance (m, 4, 4),
    by the kernel's compiled formulas (module docstring)."""
    arr = _checked("covs", covs, None)
    en = np.empty(arr.shape[0])
    lam = np.empty(arr.shape[0])
    _measure_kernel(arr, en, lam)
    return en, lam


def propagate_covariances_numpy(phi, q, cov0, n_times: int) -> np.ndarray:
    """The same recursion as a plain stacked numpy loop (reference), (n, T, 4, 4)."""
    phi, q, cov0, steps = _inputs(phi, q, cov0, n_times)
    phi_t = np.swapaxes(phi, 1, 2)
    covs = np.empty((phi.shape[0], steps, 4, 4))
    cov = cov0
    covs[:, 0] = cov
    for k in range(1, steps):
        cov = phi @ cov @ phi_t + q
        cov = 0.5 * (cov + np.swapaxes(cov, 1, 2))
        covs[:, k] = cov
    return covs


def propagate_and_measure_numpy(phi, q, cov0, n_times: int, want_min_eigenvalue: bool = True):
    """Reference for :func:`propagate_and_measure`: the numpy recursion, then
    gqsim.oscillators.measures.log_negativity and simon_min_eigenvalue on the whole stack
    (Cholesky + symmetric eigensolver, and LAPACK's Hermitian eigensolver)."""
    from gqsim.oscillators.measures import log_negativity, simon_min_eigenvalue

    covs = propagate_covariances_numpy(phi, q, cov0, n_times)
    n, steps = covs.shape[:2]
    flat = covs.reshape(-1, 4, 4)
    en = log_negativity(flat, [1]).reshape(n, steps)
    if not want_min_eigenvalue:
        return en, np.full(n, np.nan)
    lam = simon_min_eigenvalue(flat, [1]).reshape(n, steps)
    return en, np.where(np.arange(steps) > 0, lam, np.inf).min(axis=1)


# ------------------------------------------------------------------------------------------------
# compiled pieces (checked against the numpy reference in tests/test_sweep_gaussian_kernel.py)


@numba.njit(cache=True)
def _step(phi, q, cov, tmp):  # pragma: no cover - compiled
    """cov <- sym(phi cov phi^T + q) in place; tmp is (4, 4) scratch."""
    for r in range(4):
        for c in range(4):
            acc = 0.0
            for k in range(4):
                acc += phi[r, k] * cov[k, c]
            tmp[r, c] = acc
    for r in range(4):
        for c in range(4):
            acc = 0.0
            for k in range(4):
                acc += tmp[r, k] * phi[c, k]
            cov[r, c] = acc + q[r, c]
    for r in range(4):
        for c in range(r + 1, 4):
            m = 0.5 * (cov[r, c] + cov[c, r])
            cov[r, c] = m
            cov[c, r] = m


@numba.njit(cache=True)
def _pt_log_negativity(s):  # pragma: no cover - compiled
    """E_N [nats] of the two-mode covariance s (4, 4) through the standard form (module docstring),
    and nu~_-^2; (NaN, NaN) if s is not finite or not positive definite."""
    a00, a01, a11 = s[0, 0], s[0, 1], s[1, 1]
    b00, b01, b11 = s[2, 2], s[2, 3], s[3, 3]
    det_a = a00 * a11 - a01 * a01
    det_b = b00 * b11 - b01 * b01
    if not (a00 > 0.0 and det_a > 0.0 and b00 > 0.0 and det_b > 0.0 and det_a < np.inf and det_b < np.inf):
        return np.nan, np.nan
    ra = math.sqrt(det_a)
    rb = math.sqrt(det_b)
    # adjugates of A + a I and B + b I (symmetric), and the normalisation of the square roots
    pa00, pa01, pa11 = a11 + ra, -a01, a00 + ra
    pb00, pb01, pb11 = b11 + rb, -b01, b00 + rb
    scale = 1.0 / (math.sqrt(ra * (a00 + a11 + 2.0 * ra)) * math.sqrt(rb * (b00 + b11 + 2.0 * rb)))
    c00, c01, c10, c11 = s[0, 2], s[0, 3], s[1, 2], s[1, 3]
    t00 = pa00 * c00 + pa01 * c10
    t01 = pa00 * c01 + pa01 * c11
    t10 = pa01 * c00 + pa11 * c10
    t11 = pa01 * c01 + pa11 * c11
    p = (t00 * pb00 + t01 * pb01) * scale
    qq = (t00 * pb01 + t01 * pb11) * scale
    r = (t10 * pb00 + t11 * pb01) * scale
    ss = (t10 * pb01 + t11 * pb11) * scale
    half_sum = math.hypot(0.5 * (p + ss), 0.5 * (r - qq))
    half_diff = math.hypot(0.5 * (p - ss), 0.5 * (r + qq))
    c1 = half_sum + half_diff
    c2 = half_sum - half_diff
    ab = ra * rb
    g1 = ab - c1 * c1  # > 0 iff sigma is positive definite (c1 >= |c2|)
    if not g1 > 0.0:
        return np.nan, np.nan
    g2 = ab - c2 * c2
    d_pt = det_a + det_b - 2.0 * c1 * c2
    disc = (det_a - det_b) ** 2 + 4.0 * (ra * c1 - rb * c2) * (rb * c1 - ra * c2)
    nu_plus2 = 0.5 * (d_pt + math.sqrt(max(disc, 0.0)))
    nu_minus2 = g1 * g2 / nu_plus2
    en = max(0.0, -0.5 * math.log(nu_minus2)) + max(0.0, -0.5 * math.log(nu_plus2))
    return en, nu_minus2


@numba.njit(cache=True)
def _givens(x, y):  # pragma: no cover - compiled
    """(c, s, x') of the unitary [[c, -conj(s)], [s, c]] (c real) whose similarity in the (i, j)
    plane maps the column pair (h_i, h_j) = (x, y) to (x', 0), |x'| = hypot(|x|, |y|).

    Entries are pre-scaled to modulus <= 1, so sums of squares cannot overflow. An entry whose
    components are all below _TINY (~1.5e-154, where squares start to underflow) is treated as
    zero: an error of that size relative to ||h|| ~ 1, and the rotation stays exactly unitary."""
    if max(abs(y.real), abs(y.imag)) < _TINY:  # nothing (left) to zero
        return 1.0, 0.0j, x
    if max(abs(x.real), abs(x.imag)) < _TINY:  # a swap does it
        return 0.0, 1.0 + 0.0j, y
    ax2 = x.real * x.real + x.imag * x.imag
    r = math.sqrt(ax2 + y.real * y.real + y.imag * y.imag)
    ax = math.sqrt(ax2)
    phase = complex(x.real / ax, -x.imag / ax)  # conj(x)/|x|
    return ax / r, complex(y.real / r, y.imag / r) * phase, x * (r / ax)


@numba.njit(cache=True)
def _rotate_block(hii, hjj, hji, c, s):  # pragma: no cover - compiled
    """Diagonal pair and lower entry h_ji (j > i) after h <- G^H h G in the (i, j) plane."""
    cross = 2.0 * c * (s * hji.conjugate()).real
    s2 = s.real * s.real + s.imag * s.imag
    new_ii = c * c * hii + cross + s2 * hjj
    new_jj = s2 * hii - cross + c * c * hjj
    new_ji = c * s * (hjj - hii) + c * c * hji - s * s * hji.conjugate()
    return new_ii, new_jj, new_ji


@numba.njit(cache=True)
def _decoupled(d, e, lo, hi, tol):  # pragma: no cover - compiled
    """Whether dropping e[hi-1] moves no eigenvalue of the block lo..hi by more than tol: true when
    e^2 <= tol * gap, gap the distance from d[hi] to the Gershgorin interval of rows lo..hi-1
    (quadratic residual bound |delta lambda| <= e^2/gap for Hermitian block matrices whose diagonal
    blocks have spectra a gap apart; common practice. Gershgorin intervals contain the spectra, so
    the true gap is no smaller)."""
    low = np.inf
    high = -np.inf
    for k in range(lo, hi):
        rad = (abs(e[k - 1]) if k > lo else 0.0) + (abs(e[k]) if k < hi - 1 else 0.0)
        low = min(low, d[k] - rad)
        high = max(high, d[k] + rad)
    gap = max(low - d[hi], d[hi] - high)
    return gap > 0.0 and e[hi - 1] * e[hi - 1] <= tol * gap


@numba.njit(cache=True)
def _tridiagonal_min(d, e):  # pragma: no cover - compiled
    """Smallest eigenvalue of the real symmetric tridiagonal (diagonal d (4,), off-diagonal e (3,));
    overwrites d, e. Entries must be O(1) (pre-scaled). NaN if it does not converge.

    Implicit QR steps with Wilkinson shifts chase the bulge down and deflate at the bottom when
    the coupling is below eps ||T|| (or decouples by the quadratic bound of :func:`_decoupled`);
    2x2 blocks are solved in closed form."""
    n = d.size
    norm = 0.0
    for k in range(n):
        row = abs(d[k]) + (abs(e[k - 1]) if k > 0 else 0.0) + (abs(e[k]) if k < n - 1 else 0.0)
        norm = max(norm, row)
    if not norm < np.inf:
        return np.nan
    tol = _EPS * norm
    hi = n - 1
    steps = 0
    found = np.inf
    while hi >= 0:
        if hi == 0:
            return min(found, d[0])
        lo = hi - 1
        while lo > 0 and abs(e[lo - 1]) > tol:
            lo -= 1
        if abs(e[hi - 1]) <= tol or (lo < hi - 1 and _decoupled(d, e, lo, hi, tol)):
            found = min(found, d[hi])
            hi -= 1
        elif lo == hi - 1:  # unreduced 2x2 block: eigenvalues in closed form (backward stable)
            half = 0.5 * (d[lo] - d[hi])
            found = min(found, 0.5 * (d[lo] + d[hi]) - math.sqrt(half * half + e[lo] * e[lo]))
            hi -= 2
        else:
            if steps == _MAX_QR_STEPS:
                return np.nan
            steps += 1
            # Wilkinson shift: the eigenvalue of the trailing 2x2 block nearer to d[hi]
            delta = 0.5 * (d[hi - 1] - d[hi])
            eh = e[hi - 1]
            mu = d[hi] - eh * eh / (delta + math.copysign(math.sqrt(delta * delta + eh * eh), delta))
            _qr_step(d, e, lo, hi, mu)
    return found


@numba.njit(cache=True)
def _qr_step(d, e, lo, hi, mu):  # pragma: no cover - compiled
    """One implicit symmetric QR step with shift mu on the block lo..hi (Givens bulge chase)."""
    x = d[lo] - mu
    z = e[lo]
    for k in range(lo, hi):
        r = math.sqrt(x * x + z * z)
        if r < _TINY:  # both below ~1.5e-154 ||T||: drop the bulge z rather than divide by underflow
            c, s, r = 1.0, 0.0, x
        else:
            c, s = x / r, z / r
        if k > lo:
            e[k - 1] = r
        dk, dk1, ek = d[k], d[k + 1], e[k]
        cs2 = 2.0 * c * s * ek
        d[k] = c * c * dk + cs2 + s * s * dk1
        d[k + 1] = s * s * dk - cs2 + c * c * dk1
        e[k] = c * s * (dk1 - dk) + (c * c - s * s) * ek
        if k < hi - 1:
            x = e[k]
            z = s * e[k + 1]
            e[k + 1] = c * e[k + 1]


@numba.njit(cache=True)
def _simon_min_eigenvalue(s, d, e):  # pragma: no cover - compiled
    """Smallest eigenvalue of sigma~ + i Omega for the covariance s (4, 4); d (4,), e (3,) scratch.

    The Hermitian matrix is scaled by a power of two (exact) to entries <= 1 and reduced to
    tridiagonal form by three Givens similarities on its lower triangle."""
    big = 1.0
    for r in range(4):
        for c in range(r, 4):
            v = abs(s[r, c])
            if not v < np.inf:  # inf or NaN
                return np.nan
            big = max(big, v)
    scale = math.ldexp(1.0, -math.frexp(big)[1])  # 2^-k with big * 2^-k < 1
    # lower triangle of sigma~ + i Omega (p2 -> -p2 flips row and column 3), times scale
    h00, h11, h22, h33 = s[0, 0] * scale, s[1, 1] * scale, s[2, 2] * scale, s[3, 3] * scale
    h10 = complex(s[1, 0] * scale, -scale)
    h20 = complex(s[2, 0] * scale, 0.0)
    h30 = complex(-s[3, 0] * scale, 0.0)
    h21 = complex(s[2, 1] * scale, 0.0)
    h31 = complex(-s[3, 1] * scale, 0.0)
    h32 = complex(-s[3, 2] * scale, -scale)
    # zero h30 against h20 (plane 2, 3)
    c, g, h20 = _givens(h20, h30)
    h21, h31 = c * h21 + g.conjugate() * h31, c * h31 - g * h21
    h22, h33, h32 = _rotate_block(h22, h33, h32, c, g)
    # zero h20 against h10 (plane 1, 2)
    c, g, h10 = _givens(h10, h20)
    h31, h32 = c * h31 + g * h32, c * h32 - g.conjugate() * h31
    h11, h22, h21 = _rotate_block(h11, h22, h21, c, g)
    # zero h31 against h21 (plane 2, 3)
    c, g, h21 = _givens(h21, h31)
    h22, h33, h32 = _rotate_block(h22, h33, h32, c, g)
    d[0], d[1], d[2], d[3] = h00, h11, h22, h33
    # a diagonal phase similarity makes the subdiagonal real and non-negative
    e[0] = math.sqrt(h10.real * h10.real + h10.imag * h10.imag)
    e[1] = math.sqrt(h21.real * h21.real + h21.imag * h21.imag)
    e[2] = math.sqrt(h32.real * h32.real + h32.imag * h32.imag)
    return _tridiagonal_min(d, e) / scale


@numba.njit(cache=True)
def _trace(s):  # pragma: no cover - compiled
    return s[0, 0] + s[1, 1] + s[2, 2] + s[3, 3]


@numba.njit(cache=True)
def _exceeds(s, beta):  # pragma: no cover - compiled
    """Whether every eigenvalue of sigma~ + i Omega (covariance s (4, 4)) exceeds beta: the
    pivots of the LDL^H factorisation of sigma~ + i Omega - beta I are all positive (Sylvester's
    law of inertia; for a positive definite matrix the factorisation is backward stable, so a
    true answer is right up to a few eps ||sigma||; common practice)."""
    h10 = complex(s[1, 0], -1.0)
    h20 = complex(s[2, 0], 0.0)
    h30 = complex(-s[3, 0], 0.0)
    h21 = complex(s[2, 1], 0.0)
    h31 = complex(-s[3, 1], 0.0)
    h32 = complex(-s[3, 2], -1.0)
    d0 = s[0, 0] - beta
    if not d0 > 0.0:
        return False
    l10, l20, l30 = h10 / d0, h20 / d0, h30 / d0
    d1 = s[1, 1] - beta - (l10.real * l10.real + l10.imag * l10.imag) * d0
    if not d1 > 0.0:
        return False
    l21 = (h21 - l20 * l10.conjugate() * d0) / d1
    l31 = (h31 - l30 * l10.conjugate() * d0) / d1
    d2 = s[2, 2] - beta - (l20.real * l20.real + l20.imag * l20.imag) * d0 \
        - (l21.real * l21.real + l21.imag * l21.imag) * d1
    if not d2 > 0.0:
        return False
    l32 = (h32 - l30 * l20.conjugate() * d0 - l31 * l21.conjugate() * d1) / d2
    d3 = s[3, 3] - beta - (l30.real * l30.real + l30.imag * l30.imag) * d0 \
        - (l31.real * l31.real + l31.imag * l31.imag) * d1 - (l32.real * l32.real + l32.imag * l32.imag) * d2
    return d3 > 0.0


@numba.njit(cache=True, parallel=True)
def _propagate_measure_kernel(phi, q, cov0, n_times, want_min, en, min_eig, keep):  # pragma: no cover - compiled
    """Fill en (n, T) and min_eig (n,); the covariances go to keep (n, T, 4, 4) unless keep has
    no rows (then to per-point scratch)."""
    for i in numba.prange(phi.shape[0]):
        covs = keep[i] if keep.shape[0] > 0 else np.empty((n_times, 4, 4))
        proxy = np.empty(n_times)
        tmp = np.empty((4, 4))
        covs[0] = cov0[i]
        en[i, 0], proxy[0] = _pt_log_negativity(covs[0])
        for k in range(1, n_times):
            covs[k] = covs[k - 1]
            _step(phi[i], q[i], covs[k], tmp)
            en[i, k], proxy[k] = _pt_log_negativity(covs[k])
        if want_min:
            min_eig[i] = _min_over_times(covs, proxy)
        else:
            min_eig[i] = np.nan


@numba.njit(cache=True)
def _min_over_times(covs, proxy):  # pragma: no cover - compiled
    """min over k >= 1 of the smallest eigenvalue of sigma~_k + i Omega (+inf for one time).

    The minimum is computed exactly only where it can change: first at the time of the smallest
    nu~_-^2 (where the partial transpose is furthest below the uncertainty bound, so usually at or
    next to the minimum), then at each other time whose matrix is not shown by :func:`_exceeds`
    to lie above the running minimum less _SKIP_MARGIN (tr sigma + 1). A skipped time has no
    eigenvalue below that, so the result is the exact minimum to within that margin (plus the
    rounding of the test), i.e. a few 1e-15 ||sigma||."""
    n_times = covs.shape[0]
    if n_times == 1:
        return np.inf
    d = np.empty(4)
    e = np.empty(3)
    start = 1
    for k in range(2, n_times):
        if proxy[k] < proxy[start]:
            start = k
    best = _simon_min_eigenvalue(covs[start], d, e)
    for k in range(1, n_times):
        if best != best:
            break  # NaN sticks, as in numpy's min
        if k != start and not _exceeds(covs[k], best - _SKIP_MARGIN * (_trace(covs[k]) + 1.0)):
            lam = _simon_min_eigenvalue(covs[k], d, e)
            if lam < best or lam != lam:
                best = lam
    return best


@numba.njit(cache=True)
def _measure_kernel(covs, en, lam):  # pragma: no cover - compiled
    d = np.empty(4)
    e = np.empty(3)
    for i in range(covs.shape[0]):
        en[i] = _pt_log_negativity(covs[i])[0]
        lam[i] = _simon_min_eigenvalue(covs[i], d, e)
