"""Command line, notebook API, result object and bundled protocols."""

import dataclasses
import json
import tomllib
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

import gqsim
from gqsim.cli import cli
from gqsim.report.tables import OUTPUT_FILES

ROOT = Path(__file__).resolve().parent.parent
PROTOCOLS = sorted(p for p in (ROOT / "protocols").glob("*.toml") if not p.name.startswith("sweep-"))


def test_public_namespace_is_pinned():
    # Changing the public API is a decision, not an accident: update this list on purpose.
    assert sorted(gqsim.__all__) == sorted([
        "__version__", "ConvergenceError", "EngineError", "GqsimError", "PhysicsError", "Protocol",
        "ProtocolError", "REFERENCES", "Result", "build", "cite", "concurrence", "entangling_rate_estimate",
        "load_protocol", "log_negativity", "mass_for_entangling_rate", "negativity", "optimal_witness_frame",
        "parse_protocol", "partial_transpose", "plot_measures", "purity", "simulate", "spin_witness_lab",
        "spin_witness_optimised", "summary_table", "write_outputs",
        "CertifyOptions", "certify_result", "read_certify_file", "force_budget", "noise_budget",
        "tolerable_limit", "load_sweep", "run_sweep", "compare_routes",
    ])
    for name in gqsim.__all__:
        assert hasattr(gqsim, name), name


def test_command_list_is_pinned():
    # Adding or renaming a command is a decision: update this list (and README) on purpose.
    assert sorted(cli.commands) == ["certify", "check", "compare-routes", "forces", "noise", "run", "scan"]
    assert sorted(cli.commands["forces"].commands) == ["budget", "safe-gap"]
    assert sorted(cli.commands["noise"].commands) == ["budget", "limit"]
    assert sorted(cli.commands["scan"].commands) == ["export", "map", "run", "status", "threshold"]


def test_version_option():
    result = CliRunner().invoke(cli, ["--version"])
    assert result.exit_code == 0
    assert result.output.strip() == f"gqsim {gqsim.__version__}"


@pytest.mark.parametrize("path", PROTOCOLS, ids=lambda p: p.name)
def test_every_bundled_protocol_runs_and_emits_json(path):
    result = CliRunner().invoke(cli, ["run", str(path), "--json"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.output)
    assert isinstance(doc["times_s"], list) and len(doc["times_s"]) >= 2
    assert isinstance(doc["series"], dict) and doc["series"]
    assert isinstance(doc["summary"], dict)
    for values in doc["series"].values():
        assert len(values) == len(doc["times_s"])
    # issue 4: every run shows its noise budget
    assert {"quantity", "rows"} <= set(doc["summary"]["noise_budget"])


def test_inline_json_carries_trade_names_and_log_base():
    result = CliRunner().invoke(cli, ["run", str(ROOT / "protocols" / "inline-qubits.toml"), "--json"])
    doc = json.loads(result.output)
    assert {"log_negativity", "concurrence", "negativity", "purity"} <= set(doc["series"])
    assert doc["units"]["log_negativity"] == "ebit (log2)"
    assert doc["summary"]["concurrence"]["max"] == pytest.approx(0.156323, abs=1e-6)  # shared §1.3


def test_run_writes_all_files(tmp_path):
    out = tmp_path / "run"
    result = CliRunner().invoke(cli, ["run", str(ROOT / "protocols" / "side-by-side-qubits.toml"), "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "log-negativity" in result.output
    for name in OUTPUT_FILES:
        assert (out / name).stat().st_size > 0, name
    header = (out / "series.csv").read_text().splitlines()[0]
    assert header.startswith("time_s,log_negativity [ebit (log2)]")
    resolved = tomllib.loads((out / "protocol.resolved.toml").read_text())
    assert gqsim.parse_protocol(resolved).family == "superposition"
    summary = json.loads((out / "summary.json").read_text())
    assert summary["provenance"]["engine"] == "closed_form"


def test_check_command_validates_only():
    result = CliRunner().invoke(cli, ["check", str(ROOT / "protocols" / "qutrit-inline.toml")])
    assert result.exit_code == 0
    assert "valid superposition protocol" in result.output


def test_natural_log_is_labelled(tmp_path):
    proto = gqsim.load_protocol(ROOT / "protocols" / "inline-qubits.toml").to_dict()
    proto["output"] = {"log_base": "e"}
    result = gqsim.simulate(gqsim.parse_protocol(proto))
    assert result.units["log_negativity"] == "nat (ln)"
    # E_N[nats] = E_N[bits] * ln 2 (shared conventions).
    assert result.series["log_negativity"][-1] == pytest.approx(0.209545 * np.log(2), abs=1e-6)


def test_notebook_three_lines_and_immutable_result():
    protocol = gqsim.load_protocol(ROOT / "protocols" / "inline-qubits.toml")
    result = gqsim.simulate(protocol)
    assert isinstance(result, gqsim.Result)
    with pytest.raises(ValueError):
        result.series["concurrence"][0] = 1.0
    with pytest.raises(TypeError):
        result.series["new"] = np.zeros(3)
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.times_s = np.zeros(3)
    html = result._repr_html_()
    assert "<table>" in html and "closed_form" in html
    prov = result.provenance
    assert prov.engine == "closed_form"
    assert {"gqsim", "numpy", "scipy", "qutip"} <= set(prov.versions)
    assert prov.protocol["family"] == "superposition"
    assert "Result(" in repr(result)


def test_result_json_round_trip_keeps_values():
    result = gqsim.simulate(ROOT / "protocols" / "inline-qubits.toml")
    doc = json.loads(json.dumps(result.to_json_dict()))
    np.testing.assert_array_equal(np.array(doc["times_s"]), result.times_s)
    for name, values in result.series.items():
        np.testing.assert_array_equal(np.array(doc["series"][name]), values)


def test_plot_takes_and_returns_axes():
    import matplotlib.pyplot as plt

    result = gqsim.simulate(ROOT / "protocols" / "side-by-side-qubits.toml")
    fig, ax = plt.subplots()
    assert gqsim.plot_measures(result, ax=ax) is ax
    assert ax.get_xlabel() == "time t [s]"
    plt.close(fig)


def test_noise_budget_of_spin_errors_in_the_run_summary():
    # Pure dephasing of a spin is 1/T2 - 1/(2 T1) (Nielsen & Chuang 2010, Sec. 8.3, from memory):
    # T1 = 60 s, T2 = 20 s gives 0.041667 /s; shares of one body sum to 1.
    result = gqsim.simulate(ROOT / "protocols" / "split-hold-recombine.toml")
    rows = [r for r in result.summary["noise_budget"]["rows"] if r["body"] == "Tern"]
    by_channel = {r["channel"]: r["rate"] for r in rows}
    assert by_channel["spin pure dephasing (T2)"] == pytest.approx(1 / 20 - 1 / 120, rel=1e-12)
    assert by_channel["spin relaxation (T1)"] == pytest.approx(1 / 120, rel=1e-12)
    assert sum(r["share"] for r in rows) == pytest.approx(1.0, rel=1e-12)


def test_summary_table_reports_the_minimum_of_criteria_that_signal_by_dropping():
    """Simon's eigenvalue and Duan's sum signal entanglement by going below a bound: the table
    gives their minimum (the series' own minimum, not its maximum) and marks it."""
    result = gqsim.simulate(ROOT / "protocols" / "osc-squeezed-pair.toml")
    lines = gqsim.summary_table(result).splitlines()
    row = next(line for line in lines if line.startswith("simon min eigenvalue"))
    lam = np.asarray(result.series["simon_min_eigenvalue"])
    value, which = row.split()[-4:-2]
    assert which == "min" and float(value) == pytest.approx(lam.min(), rel=1e-5)
    assert lam.min() < 0 and abs(lam.max() - lam.min()) > 1e-3 * abs(lam.min())  # min and max differ
    en_row = next(line for line in lines if line.startswith("log-negativity"))
    assert en_row.split()[-3] == "max"
