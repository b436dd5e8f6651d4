"""An [environment] table in an oscillator protocol reaches `gqsim run` as body channels."""

from pathlib import Path

import numpy as np
import pytest

import gqsim
from scipy.constants import k, physical_constants
from gqsim.oscillators.environment import oscillator_bodies as _oscillator_bodies, oscillator_channel_table

DEMO = Path(__file__).resolve().parents[2] / "protocols" / "brackenfold-gas.toml"


def test_run_equals_the_protocol_with_the_channels_written_out():
    # The environment must act exactly as the merged channels table would if typed by hand.
    proto = gqsim.load_protocol(DEMO)
    direct = gqsim.simulate(proto)
    data = proto.to_dict()
    table = data.pop("environment")
    setup, env, spheres = _oscillator_bodies(gqsim.parse_protocol(data).data, table)
    for index, (body, sphere) in enumerate(zip(setup.bodies, spheres)):
        entry = data["bodies"][index]
        entry["channels"] = oscillator_channel_table(env, sphere, body, entry.get("channels", {}), "b")
    assert data["bodies"][0]["channels"]["damping_model"] == "brownian"
    by_hand = gqsim.simulate(gqsim.parse_protocol(data))
    np.testing.assert_array_equal(direct.series["log_negativity"], by_hand.series["log_negativity"])
    assert direct.provenance.protocol["environment"]["gas"]["species"] == "He"


def test_gas_damps_at_the_epstein_rate_and_costs_entanglement():
    proto = gqsim.load_protocol(DEMO)
    with_gas = gqsim.simulate(proto)
    data = proto.to_dict()
    data.pop("environment")
    bare = gqsim.simulate(gqsim.parse_protocol(data))
    assert with_gas.series["log_negativity"].max() < bare.series["log_negativity"].max()
    model = gqsim.build(proto)
    body = model.setup.bodies[0]
    # Epstein damping of a sphere in a rarefied gas (Epstein 1924, from memory; shared §3.1):
    # M gamma = (4 pi/3) R^2 P sqrt(8 m_a/(pi k_B T)), helium 4.0026 u (standard atomic weight).
    m_he = 4.002602 * physical_constants["atomic mass constant"][0]
    expected = 4 * np.pi / 3 * body.radius_m**2 * 1e-12 * np.sqrt(8 * m_he / (np.pi * k * 4.0)) / body.mass_kg
    assert body.channels.damping_rate_per_s == pytest.approx(expected, rel=1e-3)
    assert body.channels.damping_model == "brownian"
