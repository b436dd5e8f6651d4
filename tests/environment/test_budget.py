"""Noise budget: channel shares, root-found tolerable limits against a brute-force scan, the CLI."""

import copy
import json
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from gqsim.cli import cli
from gqsim.physics.environment import rates
from gqsim.protocol.reader import split_environment
from gqsim.studies.decoherence import Certificate, plot_budget, simulate_with_environment, tolerable_limit
from gqsim.superposition import decoherence_tally as superposition_noise_budget
from gqsim.physics.environment.parameters import GAS_SPECIES
from gqsim.errors import ProtocolError

HERE = Path(__file__).resolve().parent
DEMO = HERE.parent.parent / "protocols" / "hollowmere-cryostat.toml"


@pytest.fixture()
def demo():
    return tomllib.loads(DEMO.read_text(encoding="utf-8"))


def test_budget_lists_every_channel_with_shares_summing_to_one(demo):
    budget = superposition_noise_budget(demo)
    for body in ("Tern", "Plover"):
        lines = [ln for ln in budget.lines if ln.body == body]
        assert {ln.source for ln in lines} == {"gas collisions", "blackbody scattering", "blackbody absorption",
                                               "blackbody emission"}
        assert sum(ln.share for ln in lines) == pytest.approx(1.0, rel=1e-12)
        gas = next(ln for ln in lines if ln.source == "gas collisions")
        # 250 um >> lambda_th(He, 1 K): the saturated rate Lambda lambda_th^2 (shared §3.1 formula)
        mass = GAS_SPECIES["He"] * 1.66053906660e-27
        assert gas.rate_per_s == pytest.approx(rates.gas_saturated_rate_per_s(1e-15, 1.0, mass, 0.9e-6), rel=1e-6)
        assert budget.dominant(body).source == "gas collisions"
    text = budget.as_text()
    assert "gas collisions" in text and "share" in text


def test_spin_channels_enter_the_budget_without_double_counting(demo):
    data = copy.deepcopy(demo)
    for body in data["bodies"]:
        body["spin"] = {"t1_s": 10.0, "t2_s": 2.0}
    data["solver"] = {"engine": "lindblad"}
    lines = [ln for ln in superposition_noise_budget(data).lines if ln.body == "Tern"]
    spin = {ln.source: ln.rate_per_s for ln in lines if ln.source.startswith("spin")}
    # T1 part 1/(2 T1) plus pure dephasing 1/T2 - 1/(2 T1) add to the coherence decay 1/T2 (Nielsen & Chuang)
    assert spin["spin relaxation (T1)"] + spin["spin pure dephasing (T2)"] == pytest.approx(1 / 2.0, rel=1e-12)


def _margin(data, pressure):
    d = copy.deepcopy(data)
    d["environment"]["gas"]["pressure_pa"] = pressure
    proto, table = split_environment(d)
    result = simulate_with_environment(proto, table)
    return float(np.max(result.series["witness_optimised"])) - 1.0


def test_root_found_pressure_limit_agrees_with_a_brute_force_scan(demo):
    # Issue check: the threshold found by root-finding on full simulations agrees with a brute-force scan
    limit = tolerable_limit(demo, "pressure")
    assert limit.status == "found" and limit.certificate == "witness_optimised > 1"
    assert limit.margin_at_value > 0  # the reported value is on the certified side
    scan = np.geomspace(limit.value / 3, limit.value * 3, 23)  # spacing 10.5 %
    certified = np.array([_margin(demo, p) > 1e-9 for p in scan])
    # certified exactly below the limit: one switch from True to False, bracketing the root
    switch = int(np.argmin(certified))
    assert certified[:switch].all() and not certified[switch:].any()
    assert scan[switch - 1] <= limit.value <= scan[switch]
    # the root is tight: 0.1 % above it the protocol no longer certifies (xtol 1e-4 decades = 0.023 %)
    assert _margin(demo, limit.value * 1.001) <= 1e-9
    assert limit.result is not None and limit.evaluations > 3


def test_limit_reports_when_other_channels_forbid_certification(demo):
    # The shield at 1 K with an emissive body at 30 K: no gas pressure, however low, rescues the protocol
    data = copy.deepcopy(demo)
    data["environment"]["internal_temperature_k"] = 30.0
    data["environment"]["thermal_radiation"]["permittivity"] = [5.7, 0.05]
    limit = tolerable_limit(data, "pressure", decades=6)
    assert limit.value == 0.0 and limit.status.startswith("not certified")


def test_spin_dephasing_limit_is_consistent_with_its_backing_simulation(demo):
    data = copy.deepcopy(demo)
    data["environment"]["gas"]["pressure_pa"] = 1e-17
    limit = tolerable_limit(data, "spin_dephasing")
    assert limit.status == "found" and limit.unit == "1/s"
    spins = [b["spin"]["t2_s"] for b in limit.result.provenance.protocol["bodies"]]
    assert spins == pytest.approx([1 / limit.value] * 2, rel=1e-12)
    assert limit.margin_at_value > 0


def test_certificate_parsing_and_bad_knob(demo):
    assert Certificate.parse("log_negativity>0.05") == Certificate(series="log_negativity", threshold=0.05)
    with pytest.raises(ProtocolError, match="certificate"):
        Certificate.parse("log_negativity")
    with pytest.raises(ProtocolError, match="knob"):
        tolerable_limit(demo, "humidity")
    with pytest.raises(ProtocolError, match=r"environment.laser"):
        tolerable_limit(demo, "laser_power")


def test_plot_returns_its_axes(demo):
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots()
    assert plot_budget(superposition_noise_budget(demo), ax=ax) is ax
    assert len(ax.patches) == 8
    plt.close(fig)


def test_cli_budget_json_and_limit(demo, tmp_path):
    runner = CliRunner()
    out = runner.invoke(cli, ["noise", "budget", str(DEMO), "--json"])
    assert out.exit_code == 0, out.output
    payload = json.loads(out.output)
    assert {row["channel"] for row in payload["channels"]} >= {"gas collisions", "blackbody emission"}
    out = runner.invoke(cli, ["noise", "limit", str(DEMO), "pressure", "--json"])
    assert out.exit_code == 0, out.output
    payload = json.loads(out.output)
    assert payload["status"] == "found" and payload["backing_simulation"]["max"] > 1.0
    assert math.isfinite(payload["tolerable_value"])


def test_cli_bad_environment_is_one_line_exit_2(demo, tmp_path):
    text = DEMO.read_text(encoding="utf-8").replace("pressure_pa = 1e-15", "pressure_pa = -1e-15")
    bad = tmp_path / "bad.toml"
    bad.write_text(text, encoding="utf-8")
    out = CliRunner().invoke(cli, ["noise", "budget", str(bad)])
    assert out.exit_code == 2
    assert out.output.strip() == "gqsim: error: environment.gas.pressure_pa = -1e-15: must be >= 0 (gas pressure [Pa])"


def test_without_environment_the_run_equals_the_standard_pipeline():
    # guards simulate_with_environment against drifting from gqsim.families.simulate
    from gqsim.families import simulate
    from gqsim.protocol.reader import load_protocol

    proto = load_protocol(HERE.parent.parent / "protocols" / "strong-dephasing.toml")
    ours = simulate_with_environment(proto, None)
    theirs = simulate(proto)
    for name, values in theirs.series.items():
        # same engine and inputs; measures differ only by round-off, which the concurrence's square roots
        # of eigenvalues lift to ~1e-8 (gqsim.superposition.run.CONCURRENCE_SIGNAL_FLOOR = 1e-7)
        np.testing.assert_allclose(ours.series[name], values, rtol=0, atol=1e-7)


def test_environment_channel_equals_the_same_rate_given_as_a_raw_dephasing_table(demo):
    # Static branches: F(Delta) is a constant rate, so the environment run must equal a run whose bodies carry
    # that rate in the protocol's own [bodies.dephasing] table (exact element-wise decay, closed form).
    proto, table = split_environment(demo)
    with_env = simulate_with_environment(proto, table)
    budget = superposition_noise_budget(demo)
    raw = copy.deepcopy(demo)
    del raw["environment"]
    for body in raw["bodies"]:
        total = budget.total_per_s(body["label"])
        body["dephasing"] = {"model": "constant", "rate_per_s": total}
    proto_raw, _ = split_environment(raw)
    plain = simulate_with_environment(proto_raw, None)
    for name in ("witness_optimised", "log_negativity", "purity"):
        np.testing.assert_allclose(with_env.series[name], plain.series[name], rtol=1e-12, atol=1e-14)


def test_wired_schema_delegates_to_the_standard_pipeline_with_the_same_result(demo, monkeypatch):
    # Once the family schema carries the fragment, gqsim.families.simulate must apply the environment
    # itself; its run must equal the run with the environment channels added here.
    import gqsim.protocol.reader as protocol_module
    from gqsim.physics.environment.parameters import with_environment_key

    proto, table = split_environment(demo)
    here = simulate_with_environment(proto, table)
    original = protocol_module.schema_for
    monkeypatch.setattr(protocol_module, "schema_for",
                        lambda fam, version=1: with_environment_key(original(fam, version)))
    proto_wired, table_wired = split_environment(demo)
    wired = simulate_with_environment(proto_wired, table_wired)
    assert wired.provenance.engine in ("closed_form", "lindblad")
    for name in ("witness_optimised", "log_negativity", "purity"):
        np.testing.assert_allclose(wired.series[name], here.series[name], rtol=1e-12, atol=1e-14)


def test_spin_dephasing_limit_equals_the_early_time_analytic_threshold():
    # DERIVED here (first-order expansion, not from a paper): for CZ(theta)|++> with every branch coherence of
    # both bodies damped as exp(-gamma t), the optimised witness (sum of the two largest correlation singular
    # values) is W ~ T_xx + |T_yz| = exp(-2 gamma t)(1 + cos theta)/2 + exp(-gamma t) sin(theta)/2
    #   ~ 1 - 2 gamma t + omega t / 2   (theta = omega t),
    # so some early time certifies entanglement iff gamma < |omega|/4. The root-found 1/T2 must sit there.
    from gqsim.protocol.reader import load_protocol
    from gqsim.superposition.run import build

    path = HERE.parent.parent / "protocols" / "inline-qubits.toml"
    omega = build(load_protocol(path)).analytic_entangling_rate_rad_s()
    limit = tolerable_limit(tomllib.loads(path.read_text(encoding="utf-8")), "spin_dephasing")
    # root xtol 2.3e-4 relative, plus second-order terms at the first grid step, O(omega dt) = 1.3e-3
    assert limit.value == pytest.approx(abs(omega) / 4, rel=2e-3)


def test_rule_of_thumb_estimate_is_reported_next_to_the_simulated_limit(demo):
    # the rule of thumb puts each body's rate at |omega|/2; the early-time analysis above shows the witness
    # needs |omega|/4 per body, so with one dominant linear source the estimate is twice the simulated limit
    from gqsim.superposition import rule_of_thumb_limit

    estimate = rule_of_thumb_limit(demo, "pressure")
    limit = tolerable_limit(demo, "pressure")
    assert estimate / limit.value == pytest.approx(2.0, rel=2e-3)  # gas is 99.99 % of the rate; root tolerances
    out = CliRunner().invoke(cli, ["noise", "limit", str(DEMO), "pressure"])
    assert out.exit_code == 0 and "rule of thumb" in out.output
