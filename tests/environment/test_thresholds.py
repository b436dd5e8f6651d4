"""Rate targets by root-finding, checked against analytic inversions of the power laws."""

import math

import numpy as np
import pytest
from scipy.constants import atomic_mass

from gqsim.physics.environment import Environment, Gas, Laser, Sphere, ThermalRadiation
from gqsim.physics.environment.thresholds import rate_limit, total_rate_per_s
from gqsim.errors import ProtocolError

SPHERE = Sphere(radius_m=1e-6, mass_kg=1.4703e-14, thermal_permittivity=5.7 + 1e-3j)
#: brentq with xtol 1e-6 decades: 2.3e-6 relative in the knob
ROOT = 3e-6


def test_pressure_at_target_rate_is_the_linear_inversion():
    # gas rate is linear in P (shared §3.1 formula); radiation off so the gas is the only source
    env = Environment(temperature_k=4.0, thermal_radiation=ThermalRadiation(include=False),
                      gas=Gas(species="custom", molecular_mass_kg=28 * atomic_mass, pressure_pa=1e-15))
    target = 0.0628  # e.g. omega_ent/2 of the in-line plan of shared §1.5 (0.125574/2 rad/s)
    f0 = total_rate_per_s(env, SPHERE, 250e-6)
    assert rate_limit(env, SPHERE, 250e-6, "pressure", target) == pytest.approx(1e-15 * target / f0, rel=ROOT)


def test_temperature_at_target_rate_follows_the_power_laws_in_the_lambda_regime():
    # At Delta = 10 nm (u ~ 2e-5) F = Lambda Delta^2: absorption ~ T^6, scattering ~ T^9 (shared §3.2), emission
    # held at the internal temperature. The rate reached at 8 K follows from the 4 K parts; invert it.
    from gqsim.physics.environment import branch_decoherence

    env = Environment(temperature_k=4.0, internal_temperature_k=4.0)
    sep = 1e-8
    parts = branch_decoherence(env, SPHERE).rates_by_source(sep)
    target = parts["blackbody emission"] + parts["blackbody absorption"] * 2**6 + parts["blackbody scattering"] * 2**9
    # u^4 corrections at u = 3.5e-5 are ~1e-8 relative, below the root tolerance
    assert rate_limit(env, SPHERE, sep, "temperature", target) == pytest.approx(8.0, rel=ROOT)


def test_laser_power_limit_and_impossible_targets():
    laser = Laser(power_w=1e-6, wavelength_m=1.55e-6, waist_m=5e-6, permittivity=2.1)
    small = Sphere(radius_m=5e-8, mass_kg=1e-18, thermal_permittivity=2.1 + 1e-3j)
    env = Environment(temperature_k=4.0, laser=laser, thermal_radiation=ThermalRadiation(include=False))
    f0 = total_rate_per_s(env, small, 1e-9, np.array([1.0, 0, 0]))
    got = rate_limit(env, small, 1e-9, "laser_power", 10 * f0, axis=np.array([1.0, 0, 0]))
    assert got == pytest.approx(1e-5, rel=ROOT)  # linear in power (shared §3.3)
    # other sources already above the target -> 0; a source that can never reach it -> inf
    hot = Environment(temperature_k=300.0, internal_temperature_k=300.0, laser=laser)
    assert rate_limit(hot, small, 1e-3, "laser_power", 1e-30) == 0.0
    assert math.isinf(rate_limit(env, small, 1e-9, "laser_power", 1e300, decades=5))
    with pytest.raises(ProtocolError, match="target_per_s"):
        rate_limit(env, small, 1e-9, "laser_power", -1.0)
    with pytest.raises(ProtocolError, match="needs a gas"):
        rate_limit(env, small, 1e-9, "pressure", 1.0)
