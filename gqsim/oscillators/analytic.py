"""Analytic companions for two gravitationally coupled oscillators (printed next to simulations).

All formulas assume two bodies coupled along or across their line of centres and
E_N << 1 where a small-coupling expansion is used; E_N in nats.

Derivation of the weak-coupling laws (ours, first-order perturbation theory, common practice;
they agree with the numerics quoted by Krisnanda et al. [Krisnanda2020], from memory): with
H_int = kappa X_1 X_2 and Heisenberg-picture free motion X_j(t) = x_zpf,j (a_j f_j(t) + h.c.),
the a_1 a_2 coefficient of (1/hbar) int kappa X_1 X_2 dt is the two-mode squeezing amplitude
xi(t), and for a product vacuum E_N ~ 2 |xi| (Eq. (16) of [VidalWerner2002] on a two-mode
squeezed vacuum). Trapped: f = e^{-i omega t}, giving E_N = 2 lambda |sin omega t|. Released
from a trap omega_0: f = 1 - i omega_0 t, giving E_N ~ (2/3) e^{2r} (G m / d^3) omega_0 t^3.

Equation numbers cited in this module are recalled, not checked against the papers (from memory).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.constants import G, hbar

__all__ = [
    "coupling_rate_rad_s", "dimensionless_coupling", "superposition_phase_rate_rad_s", "ground_state_log_negativity",
    "gravity_ground_state_log_negativity", "quench_log_negativity", "squeezed_quench_envelope",
    "thermal_threshold_occupation",
    "thermal_quench_max", "free_fall_log_negativity", "free_expansion_spread_m",
    "two_mode_squeezed_thermal_log_negativity",
]


def superposition_phase_rate_rad_s(mass_a_kg: float, mass_b_kg: float, distance_m: float, span_m: float,
                                   style: str) -> float:
    """Entangling-phase rate |d theta/dt| [rad/s] of two two-branch superpositions, written without cancellation.

    theta = -(t/hbar)[V(r_LR) + V(r_RL) - V(r_LL) - V(r_RR)] with V = -G m_a m_b / r (Eq. (2) of
    [Bose2017], from memory). In line (r_LR, r_RL = d +- Dx, r_LL = r_RR = d) the bracket is
    -G m_a m_b 2 Dx^2 / (d (d^2 - Dx^2)); side by side (r_LR = r_RL = sqrt(d^2 + Dx^2)) it is
    G m_a m_b 2 Dx^2 / (d s (d + s)), s = sqrt(d^2 + Dx^2) (algebra). Written this way the rate keeps
    full precision when Dx << d, where the four branch phases differ only in their last digits.
    """
    k = G * mass_a_kg * mass_b_kg / hbar
    if style == "in_line":
        return k * 2 * span_m**2 / (distance_m * (distance_m**2 - span_m**2))
    s = math.hypot(distance_m, span_m)
    return k * 2 * span_m**2 / (distance_m * s * (distance_m + s))


def coupling_rate_rad_s(mass_a_kg: float, mass_b_kg: float, omega_a_rad_s: float, omega_b_rad_s: float,
                        distance_m: float) -> float:
    """g = 2 G m_a m_b x_zpf,a x_zpf,b / (hbar d^3) [rad/s] (coupling along the line of centres).

    Second-order expansion of -G m_a m_b / |d + x_b - x_a| (small-oscillation expansion, Ch. 6 of [Goldstein2002], as in
    [Krisnanda2020]) with x = x_zpf (a + a^dag), x_zpf = sqrt(hbar / (2 m omega)).
    """
    zpf_a = math.sqrt(hbar / (2 * mass_a_kg * omega_a_rad_s))
    zpf_b = math.sqrt(hbar / (2 * mass_b_kg * omega_b_rad_s))
    return 2 * G * mass_a_kg * mass_b_kg * zpf_a * zpf_b / (hbar * distance_m**3)


def dimensionless_coupling(mass_kg: float, omega_rad_s: float, distance_m: float) -> float:
    """lambda = g / omega = G m / (omega^2 d^3) for identical oscillators ([Krisnanda2020])."""
    return G * mass_kg / (omega_rad_s**2 * distance_m**3)


def ground_state_log_negativity(omega_plus_rad_s, omega_minus_rad_s):
    """E_N = 1/2 ln(omega_+ / omega_-) of the ground state of two identical linearly coupled oscillators.

    Normal modes (x_1 +- x_2)/sqrt2 with frequencies omega_+-; the ground state is a two-mode
    squeezed vacuum of the local modes with squeezing r = 1/4 ln(omega_+/omega_-), so E_N = 2r
    (normal-mode analysis, Ch. 6 of [Goldstein2002]; Eq. (16) of [VidalWerner2002]).
    """
    return 0.5 * np.log(np.asarray(omega_plus_rad_s) / np.asarray(omega_minus_rad_s))


def gravity_ground_state_log_negativity(lam):
    """E_N = -1/4 ln(1 - 4 lambda) of the gravitationally coupled ground state (shifts included).

    Along the axis the centre-of-mass mode keeps omega and the relative mode has
    omega_-^2 = omega^2 (1 - 4 lambda) ([Krisnanda2020]; shared Sec. 2.1); then
    :func:`ground_state_log_negativity` with the relative mode as omega_-.
    """
    return -0.25 * np.log1p(-4.0 * np.asarray(lam))


def quench_log_negativity(lam, omega_t):
    """E_N(t) ~ 2 lambda |sin(omega t)| after switching on the coupling on the product ground state.

    First-order perturbation theory (module docstring); valid for lambda << 1.
    """
    return 2.0 * np.asarray(lam) * np.abs(np.sin(omega_t))


def squeezed_quench_envelope(lam, omega_t, r):
    """E_N,max(t) ~ 2 lambda omega t sinh(2r) for two position-squeezed (r) trapped oscillators.

    First-order perturbation theory as in the module docstring with f_j the squeezed-mode
    functions: the a_1 a_2 coefficient gains a secular part growing as lambda omega t sinh(2r)
    (our derivation; it matches the numerics of shared Sec. 2.2 to ~2 % and [Krisnanda2020],
    from memory). Valid while E_N << 1.
    """
    return 2.0 * np.asarray(lam) * np.asarray(omega_t) * math.sinh(2.0 * r)


def two_mode_squeezed_thermal_log_negativity(r, occupation):
    """E_N = max(0, 2r - ln(2n + 1)) of a two-mode squeezed thermal state (n per mode).

    Eq. (16) of [VidalWerner2002] with the symplectic spectrum of the squeezed thermal state
    (Sec. 5.x of [Serafini2017], from memory).
    """
    return np.maximum(0.0, 2.0 * np.asarray(r) - np.log1p(2.0 * np.asarray(occupation)))


def thermal_quench_max(lam, occupation):
    """E_N,max ~ max(0, 2 lambda - ln(1 + 2n)) for the quench from thermal states of occupation n.

    Two-mode squeezing r = lambda (module docstring) acting on thermal states;
    :func:`two_mode_squeezed_thermal_log_negativity`.
    """
    return two_mode_squeezed_thermal_log_negativity(lam, occupation)


def thermal_threshold_occupation(lam):
    """Occupation above which the quench makes no entanglement: n* = (e^{2 lambda} - 1)/2 ~ lambda."""
    return 0.5 * np.expm1(2.0 * np.asarray(lam))


def free_fall_log_negativity(mass_kg: float, omega0_rad_s: float, distance_m: float, t_s, squeeze_r: float = 0.0):
    """E_N ~ (2/3) e^{2r} (G m / d^3) omega_0 t^3 for identical masses released from a trap omega_0.

    Both start in the (position-squeezed by r) ground state of omega_0 and fall freely along the
    line of centres; first-order perturbation theory (module docstring), valid while E_N << 1 and
    G m t^2 / d^3 << 1 (shared Sec. 2.2, [Krisnanda2020] from memory).
    """
    return (2.0 / 3.0) * math.exp(2 * squeeze_r) * G * mass_kg / distance_m**3 * omega0_rad_s * np.asarray(t_s) ** 3


def free_expansion_spread_m(mass_kg: float, omega0_rad_s: float, t_s, occupation: float = 0.0):
    """sigma(t) = sigma_0 sqrt(2n + 1) sqrt(1 + omega_0^2 t^2), sigma_0 = sqrt(hbar / (2 m omega_0)).

    Free Gaussian wave packet released from a thermal state of a trap omega_0 (textbook, Ch. 2 of
    [Schlosshauer2007] style spreading; shared Sec. 7, from memory).
    """
    sigma0 = math.sqrt(hbar / (2 * mass_kg * omega0_rad_s))
    return sigma0 * math.sqrt(2 * occupation + 1) * np.sqrt(1 + (omega0_rad_s * np.asarray(t_s)) ** 2)
