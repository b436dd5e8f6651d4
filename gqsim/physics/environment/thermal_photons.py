"""Exact separation dependence of blackbody decoherence, F(Delta), from Lambda Delta^2 to saturation.

For a small sphere in isotropic thermal radiation every absorbed, emitted or
scattered photon kicks the body by a momentum transfer q; a coherence between
positions a distance Delta apart decays at (Eq. (12) of [GallisFleming1990] with
the photon flux of [JoosZeh1985], both from memory)

    F(Delta) = int dk  c n(k) sigma(k) [1 - < exp(i q . Delta) >],

with n(k) = k^2 / (pi^2 (exp(hbar c k / k_B T) - 1)) the Planck photon density
(two polarisations) and sigma the Rayleigh cross-sections of
:mod:`gqsim.physics.environment.rates`. The angular averages are closed forms
(derived here with the plane-wave and Legendre addition theorems):

* absorption / emission, one isotropic kick of hbar k: < e^{i q.Delta} > = j0(k Delta);
* scattering, isotropic incidence and the unpolarised Rayleigh pattern
  (1 + cos^2 theta) = (4/3)(1 + P2(cos theta)/2):
  < e^{i q.Delta} > = j0(k Delta)^2 + j2(k Delta)^2 / 2.

With x = hbar c k / (k_B T) and u = Delta k_B T / (hbar c) this is F = Gamma_tot g(u),
where Gamma_tot is the total event rate (the saturation) and

    g(u) = int x^p / (e^x - 1) [1 - K(x u)] dx / (Gamma(p+1) zeta(p+1)),

p = 6 (scattering) or 3 (absorption/emission). g rises as a u^2 (the Lambda Delta^2
regime) and tends to 1. We tabulate g once per process (composite Gauss-Legendre
quadrature resolving every oscillation of the kernel, Taylor series of the kernel for
k Delta < 0.03) together with its derivative and interpolate with a cubic Hermite spline
in (ln u, ln g); below the table the series a u^2 + b u^4 is used, above it the table's
last deficit decays as u^-2.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import CubicHermiteSpline
from scipy.special import spherical_jn, zeta

from gqsim.errors import ProtocolError

__all__ = ["KINDS", "universal_decoherence", "integral_of_universal_decoherence", "small_separation_coefficient",
           "ThermalPhotonDephasing"]

#: kind -> (power p of x in the total-rate integrand, divisor m of the small-u series u^2 x^2 / m)
KINDS: dict[str, tuple[int, int]] = {"scattering": (6, 3), "absorption": (3, 6)}

_U_MIN = 1e-3  # below: g = a u^2 + b u^4 (next term ~1e-10 relative at u = 1e-3)
_U_MAX = 1e2  # above: 1 - g < 3e-6 and decays as u^-2 (scattering) or faster (absorption)
_NODES_PER_DECADE = 60
_GL_X, _GL_W = np.polynomial.legendre.leggauss(10)
_X_MAX = 80.0  # x^7 e^-x at 80 is 1e-20 of its peak: the Planck tail beyond is irrelevant
_SEG_X, _SEG_W = np.polynomial.legendre.leggauss(16)
_SEGMENT_RTOL = 1e-10  # agreement demanded between 8- and 16-panel rules before trusting them
_Y_SERIES = 0.03  # below: kernel Taylor series (truncation < 2e-13 relative; avoids 1 - j0 cancellation)
#: Taylor coefficients of the kernels in y^2, y^4, y^6 (derived from the series of j0 and j2)
_KERNEL_SERIES = {"absorption": (1 / 6, -1 / 120, 1 / 5040), "scattering": (1 / 3, -7 / 150, 11 / 3150)}


def _kernel(kind: str, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """1 - <exp(i q.Delta)> as a function of y = k Delta, and its derivative in y."""
    j0 = spherical_jn(0, y)
    if kind == "absorption":
        value, slope = 1.0 - j0, spherical_jn(1, y)  # d/dy (1 - j0) = j1
    else:
        j2 = spherical_jn(2, y)
        dj0 = spherical_jn(0, y, derivative=True)
        dj2 = spherical_jn(2, y, derivative=True)
        value, slope = 1.0 - j0**2 - 0.5 * j2**2, -2.0 * j0 * dj0 - j2 * dj2
    small = y < _Y_SERIES
    c2, c4, c6 = _KERNEL_SERIES[kind]
    ys = y[small] ** 2
    value[small] = ys * (c2 + ys * (c4 + ys * c6))
    return value, slope


def _norm(kind: str) -> float:
    p = KINDS[kind][0]
    return float(math.gamma(p + 1) * zeta(p + 1.0))


def small_separation_coefficient(kind: str) -> float:
    """a in g(u) ~ a u^2: Gamma(p+3) zeta(p+3) / (m Gamma(p+1) zeta(p+1)) (derived)."""
    p, m = KINDS[kind]
    return float(math.gamma(p + 3) * zeta(p + 3.0) / (m * _norm(kind)))


def _quartic_coefficient(kind: str) -> float:
    """b in g(u) = a u^2 + b u^4 + O(u^6): Gamma(p+5) zeta(p+5) c4 / (Gamma(p+1) zeta(p+1)) (derived)."""
    p = KINDS[kind][0]
    return float(math.gamma(p + 5) * zeta(p + 5.0) * _KERNEL_SERIES[kind][1] / _norm(kind))


def _direct(kind: str, u: float) -> tuple[float, float]:
    """g(u) and g'(u) by composite Gauss-Legendre quadrature in x (panels <= 2/u wide, 10 nodes each)."""
    p = KINDS[kind][0]
    width = min(0.5, 2.0 / u)
    edges = np.linspace(0.0, _X_MAX, int(math.ceil(_X_MAX / width)) + 1)
    half = 0.5 * np.diff(edges)
    x = (edges[:-1, None] + half[:, None] * (_GL_X[None, :] + 1.0)).ravel()
    w = (half[:, None] * _GL_W[None, :]).ravel()
    planck = x**p / np.expm1(x)
    k, dk = _kernel(kind, x * u)
    norm = _norm(kind)
    return float(w @ (planck * k)) / norm, float(w @ (planck * x * dk)) / norm


@functools.lru_cache(maxsize=None)
def _table(kind: str) -> CubicHermiteSpline:
    decades = math.log10(_U_MAX / _U_MIN)
    u = np.logspace(math.log10(_U_MIN), math.log10(_U_MAX), int(decades * _NODES_PER_DECADE) + 1)
    vals = np.array([_direct(kind, ui) for ui in u])
    g, dg = vals[:, 0], vals[:, 1]
    # interpolate ln g against ln u: d ln g / d ln u = u g'/g
    return CubicHermiteSpline(np.log(u), np.log(g), u * dg / g)


def universal_decoherence(kind: str, u: np.ndarray) -> np.ndarray:
    """g(u) = F(Delta) / Gamma_tot for u = Delta k_B T / (hbar c) (see module docstring).

    Parameters
    ----------
    kind : ``"scattering"`` or ``"absorption"`` (emission uses ``"absorption"``)
    u : (...) dimensionless separations, >= 0

    Returns
    -------
    (...) values in [0, 1]
    """
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {sorted(KINDS)}, got {kind!r}")
    u = np.asarray(u, dtype=float)
    out = np.empty_like(u)
    low = u < _U_MIN
    high = u > _U_MAX
    mid = ~(low | high)
    ul2 = u[low] ** 2
    out[low] = ul2 * (small_separation_coefficient(kind) + _quartic_coefficient(kind) * ul2)
    spline = _table(kind)
    if np.any(mid):
        out[mid] = np.exp(spline(np.log(u[mid])))
    if np.any(high):
        deficit = 1.0 - math.exp(float(spline(math.log(_U_MAX))))
        out[high] = 1.0 - deficit * (_U_MAX / u[high]) ** 2
    return out


@dataclass(frozen=True, kw_only=True)
class ThermalPhotonDephasing:
    """Branch decoherence by thermal photons: F(Delta) = total_rate * g(Delta * wavenumber).

    Parameters
    ----------
    kind : ``"scattering"`` or ``"absorption"`` (absorption and emission share the kernel)
    total_rate : Gamma_tot [1/s], the rate of photon events (the saturation of F)
    wavenumber : k_B T / (hbar c) [1/m] at the radiating temperature
    """

    kind: str
    total_rate: float
    wavenumber: float

    def __post_init__(self):
        if self.kind not in KINDS:
            raise ProtocolError("thermal photon kind", self.kind, f"must be one of {sorted(KINDS)}")
        for name in ("total_rate", "wavenumber"):
            value = getattr(self, name)
            if not (math.isfinite(value) and value >= 0):
                raise ProtocolError(f"thermal photon {name}", value, "must be a finite number >= 0")

    @property
    def localisation(self) -> float:
        """Lambda [1/(m^2 s)] of the small-separation regime F ~ Lambda Delta^2."""
        return float(self.total_rate * small_separation_coefficient(self.kind) * self.wavenumber**2)

    @property
    def saturation(self) -> float:
        """Large-separation limit of F [1/s]."""
        return self.total_rate

    def rate_per_s(self, separation_m):
        """F(Delta) [1/s] element-wise for separations Delta [m] of any shape."""
        sep = np.abs(np.asarray(separation_m, dtype=float))
        if self.total_rate == 0.0:
            return np.zeros_like(sep)
        return self.total_rate * universal_decoherence(self.kind, sep * self.wavenumber)

    def segment_exponent(self, distance_m, sigma0, sigma1, duration_s):
        """int F(sigma(t) D) dt over a segment of ``duration_s`` [s] where the split fraction
        sigma goes linearly sigma0 -> sigma1; ``distance_m`` (...) are full-split distances D [m].

        With u = sigma D k_B T/(hbar c) the integral is Gamma_tot duration
        int_{u0}^{u1} g(u) du / (u1 - u0), see :func:`integral_of_universal_decoherence`.
        """
        d = np.asarray(distance_m, dtype=float)
        if sigma0 == sigma1 or self.total_rate == 0.0:
            return self.rate_per_s(sigma0 * d) * duration_s
        out = np.zeros_like(d)
        lo, hi = sorted((sigma0, sigma1))
        for value in np.unique(d):
            if value == 0.0:
                continue
            a, b = lo * value * self.wavenumber, hi * value * self.wavenumber
            out[d == value] = integral_of_universal_decoherence(self.kind, a, b) / (b - a)
        return self.total_rate * out * duration_s


_LOG_PANEL = 0.25  # panel width in ln u for the integral of g: g is smooth in (ln u, ln g)
_INT_X, _INT_W = np.polynomial.legendre.leggauss(12)


def integral_of_universal_decoherence(kind: str, a: float, b: float) -> float:
    """int_a^b g(u) du for 0 <= a < b (exact series below the table, Gauss-Legendre in ln u on
    the table, the u^-2 tail above it in closed form)."""
    total = 0.0
    if a < _U_MIN:  # g = A u^2 + B u^4
        top = min(b, _U_MIN)
        coef_a, coef_b = small_separation_coefficient(kind), _quartic_coefficient(kind)
        total += coef_a * (top**3 - a**3) / 3.0 + coef_b * (top**5 - a**5) / 5.0
    lo, hi = max(a, _U_MIN), min(b, _U_MAX)
    if hi > lo:
        span = math.log(hi / lo)
        panels = max(1, int(math.ceil(span / _LOG_PANEL)))
        edges = np.linspace(math.log(lo), math.log(hi), panels + 1)
        half = 0.5 * np.diff(edges)
        t = (edges[:-1, None] + half[:, None] * (_INT_X[None, :] + 1.0)).ravel()
        w = (half[:, None] * _INT_W[None, :]).ravel()
        u = np.exp(t)
        total += float(w @ (universal_decoherence(kind, u) * u))  # du = u d(ln u)
    if b > _U_MAX:  # g = 1 - c (U_MAX/u)^2
        start = max(a, _U_MAX)
        deficit = 1.0 - float(universal_decoherence(kind, np.array([_U_MAX]))[0])
        total += (b - start) - deficit * _U_MAX**2 * (1.0 / start - 1.0 / b)
    return total
