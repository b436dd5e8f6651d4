"""An [environment] table in a superposition protocol adds the environment's branch decoherence
to each body (gqsim.physics.environment), on top of the body's own dephasing."""

import numpy as np
import pytest

import gqsim
from tests.superposition.helpers import two_body_protocol


def _with_gas(pressure_pa, extra_bodies=None):
    proto = two_body_protocol(points=21, hold=2.5, radius=1e-6).to_dict()
    for body in proto["bodies"]:
        body.update(extra_bodies or {})
    proto["environment"] = {"temperature_k": 4.0, "gas": {"species": "N2", "pressure_pa": pressure_pa},
                            "thermal_radiation": {"include": False}}
    return gqsim.parse_protocol(proto)


def test_gas_rate_in_summary_matches_published_saturated_rate():
    # shared §3.1 [DERIVED from Romero-Isart PRA 84, 052121 (2011) saturated form]: silica-size
    # sphere R = 1 um, N2 at 4 K and 1e-15 Pa: gamma_air = Lambda lambda_th^2 = 2.621e-2 /s,
    # reached for every realistic branch separation (lambda_th = 1.65e-10 m).
    result = gqsim.simulate(_with_gas(1e-15))
    rows = result.summary["environment_decoherence"]
    assert rows["A"]["gas collisions_per_s"] == pytest.approx(2.621e-2, rel=2e-3)


def test_environment_channel_equals_the_same_raw_rate():
    # Saturated gas decoherence is a constant rate gamma for the fully split branches, so a
    # protocol with dephasing = constant gamma must give the same states (no split ramp here).
    env_run = gqsim.simulate(_with_gas(1e-15))
    gamma = env_run.summary["environment_decoherence"]["A"]["total_per_s"]
    raw = gqsim.simulate(two_body_protocol(points=21, hold=2.5, radius=1e-6,
                                           dephasing={"model": "constant", "rate_per_s": gamma}))
    np.testing.assert_allclose(env_run.states, raw.states, atol=1e-12)


def test_environment_adds_to_the_bodys_own_dephasing():
    both = gqsim.simulate(_with_gas(1e-15, {"dephasing": {"model": "constant", "rate_per_s": 0.01}}))
    gamma = both.summary["environment_decoherence"]["A"]["total_per_s"]
    raw = gqsim.simulate(two_body_protocol(points=21, hold=2.5, radius=1e-6,
                                           dephasing={"model": "constant", "rate_per_s": gamma + 0.01}))
    np.testing.assert_allclose(both.states, raw.states, atol=1e-12)


def test_zero_pressure_changes_nothing():
    quiet = gqsim.simulate(_with_gas(0.0))
    bare = gqsim.simulate(two_body_protocol(points=21, hold=2.5, radius=1e-6))
    np.testing.assert_allclose(quiet.states, bare.states, atol=1e-14)
