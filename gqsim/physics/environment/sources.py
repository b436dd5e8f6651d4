"""Channels stage of the environment: every decoherence source as the engines consume it.

One :class:`Source` per physical mechanism carries

* ``channel`` - a branch-decoherence object with ``rate_per_s(separation_m)`` (and an
  exact ``segment_exponent``) for superposed masses, see :mod:`gqsim.superposition.channels`;
* ``localisation_per_m2_s`` / ``saturation_per_s`` - Lambda and gamma of F(Delta);
* ``driver`` - the apparatus knob the rate grows with (for the noise budget).

:func:`oscillator_terms` gives the same sources as a trapped mode sees them: a
position-diffusion Lambda (jump operator proportional to x), a velocity damping rate
with its bath temperature, and the resulting heating in phonons per second.

Gas: one channel, two views
---------------------------
Collisions with gas molecules localise the body (Lambda_gas) and damp its motion
(Epstein, gamma_v). For Maxwell-Boltzmann molecules these are the same channel:
Lambda_gas = M gamma_v k_B T / hbar^2 exactly (fluctuation-dissipation; shared
references §3.1). Oscillators therefore get gas *only* as damping at the gas
temperature (the engine's thermal bath supplies the diffusion), never also as an
extra Lambda; superposed masses get it only as F(Delta).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.constants import Boltzmann as k_B
from scipy.constants import hbar

from gqsim.physics.decoherence import ConstantDephasing, SeparationSquaredDephasing
from gqsim.physics.environment import rates
from gqsim.physics.environment.parameters import Environment, Sphere
from gqsim.physics.environment.thermal_photons import ThermalPhotonDephasing
from gqsim.errors import PhysicsError, ProtocolError

__all__ = [
    "Source",
    "EnvironmentDephasing",
    "OscillatorTerm",
    "environment_sources",
    "branch_decoherence",
    "oscillator_terms",
    "thermal_permittivity",
    "validity_notes",
]

#: knob names of the noise budget and what they drive
DRIVERS = {
    "pressure": "gas pressure [Pa]",
    "temperature": "temperature of the surroundings [K]",
    "internal_temperature": "internal temperature of the bodies [K]",
    "laser_power": "laser power [W]",
}


@dataclass(frozen=True, kw_only=True)
class Source:
    """One decoherence mechanism acting on one body.

    Attributes
    ----------
    label : name in reports (``"gas collisions"``, ``"blackbody scattering"`` ...)
    channel : object with ``rate_per_s(separation_m)`` giving F(Delta) [1/s]
    localisation_per_m2_s : Lambda of F ~ Lambda Delta^2 at small Delta [1/(m^2 s)]
    saturation_per_s : large-Delta limit of F [1/s] (None: no saturation)
    driver : key of :data:`DRIVERS` this source grows with, or None
    reference : "Eq. (n) of [key]"-style source of the formula
    """

    label: str
    channel: object
    localisation_per_m2_s: float
    saturation_per_s: float | None
    driver: str | None
    reference: str


@dataclass(frozen=True, kw_only=True)
class EnvironmentDephasing:
    """Sum of independent sources: F(Delta) = sum_k F_k(Delta) (rates of independent
    Markovian channels add, Eq. (3.4) of [BreuerPetruccione2002] structure, common practice)."""

    sources: tuple[Source, ...]

    @property
    def parts(self) -> tuple:
        return tuple(s.channel for s in self.sources)

    def rate_per_s(self, separation_m):
        """F(Delta) [1/s] element-wise for separations [m] of any shape."""
        sep = np.asarray(separation_m, dtype=float)
        total = np.zeros_like(sep)
        for part in self.parts:
            total = total + part.rate_per_s(sep)
        return total

    def segment_exponent(self, distance_m, sigma0, sigma1, duration_s):
        """Exact integral of F along a linear split segment: the sum of the parts' integrals."""
        d = np.asarray(distance_m, dtype=float)
        total = np.zeros_like(d)
        for part in self.parts:
            total = total + part.segment_exponent(d, sigma0, sigma1, duration_s)
        return total

    def rates_by_source(self, separation_m: float) -> dict[str, float]:
        """label -> F_k(Delta) [1/s] at one separation [m]."""
        return {s.label: float(s.channel.rate_per_s(np.array(separation_m))) for s in self.sources}


@dataclass(frozen=True, kw_only=True)
class OscillatorTerm:
    """One source as a trapped mode along a fixed axis sees it.

    Attributes
    ----------
    label : name in reports
    localisation_per_m2_s : extra position diffusion Lambda (Lindblad -Lambda [x,[x,rho]]) [1/(m^2 s)]
    damping_per_s : velocity damping rate gamma_v [1/s] (0 if none)
    bath_temperature_k : temperature of the damping bath [K] (None without damping)
    heating_phonons_per_s : resulting heating rate [phonons/s] (hbar Lambda_eff / (M omega))
    equivalent_localisation_per_m2_s : Lambda_eff including the diffusion that comes with
        the damping (M gamma_v k_B T / hbar^2); for reports only - do not add it to the engine
    driver : noise-budget knob, or None
    """

    label: str
    localisation_per_m2_s: float
    damping_per_s: float
    bath_temperature_k: float | None
    heating_phonons_per_s: float
    equivalent_localisation_per_m2_s: float
    driver: str | None


def thermal_permittivity(environment: Environment, sphere: Sphere) -> complex:
    """The permittivity the blackbody models use: the protocol's override, else the material's."""
    eps = environment.thermal_radiation.permittivity
    if eps is None:
        eps = sphere.thermal_permittivity
    if eps is None:
        raise PhysicsError("environment.thermal_radiation.permittivity", None,
                           f"is needed for body {sphere.label!r} (material {sphere.material!r} has no tabulated "
                           "thermal permittivity); give [real, imaginary] or set include = false")
    return eps


def environment_sources(environment: Environment, sphere: Sphere,
                        axis: np.ndarray | None = None) -> tuple[Source, ...]:
    """Every decoherence source of ``environment`` acting on ``sphere``.

    Parameters
    ----------
    environment : the apparatus
    sphere : the body
    axis : (3,) direction of the branch separation; only the (anisotropic) laser recoil
        uses it. None takes the most strongly localised direction (conservative).
    """
    out: list[Source] = []
    env, R = environment, sphere.radius_m
    if env.gas is not None and env.gas.pressure_pa > 0:
        gas, T = env.gas, env.gas_temperature_k
        lam = rates.gas_localisation_per_m2_s(gas.pressure_pa, T, gas.molecular_mass_kg, R)
        sat = rates.gas_saturated_rate_per_s(gas.pressure_pa, T, gas.molecular_mass_kg, R, gas.saturated_rate)
        out.append(Source(label="gas collisions", channel=SeparationSquaredDephasing(localisation=lam, saturation=sat),
                          localisation_per_m2_s=lam, saturation_per_s=sat, driver="pressure",
                          reference=f"Eq. (3.73) of [Schlosshauer2007]; saturation '{gas.saturated_rate}' "
                                    "of [RomeroIsart2011]"))
    if env.thermal_radiation.include:
        eps = thermal_permittivity(env, sphere)
        photon_sources = [
            ("blackbody scattering", "scattering", env.temperature_k, "temperature",
             rates.blackbody_scattering_total_per_s),
            ("blackbody absorption", "absorption", env.temperature_k, "temperature",
             rates.blackbody_absorption_total_per_s),
            ("blackbody emission", "absorption", env.internal_k, "internal_temperature",
             rates.blackbody_absorption_total_per_s),
        ]
        for label, kind, T, driver, total_fn in photon_sources:
            total = total_fn(R, T, eps)
            channel = ThermalPhotonDephasing(kind=kind, total_rate=total,
                                             wavenumber=rates.thermal_wavenumber_per_m(T))
            out.append(Source(label=label, channel=channel, localisation_per_m2_s=channel.localisation,
                              saturation_per_s=total, driver=driver,
                              reference="[RomeroIsart2011]; F(Delta) of [GallisFleming1990] (see "
                                        "gqsim.physics.environment.thermal_photons)"))
    if env.laser is not None and env.laser.power_w > 0:
        las = env.laser
        gamma = rates.laser_scattering_rate_per_s(las.power_w, las.wavelength_m, las.waist_m, R, las.permittivity)
        if axis is None:
            tensor = rates.recoil_tensor(las.polarisation_axis, las.propagation_axis)
            axis = np.linalg.eigh(tensor)[1][:, -1]
        lam = rates.laser_localisation_per_m2_s(gamma, las.wavelength_m, axis, las.polarisation_axis,
                                                las.propagation_axis)
        out.append(Source(label="laser recoil", channel=SeparationSquaredDephasing(localisation=lam, saturation=gamma),
                          localisation_per_m2_s=lam, saturation_per_s=gamma, driver="laser_power",
                          reference="[RomeroIsart2011Levitation]; recoil tensor of [Jackson1999] Eq. (9.22)"))
    for extra in env.extras:
        if extra.rate_per_s is not None:
            channel = ConstantDephasing(rate=extra.rate_per_s)
            out.append(Source(label=extra.label, channel=channel, localisation_per_m2_s=0.0,
                              saturation_per_s=extra.rate_per_s, driver=None, reference="user supplied"))
        else:
            channel = SeparationSquaredDephasing(localisation=extra.localisation_per_m2_s,
                                                 saturation=extra.saturation_per_s)
            out.append(Source(label=extra.label, channel=channel, localisation_per_m2_s=extra.localisation_per_m2_s,
                              saturation_per_s=extra.saturation_per_s, driver=None, reference="user supplied"))
    return tuple(out)


def branch_decoherence(environment: Environment, sphere: Sphere,
                       axis: np.ndarray | None = None) -> EnvironmentDephasing:
    """The total branch-decoherence channel F(Delta) of ``sphere`` in ``environment``.

    F is the sum of the sources of :func:`environment_sources`; pass the result to the
    superposition engines (e.g. ``gqsim.superposition.channels.body_channel(body, extra=(F,))``).
    """
    return EnvironmentDephasing(sources=environment_sources(environment, sphere, axis))


def oscillator_terms(environment: Environment, sphere: Sphere, axis: np.ndarray,
                     omega_rad_s: float) -> tuple[OscillatorTerm, ...]:
    """Every source as seen by a trapped mode along unit vector ``axis`` at ``omega_rad_s`` [rad/s].

    Gas enters as Epstein damping at the gas temperature only (its Lambda is the
    fluctuation-dissipation partner of that damping, see the module docstring);
    photons and user localisation extras enter as position diffusion. Constant-rate
    extras have no meaning for a trapped mode and are left out.
    """
    if not (math.isfinite(omega_rad_s) and omega_rad_s > 0):
        raise ProtocolError("omega_rad_s", omega_rad_s, "must be a finite angular frequency > 0 rad/s")
    M = sphere.mass_kg
    out: list[OscillatorTerm] = []
    env = environment
    for src in environment_sources(environment, sphere, axis):
        if src.label == "gas collisions":
            gas, T = env.gas, env.gas_temperature_k
            gamma = rates.epstein_damping_per_s(gas.pressure_pa, T, gas.molecular_mass_kg, sphere.radius_m, M)
            lam_eff = rates.brownian_localisation_per_m2_s(M, gamma, T)
            # high-temperature bath: heating gamma k_B T/(hbar omega) = hbar Lambda_eff/(M omega)
            out.append(OscillatorTerm(label=src.label, localisation_per_m2_s=0.0, damping_per_s=gamma,
                                      bath_temperature_k=T, heating_phonons_per_s=gamma * k_B * T / (hbar * omega_rad_s),
                                      equivalent_localisation_per_m2_s=lam_eff, driver=src.driver))
        elif not isinstance(src.channel, ConstantDephasing):
            lam = src.localisation_per_m2_s
            out.append(OscillatorTerm(label=src.label, localisation_per_m2_s=lam, damping_per_s=0.0,
                                      bath_temperature_k=None,
                                      heating_phonons_per_s=rates.heating_phonons_per_s(lam, M, omega_rad_s),
                                      equivalent_localisation_per_m2_s=lam, driver=src.driver))
    return tuple(out)


def validity_notes(environment: Environment, sphere: Sphere) -> tuple[str, ...]:
    """Warnings (as text) where a model is used outside its stated validity range."""
    notes = []
    if environment.thermal_radiation.include:
        for name, T in (("temperature_k", environment.temperature_k),
                        ("internal_temperature_k", environment.internal_k)):
            size = sphere.radius_m * rates.thermal_wavenumber_per_m(T)
            # the scattering integrand peaks near hbar c k / k_B T ~ 8: need k R << 1 there
            if 8.0 * size > 0.5:
                notes.append(f"{sphere.label}: radius {sphere.radius_m:.3g} m is not small against thermal "
                             f"photon wavelengths at {name} = {T:g} K (k R ~ {8 * size:.2g} at the spectral peak); "
                             "the Rayleigh blackbody rates are only indicative")
    if environment.laser is not None:
        k = 2 * math.pi / environment.laser.wavelength_m
        if k * sphere.radius_m > 0.3:
            notes.append(f"{sphere.label}: k R = {k * sphere.radius_m:.2g} at the laser wavelength; the Rayleigh "
                         "recoil formula needs k R << 1")
    return tuple(notes)
