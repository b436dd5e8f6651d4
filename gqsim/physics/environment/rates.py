"""Rate formulas of the environment models (pure functions of SI numbers).

Conventions
-----------
* A coherence between two positions a distance Delta apart decays as
  d rho/dt = -F(Delta) rho. In the long-wavelength regime F = Lambda Delta^2
  (``localisation`` Lambda [1/(m^2 s)]); far beyond the environment's wavelength F
  saturates at the total rate of "which-path" events gamma [1/s].
* Lambda along one axis equals the coefficient of the Lindblad term
  -Lambda [x, [x, rho]], i.e. the momentum diffusion D_pp = 2 hbar^2 Lambda.
* Damping rates are velocity (amplitude of momentum) damping rates gamma_v, dp/dt = -gamma_v p.
* Permittivities use the exp(-i omega t) convention: a passive medium has Im eps >= 0.
* The Clausius-Mossotti factor is alpha = (eps - 1)/(eps + 2).

All constants come from :mod:`scipy.constants`.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.constants import Boltzmann as k_B
from scipy.constants import c, hbar, pi
from scipy.special import zeta

__all__ = [
    "number_density_per_m3",
    "gas_thermal_wavelength_m",
    "gas_rms_speed_m_s",
    "gas_mean_speed_m_s",
    "gas_localisation_per_m2_s",
    "gas_saturated_rate_per_s",
    "epstein_damping_per_s",
    "brownian_localisation_per_m2_s",
    "clausius_mossotti",
    "thermal_wavenumber_per_m",
    "blackbody_scattering_localisation_per_m2_s",
    "blackbody_scattering_total_per_s",
    "blackbody_absorption_localisation_per_m2_s",
    "blackbody_absorption_total_per_s",
    "photon_wavelength_thermal_m",
    "rayleigh_scattering_cross_section_m2",
    "laser_peak_photon_flux_per_m2_s",
    "laser_scattering_rate_per_s",
    "recoil_tensor",
    "laser_localisation_per_m2_s",
    "heating_phonons_per_s",
]


# ----------------------------------------------------------------------------- gas collisions

def number_density_per_m3(pressure_pa: float, temperature_k: float) -> float:
    """Ideal-gas number density n = P / (k_B T) [1/m^3] (ideal-gas law, Sec. 7.4 of [Reif1965], from memory)."""
    return pressure_pa / (k_B * temperature_k)


def gas_thermal_wavelength_m(molecular_mass_kg: float, temperature_k: float) -> float:
    """Thermal de Broglie wavelength lambda_th = 2 pi hbar / sqrt(2 pi m_a k_B T) [m].

    The crossover length of the gas-collision decoherence function (Sec. 3.4 of
    [Schlosshauer2007]; [RomeroIsart2011], equation numbers not checked). Valid for an
    ideal gas in equilibrium.
    """
    return 2.0 * pi * hbar / math.sqrt(2.0 * pi * molecular_mass_kg * k_B * temperature_k)


def gas_rms_speed_m_s(molecular_mass_kg: float, temperature_k: float) -> float:
    """Root-mean-square molecular speed v_rms = sqrt(3 k_B T / m_a) [m/s] (Maxwell-Boltzmann
    distribution, Sec. 7.10 of [Reif1965], from memory)."""
    return math.sqrt(3.0 * k_B * temperature_k / molecular_mass_kg)


def gas_mean_speed_m_s(molecular_mass_kg: float, temperature_k: float) -> float:
    """Mean molecular speed <v> = sqrt(8 k_B T / (pi m_a)) [m/s] (Maxwell-Boltzmann
    distribution, Sec. 7.10 of [Reif1965], from memory)."""
    return math.sqrt(8.0 * k_B * temperature_k / (pi * molecular_mass_kg))


def gas_localisation_per_m2_s(pressure_pa: float, temperature_k: float, molecular_mass_kg: float,
                              radius_m: float) -> float:
    """Long-wavelength gas-collision localisation rate Lambda_gas [1/(m^2 s)].

    Lambda = (8 / (3 hbar^2)) n sqrt(2 pi m_a) R^2 (k_B T)^(3/2), n = P/(k_B T):
    Eq. (3.73) of [Schlosshauer2007] (equation number from memory), after [JoosZeh1985],
    for a hard sphere of radius R much larger than the molecules. Identical to the
    Romero-Isart form 8 sqrt(2 pi) m_a v P R^2 / (3 sqrt(3) hbar^2) of [RomeroIsart2011]
    with v = v_rms (our velocity convention). Valid for separations below the gas
    thermal wavelength, see :func:`gas_thermal_wavelength_m`.
    """
    n = number_density_per_m3(pressure_pa, temperature_k)
    return 8.0 / (3.0 * hbar**2) * n * math.sqrt(2.0 * pi * molecular_mass_kg) * radius_m**2 * (
        k_B * temperature_k) ** 1.5


def gas_saturated_rate_per_s(pressure_pa: float, temperature_k: float, molecular_mass_kg: float,
                             radius_m: float, convention: str = "thermal_wavelength") -> float:
    """Saturated gas-collision decoherence rate gamma_gas [1/s] for separations >> lambda_th.

    ``convention`` makes the choice explicit (the literature differs by a factor ~8):

    ``"thermal_wavelength"`` (default)
        gamma = Lambda_gas lambda_th^2 = 16 pi sqrt(2 pi) P R^2 / (sqrt(3) v m_a) with
        v = v_rms: the saturated rate of [RomeroIsart2011] (Eq. numbers from memory),
        which makes F(Delta) = min(Lambda Delta^2, gamma) continuous at Delta = lambda_th.
    ``"geometric_collisions"``
        gamma = n pi R^2 <v>: every molecule hitting the geometric cross-section carries
        full which-path information (hard-sphere kinetic theory, common practice).
    """
    if convention == "thermal_wavelength":
        lam = gas_thermal_wavelength_m(molecular_mass_kg, temperature_k)
        return gas_localisation_per_m2_s(pressure_pa, temperature_k, molecular_mass_kg, radius_m) * lam**2
    if convention == "geometric_collisions":
        n = number_density_per_m3(pressure_pa, temperature_k)
        return n * pi * radius_m**2 * gas_mean_speed_m_s(molecular_mass_kg, temperature_k)
    raise ValueError(f"unknown saturated-rate convention {convention!r}")


def epstein_damping_per_s(pressure_pa: float, temperature_k: float, molecular_mass_kg: float,
                          radius_m: float, mass_kg: float) -> float:
    """Free-molecular (Epstein) velocity damping rate gamma_v [1/s] of a sphere in a dilute gas.

    M gamma_v = (4 pi / 3) R^2 P sqrt(8 m_a / (pi k_B T)): Epstein's drag for specular
    reflection of the molecules: the drag law of [Epstein1924] with his accommodation
    factor delta = 1 (equation number not checked; form as in shared §3.1).
    Valid when the mean free path is much larger than R (any pressure relevant here).
    With :func:`brownian_localisation_per_m2_s` this reproduces
    :func:`gas_localisation_per_m2_s` exactly: gas damping and gas-collision localisation
    are one channel (fluctuation-dissipation), never to be added twice.
    """
    return 4.0 * pi / 3.0 * radius_m**2 * pressure_pa * math.sqrt(
        8.0 * molecular_mass_kg / (pi * k_B * temperature_k)) / mass_kg


def brownian_localisation_per_m2_s(mass_kg: float, damping_per_s: float, temperature_k: float) -> float:
    """Position-localisation rate of quantum Brownian motion Lambda = M gamma_v k_B T / hbar^2.

    The momentum diffusion D_pp = 2 M gamma_v k_B T of the high-temperature
    Caldeira-Leggett master equation [CaldeiraLeggett1983] (Eq. (3.8) of
    [BreuerPetruccione2002], number from memory) written as D_pp = 2 hbar^2 Lambda.
    """
    return mass_kg * damping_per_s * k_B * temperature_k / hbar**2


# ----------------------------------------------------------------------------- thermal photons

def clausius_mossotti(permittivity: complex) -> complex:
    """alpha = (eps - 1)/(eps + 2): polarisability of a small sphere per 4 pi eps0 R^3
    (Clausius-Mossotti, Eq. (4.56) of [Jackson1999], number from memory)."""
    eps = complex(permittivity)
    return (eps - 1.0) / (eps + 2.0)


def thermal_wavenumber_per_m(temperature_k: float) -> float:
    """kappa = k_B T / (hbar c) [1/m]: the wavenumber scale of thermal photons (x = hbar c k/(k_B T)
    is the argument of the Planck distribution, Sec. 9.13 of [Reif1965], from memory)."""
    return k_B * temperature_k / (hbar * c)


def photon_wavelength_thermal_m(temperature_k: float) -> float:
    """Thermal photon wavelength 2 pi hbar c / (k_B T) [m] (validity scale of the
    Lambda Delta^2 regime of the blackbody models, [RomeroIsart2011])."""
    return 2.0 * pi / thermal_wavenumber_per_m(temperature_k)


def blackbody_scattering_localisation_per_m2_s(radius_m: float, temperature_k: float,
                                               permittivity: complex) -> float:
    """Localisation by scattering of thermal photons, Lambda_bb,sc [1/(m^2 s)].

    Lambda = (8! 8 zeta(9) c R^6 / (9 pi)) (k_B T/(hbar c))^9 |alpha|^2: the
    scattering formula of [RomeroIsart2011] (Re(alpha)^2 there, from memory) and
    Eq. (3.58) of [Schlosshauer2007] with the dielectric factor; re-derived from the
    Rayleigh cross-section (8 pi/3) k^4 R^6 |alpha|^2 (Eq. (5.8) of [BohrenHuffman1983],
    from memory), the Planck photon density and <|k - k'|^2> = 2 k^2. Valid for
    k_B T R/(hbar c) << 1 and Delta << the thermal photon wavelength.
    """
    alpha = clausius_mossotti(permittivity)
    prefactor = math.factorial(8) * 8.0 * float(zeta(9.0)) / (9.0 * pi)
    return prefactor * c * radius_m**6 * thermal_wavenumber_per_m(temperature_k) ** 9 * abs(alpha) ** 2


def blackbody_scattering_total_per_s(radius_m: float, temperature_k: float, permittivity: complex) -> float:
    """Total thermal-photon scattering rate [1/s], the saturation of the scattering channel.

    Gamma = (8 6! zeta(7) / (3 pi)) c R^6 |alpha|^2 (k_B T/(hbar c))^7: the Rayleigh
    cross-section (Eq. (5.8) of [BohrenHuffman1983]) integrated over the Planck photon
    flux (derived here; the same integral as [RomeroIsart2011]'s Lambda without the k^2).
    """
    alpha = clausius_mossotti(permittivity)
    prefactor = 8.0 * math.factorial(6) * float(zeta(7.0)) / (3.0 * pi)
    return prefactor * c * radius_m**6 * abs(alpha) ** 2 * thermal_wavenumber_per_m(temperature_k) ** 7


def blackbody_absorption_localisation_per_m2_s(radius_m: float, temperature_k: float,
                                               permittivity: complex) -> float:
    """Localisation by absorption (surroundings at T) or emission (body interior at T), [1/(m^2 s)].

    Lambda = (16 pi^5 c R^3 / 189) (k_B T/(hbar c))^6 Im(alpha): [RomeroIsart2011]
    (from memory); re-derived from the absorption cross-section 4 pi k R^3 Im(alpha)
    (Eq. (5.11) of [BohrenHuffman1983], from memory) with one isotropic kick of hbar k
    per photon. Emission uses the same formula at the internal temperature (Kirchhoff).
    Valid for k_B T R/(hbar c) << 1 and Delta << the thermal photon wavelength.
    """
    alpha = clausius_mossotti(permittivity)
    return 16.0 * pi**5 / 189.0 * c * radius_m**3 * thermal_wavenumber_per_m(temperature_k) ** 6 * alpha.imag


def blackbody_absorption_total_per_s(radius_m: float, temperature_k: float, permittivity: complex) -> float:
    """Total thermal-photon absorption (or emission) rate [1/s], the saturation of that channel.

    Gamma = (4 pi^3 / 15) c R^3 Im(alpha) (k_B T/(hbar c))^4: the absorption cross-section,
    Eq. (5.11) of [BohrenHuffman1983] (from memory), integrated over the Planck photon flux
    (derived here; shared §3.2).
    """
    alpha = clausius_mossotti(permittivity)
    return 4.0 * pi**3 / 15.0 * c * radius_m**3 * alpha.imag * thermal_wavenumber_per_m(temperature_k) ** 4


# ----------------------------------------------------------------------------- laser recoil

def rayleigh_scattering_cross_section_m2(radius_m: float, wavelength_m: float, permittivity: complex) -> float:
    """sigma = (8 pi / 3) k^4 R^6 |alpha|^2 [m^2], k = 2 pi / lambda (Eq. (5.8) of
    [BohrenHuffman1983], from memory; = k^4 V^2 eps_c^2/(6 pi) of [RomeroIsart2011Levitation]).
    Valid for k R << 1."""
    k = 2.0 * pi / wavelength_m
    return 8.0 * pi / 3.0 * k**4 * radius_m**6 * abs(clausius_mossotti(permittivity)) ** 2


def laser_peak_photon_flux_per_m2_s(power_w: float, wavelength_m: float, waist_m: float) -> float:
    """Photon flux at the focus of a Gaussian beam, Phi = 2 P / (pi w0^2 hbar omega_L) [1/(m^2 s)].

    Peak intensity 2P/(pi w0^2) of a TEM00 beam with 1/e^2 intensity radius w0 (common practice;
    Gaussian-beam intensity as in Sec. 8 of [Jackson1999], from memory).
    """
    omega = 2.0 * pi * c / wavelength_m
    return 2.0 * power_w / (pi * waist_m**2 * hbar * omega)


def laser_scattering_rate_per_s(power_w: float, wavelength_m: float, waist_m: float, radius_m: float,
                                permittivity: complex) -> float:
    """Photons scattered per second by a sphere at the focus, Gamma = sigma Phi [1/s], with sigma
    of Eq. (5.8) of [BohrenHuffman1983] (from memory); the same product as the scattering rate
    of [RomeroIsart2011Levitation] (shared §3.3)."""
    return (rayleigh_scattering_cross_section_m2(radius_m, wavelength_m, permittivity)
            * laser_peak_photon_flux_per_m2_s(power_w, wavelength_m, waist_m))


def recoil_tensor(polarisation_axis: np.ndarray, propagation_axis: np.ndarray) -> np.ndarray:
    """(3, 3) tensor A with <(q . u)^2> = (hbar k)^2 u^T A u per scattered photon.

    A = <n' n'^T>_dipole + n_in n_in^T, where the emitted direction n' follows the dipole
    pattern sin^2 (angle to the polarisation), Eq. (9.22) of [Jackson1999] (from memory):
    <n'_pol^2> = 1/5, <n'_perp^2> = 2/5 for both perpendicular axes. In the
    (polarisation, other, propagation) frame A = diag(1/5, 2/5, 7/5), as used for levitated
    particles ([Jain2016], from memory).
    """
    e = np.asarray(polarisation_axis, dtype=float)
    z = np.asarray(propagation_axis, dtype=float)
    e = e / np.linalg.norm(e)
    z = z / np.linalg.norm(z)
    dipole = 0.4 * np.eye(3) - 0.2 * np.outer(e, e)
    return dipole + np.outer(z, z)


def laser_localisation_per_m2_s(scattering_rate_per_s: float, wavelength_m: float, axis: np.ndarray,
                                polarisation_axis: np.ndarray, propagation_axis: np.ndarray) -> float:
    """Recoil localisation along unit vector ``axis``: Lambda = k^2 (u^T A u) Gamma_scat / 2 [1/(m^2 s)].

    From D_pp = (hbar k)^2 (u^T A u) Gamma_scat = 2 hbar^2 Lambda (see :func:`recoil_tensor`,
    whose dipole averages come from Eq. (9.22) of [Jackson1999]; [RomeroIsart2011Levitation], from
    memory; shared §3.3).
    """
    u = np.asarray(axis, dtype=float)
    u = u / np.linalg.norm(u)
    k = 2.0 * pi / wavelength_m
    weight = float(u @ recoil_tensor(polarisation_axis, propagation_axis) @ u)
    return k**2 * weight * scattering_rate_per_s / 2.0


def heating_phonons_per_s(localisation_per_m2_s: float, mass_kg: float, omega_rad_s: float) -> float:
    """Phonon heating rate of a trapped mode from position localisation, hbar Lambda / (M omega) [1/s].

    d<p^2>/dt = 2 hbar^2 Lambda gives dE/dt = hbar^2 Lambda / M; dividing by hbar omega
    gives phonons per second (Eq. (3.62) of [Schlosshauer2007], from memory).
    """
    return hbar * localisation_per_m2_s / (mass_kg * omega_rad_s)
