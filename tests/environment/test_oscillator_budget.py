"""Environment -> trapped oscillators: the gas is one channel (damping + its diffusion), never two."""

import copy
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy.constants import Boltzmann as k_B
from scipy.constants import hbar

from gqsim.physics.environment import rates
from gqsim.oscillators import decoherence_tally as oscillator_noise_budget
from gqsim.protocol.reader import split_environment
from gqsim.studies.decoherence import simulate_with_environment, tolerable_limit
from gqsim.physics.environment.parameters import GAS_SPECIES
from gqsim.errors import PhysicsError
from gqsim.families import simulate
from gqsim.protocol.reader import parse_protocol

DEMO = Path(__file__).resolve().parents[2] / "protocols" / "brackenfold-gas.toml"
RADIUS, RHO = 4.5e-4, 2200.0
MASS = 4 / 3 * math.pi * RADIUS**3 * RHO
HE = GAS_SPECIES["He"] * 1.66053906660e-27


@pytest.fixture()
def demo():
    return tomllib.loads(DEMO.read_text(encoding="utf-8"))


def test_budget_heating_is_epstein_damping_times_thermal_energy(demo):
    budget = oscillator_noise_budget(demo)
    (line,) = [ln for ln in budget.lines if ln.body == "Wren.x"]
    gamma = rates.epstein_damping_per_s(1e-12, 4.0, HE, RADIUS, MASS)
    omega = 2 * math.pi * 1.0
    # high-temperature Caldeira-Leggett heating gamma k_B T / (hbar omega) (shared §3.4 [MEMORY] form)
    assert line.rate_per_s == pytest.approx(gamma * k_B * 4.0 / (hbar * omega), rel=1e-9)
    # reported Lambda equals the gas localisation rate of shared §3.1 (fluctuation-dissipation, [DERIVED] identity)
    assert line.localisation_per_m2_s == pytest.approx(rates.gas_localisation_per_m2_s(1e-12, 4.0, HE, RADIUS),
                                                       rel=1e-9)
    assert budget.quantity == "heating [phonons/s]"


def test_gas_as_brownian_damping_equals_gas_as_localisation_when_damping_is_negligible(demo):
    # The engine sees the gas once, as Caldeira-Leggett damping at T (damping + Lambda = M gamma k_B T/hbar^2).
    # Over 3 s with gamma ~ 1e-20 /s the damping itself is invisible, so the run must match a run with the
    # same Lambda as a bare localisation channel: the two views of one channel agree (shared §3.1).
    data = copy.deepcopy(demo)
    data["environment"]["gas"]["pressure_pa"] = 3e-18
    proto, table = split_environment(data)
    with_env = simulate_with_environment(proto, table)
    lam = rates.gas_localisation_per_m2_s(3e-18, 4.0, HE, RADIUS)
    plain = proto.to_dict()
    for body in plain["bodies"]:
        body["channels"] = {"localisation_per_m2_s": lam}
    bare = simulate(parse_protocol(plain))
    assert np.max(bare.series["log_negativity"]) > 0  # the comparison is not between two zeros
    np.testing.assert_allclose(with_env.series["log_negativity"], bare.series["log_negativity"],
                               rtol=1e-6, atol=1e-15)


def test_protocol_damping_plus_gas_is_refused_as_double_counting(demo):
    data = copy.deepcopy(demo)
    data["bodies"][0]["channels"] = {"damping_rate_per_s": 1e-6, "bath_temperature_k": 4.0,
                                     "damping_model": "brownian"}
    proto, table = split_environment(data)
    with pytest.raises(PhysicsError, match=r"bodies\[0\].channels.damping_rate_per_s.*counted twice"):
        simulate_with_environment(proto, table)


def test_oscillator_pressure_limit_brackets_certification(demo):
    limit = tolerable_limit(demo, "pressure")
    assert limit.status == "found" and limit.certificate == "log_negativity > 0"

    def entangled(pressure):
        data = copy.deepcopy(demo)
        data["environment"]["gas"]["pressure_pa"] = pressure
        proto, table = split_environment(data)
        return np.max(simulate_with_environment(proto, table).series["log_negativity"]) > 1e-9

    # brute force at a few points around the root (xtol 1e-4 decades = 0.023 %)
    assert all(entangled(limit.value * f) for f in (0.3, 0.9, 0.999))
    assert not any(entangled(limit.value * f) for f in (1.001, 1.1, 3.0))
