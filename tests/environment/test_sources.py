"""Channels built from an environment: superposition decay (also along moving paths) and oscillator terms."""

import math

import numpy as np
import pytest
import qutip
from scipy.constants import Boltzmann as k_B
from scipy.constants import atomic_mass, hbar
from scipy.special import zeta

from gqsim.superposition.channels import SeparationSquaredDephasing, decay_exponents
from gqsim.physics.environment import (Environment, ExtraRate, Gas, Laser, Sphere, ThermalRadiation, branch_decoherence,
                               environment_sources, oscillator_terms, rates)
from gqsim.physics.environment.sources import EnvironmentDephasing, Source
from gqsim.physics.environment.thermal_photons import ThermalPhotonDephasing
from gqsim.superposition.setup import Body, Timing

IDENTITY = 1e-12  # closed-form identities: round-off only
SPHERE = Sphere(label="Tern", radius_m=1e-6, mass_kg=2200 * 4 / 3 * math.pi * 1e-18, thermal_permittivity=3.8 + 0.1j)


def _env(**kw):
    base = dict(temperature_k=4.0, gas=Gas(species="custom", molecular_mass_kg=28 * atomic_mass, pressure_pa=1e-15))
    base.update(kw)
    return Environment(**base)


def test_sources_add_and_reproduce_the_individual_formulas():
    env = _env()
    total = branch_decoherence(env, SPHERE)
    by = total.rates_by_source(250e-6)
    assert set(by) == {"gas collisions", "blackbody scattering", "blackbody absorption", "blackbody emission"}
    # gas at 250 um >> lambda_th = 1.65e-10 m: saturated at Lambda lambda_th^2 = 2.621e-2 /s (shared §3.1 [DERIVED])
    assert by["gas collisions"] == pytest.approx(2.621e-2, rel=5e-4)
    # emission at T_i = T_e equals absorption (Kirchhoff; shared §3.2 "identical if T_i = 4 K")
    assert by["blackbody emission"] == pytest.approx(by["blackbody absorption"], rel=IDENTITY)
    assert float(total.rate_per_s(np.array(250e-6))) == pytest.approx(sum(by.values()), rel=IDENTITY)
    # internal temperature drives emission only: T^6 in the Lambda regime (shared §3.2 formula)
    hot = branch_decoherence(_env(internal_temperature_k=8.0), SPHERE)
    small = 1e-7  # u = 1.7e-4: deep in the Lambda Delta^2 regime
    ratio = hot.rates_by_source(small)["blackbody emission"] / total.rates_by_source(small)["blackbody emission"]
    assert ratio == pytest.approx(2.0**6, rel=1e-6)
    assert hot.rates_by_source(small)["blackbody absorption"] == total.rates_by_source(small)["blackbody absorption"]


def test_geometric_saturation_convention_is_selectable():
    gas = Gas(species="custom", molecular_mass_kg=28 * atomic_mass, pressure_pa=1e-15,
              saturated_rate="geometric_collisions")
    src = environment_sources(_env(gas=gas, thermal_radiation=ThermalRadiation(include=False)), SPHERE)[0]
    assert src.saturation_per_s == pytest.approx(3.129e-3, rel=5e-4)  # shared §3.1 [DERIVED] n pi R^2 <v>


def test_oscillator_terms_count_gas_once_as_damping_at_the_gas_temperature():
    # Issue: gas damping and gas localisation are one channel (Lambda = M gamma k_B T / hbar^2) - never both.
    env = _env(thermal_radiation=ThermalRadiation(include=False))
    omega = 2 * math.pi * 1e3
    (term,) = oscillator_terms(env, SPHERE, np.array([1.0, 0, 0]), omega)
    lam_gas = environment_sources(env, SPHERE)[0].localisation_per_m2_s
    assert term.localisation_per_m2_s == 0.0  # no extra D[x]: the damping's bath supplies the diffusion
    assert term.bath_temperature_k == 4.0
    assert SPHERE.mass_kg * term.damping_per_s * k_B * 4.0 / hbar**2 == pytest.approx(lam_gas, rel=IDENTITY)
    assert term.equivalent_localisation_per_m2_s == pytest.approx(lam_gas, rel=IDENTITY)
    assert term.heating_phonons_per_s == pytest.approx(hbar * lam_gas / (SPHERE.mass_kg * omega), rel=IDENTITY)


def test_laser_recoil_depends_on_the_branch_axis():
    laser = Laser(power_w=1e-3, wavelength_m=1550e-9, waist_m=2e-6, permittivity=2.1,
                  polarisation_axis=[1, 0, 0], propagation_axis=[0, 0, 1])
    env = Environment(temperature_k=4.0, laser=laser, thermal_radiation=ThermalRadiation(include=False))
    small = Sphere(radius_m=50e-9, mass_kg=1e-18)
    lam = {ax: environment_sources(env, small, np.eye(3)[i])[0].localisation_per_m2_s
           for i, ax in enumerate("xyz")}
    # A = diag(1/5, 2/5, 7/5) (shared §3.3 [DERIVED])
    assert lam["y"] / lam["x"] == pytest.approx(2.0, rel=IDENTITY)
    assert lam["z"] / lam["x"] == pytest.approx(7.0, rel=IDENTITY)
    # no axis given: the most strongly localised direction (conservative)
    assert environment_sources(env, small)[0].localisation_per_m2_s == pytest.approx(lam["z"], rel=1e-10)
    # saturation = total scattering rate: every photon carries full which-path information at large Delta
    src = environment_sources(env, small, np.eye(3)[0])[0]
    gamma = rates.laser_scattering_rate_per_s(1e-3, 1550e-9, 2e-6, 50e-9, 2.1)
    assert src.saturation_per_s == pytest.approx(gamma, rel=IDENTITY)
    terms = oscillator_terms(env, small, np.eye(3)[2], 2 * math.pi * 1e5)
    assert terms[0].heating_phonons_per_s == pytest.approx(hbar * lam["z"] / (1e-18 * 2 * math.pi * 1e5),
                                                           rel=1e-10)


def test_constant_extras_enter_superpositions_but_not_oscillators():
    env = Environment(temperature_k=4.0, thermal_radiation=ThermalRadiation(include=False),
                      extras=(ExtraRate(label="magnet noise", rate_per_s=0.05),
                              ExtraRate(label="patch fields", localisation_per_m2_s=1e6, saturation_per_s=0.02)))
    total = branch_decoherence(env, SPHERE)
    assert total.rates_by_source(1e-3) == pytest.approx({"magnet noise": 0.05, "patch fields": 0.02})
    assert total.rates_by_source(1e-5)["patch fields"] == pytest.approx(1e6 * 1e-10)
    labels = [t.label for t in oscillator_terms(env, SPHERE, np.array([0, 0, 1.0]), 1e3)]
    assert labels == ["patch fields"]


def test_moving_three_branch_decay_matches_mesolve_with_time_dependent_jump_operators():
    # Issue check: time-dependent branch paths. Split 0 -> full offsets (linear), hold, recombine; the closed-form
    # engine's exponent int F(Delta(t)) dt (gqsim.superposition.channels.decay_exponents with our channel's exact segment
    # integrals) vs QuTiP mesolve with jump operators that follow the moving positions:
    #   localisation: L = sqrt(2 Lambda) s(t) Z          (D[L] gives -Lambda (z_a - z_b)^2 s^2 rho_ab)
    #   photon kicks: L = sqrt(w) diag(exp(i q s(t) z_b)) (absorbed thermal photons, as in test_thermal_photons)
    temp, total, lam = 4.0, 1.5, 2e7
    kappa = rates.thermal_wavenumber_per_m(temp)
    z = np.array([0.0, 5e-5, 2e-4])  # full-split offsets along z [m]; u <= 0.35
    channel = EnvironmentDephasing(sources=(
        Source(label="photons", channel=ThermalPhotonDephasing(kind="absorption", total_rate=total, wavenumber=kappa),
               localisation_per_m2_s=0.0, saturation_per_s=total, driver=None, reference="test"),
        Source(label="lab", channel=SeparationSquaredDephasing(localisation=lam), localisation_per_m2_s=lam,
               saturation_per_s=None, driver=None, reference="test"),
    ))
    body = Body(label="A", mass_kg=1e-14, radius_m=None, centre_m=np.zeros(3),
                offsets_m=np.array([[0.0, 0.0, zi] for zi in z]), amplitudes=np.ones(3) / np.sqrt(3))
    timing = Timing(split_s=0.3, hold_s=0.4, recombine_s=0.3)
    times = np.linspace(0.0, 1.0, 11)
    exponents = decay_exponents(channel, body, timing, times)

    def s_of(t):  # the same piecewise-linear split fraction in plain floats (QuTiP calls it very often)
        return min(t / 0.3, 1.0, max((1.0 - t) / 0.3, 0.0))

    grid = np.linspace(0, 1.2, 97)
    np.testing.assert_allclose([s_of(t) for t in grid], timing.split_fraction(grid), atol=1e-15)

    projectors = [qutip.Qobj(np.diag(np.eye(3)[b])) for b in range(3)]
    c_ops = [qutip.QobjEvo([math.sqrt(2 * lam) * qutip.Qobj(np.diag(z)), lambda t: s_of(t)])]
    # 16 x 6 kicks keep mesolve quick; this quadrature reproduces F to <= 8e-6 relative for u <= 0.35
    # (checked against the 40 x 24 set of test_thermal_photons), hence KICK_QUADRATURE below.
    x, wx = np.polynomial.legendre.leggauss(16)
    x, wx = 20 * (x + 1), 20 * wx
    mu, wmu = np.polynomial.legendre.leggauss(6)
    norm = 6 * zeta(4.0)
    for xi, wxi in zip(x, wx):
        for m, wm in zip(mu, wmu):
            amp = math.sqrt(total * wxi * xi**3 / math.expm1(xi) / norm * wm / 2)
            q = kappa * xi * m
            c_ops.append(qutip.QobjEvo([[amp * projectors[b], (lambda t, _q=q, _z=z[b]: np.exp(1j * _q * s_of(t) * _z))]
                                        for b in range(3)]))
    rho0 = qutip.Qobj(np.full((3, 3), 1 / 3))
    result = qutip.mesolve(qutip.qzero(3), rho0, times, c_ops=c_ops, options={"atol": 1e-9, "rtol": 1e-9})
    kick_quadrature = 8e-6
    atol = kick_quadrature * total * times[-1] / 3 + 1e-8  # |d rho_ab| <= rho_ab * d(exponent); + integrator
    for k, state in enumerate(result.states):
        np.testing.assert_allclose(state.full(), np.full((3, 3), 1 / 3) * np.exp(-exponents[k]), atol=atol)
