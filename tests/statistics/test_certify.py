"""Certification report and the ``gqsim certify`` command."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from gqsim.studies.certification.plan import (
    CertifyOptions,
    certify_result,
    options_from_mapping,
    plot_repetitions,
    write_certification,
)
from gqsim.cli import cli
from gqsim.errors import ProtocolError
from gqsim.record import Provenance, Result
from gqsim.studies.certification.statistics import best_measurement_time
from tests.statistics.stat_states import branch_phase_state, cz_plus_plus, dephased

ROOT = Path(__file__).resolve().parents[2]
HERE = Path(__file__).resolve().parent
OMEGA = 0.237527   # rad/s: parallel geometry, m = 1e-14 kg (physics-references Sec. 1.6)
GAMMA = 0.05       # 1/s: dephasing per body (Sec. 1.8)


def _result(states, times, dims=(2, 2), series=None, family="superposition"):
    prov = Provenance(protocol={}, source="<test>", engine="test", options={}, versions={})
    return Result(times_s=times, series=series or {}, units={k: "1" for k in (series or {})}, summary={},
                  provenance=prov, states=states, dims=dims, family=family)


def _dephased_scan(times):
    states = np.stack([dephased(cz_plus_plus(OMEGA * t), (2, 2), GAMMA * t) for t in times])
    neg = np.array([-min(0.0, np.linalg.eigvalsh(s.reshape(2, 2, 2, 2).transpose(0, 3, 2, 1).reshape(4, 4)).min())
                    for s in states])
    return states, {"negativity": neg}


def test_report_on_dephased_parallel_pair():
    # physics-references Sec. 1.8: with gamma = 0.05 1/s the entanglement peaks at t* = 7.61 s.
    times = np.linspace(0.05, 12.0, 240)
    states, series = _dephased_scan(times)
    result = _result(states, times, series=series)
    report = certify_result(result, CertifyOptions(sigmas=3.0, overhead_s=0.0, trials=1000, seed=4))
    assert report.peak_time_s == pytest.approx(7.61, abs=times[1] - times[0])
    rows = {r["witness"]: r for r in report.rows()}
    ppt = rows["optimal_ppt"]
    # With zero overhead the lab time N t is cheapest strictly before the minimum of N, which
    # for this witness sits within a grid step of the negativity peak (margin = negativity).
    assert ppt["certifiable"] and ppt["best_time_s"] < report.peak_time_s
    assert ppt["value"] < 0
    # the optimal split puts shots in proportion to each setting's single-shot sd (Neyman)
    sd, per = ppt["single_shot_sd"], ppt["per_setting"]
    ratios = [per[k] / sd[k] for k in per if sd[k] > 0.05]
    assert max(ratios) / min(ratios) < 1.05  # equal up to rounding up of ~100-shot settings
    assert ppt["monte_carlo"]["agrees"]
    # Spin witness under the Sec. 1.8 dephasing: <XZ> carries one off-diagonal factor e^{-gamma t},
    # <YY> two, so W = (1 - cos theta)(e^{-gamma t} + e^{-2 gamma t})/2 (derived from Sec. 1.5/1.8);
    # it stays below 1 on this grid, so the report calls it not certifiable.
    theta = OMEGA * times
    expected_w = (1 - np.cos(theta)) * (np.exp(-GAMMA * times) + np.exp(-2 * GAMMA * times)) / 2
    np.testing.assert_allclose(report.plans["spin_correlation"].values, expected_w, atol=1e-12)
    assert expected_w.max() < 1 and rows["spin_correlation"]["certifiable"] is False
    # A very long overhead pushes the best time to the least-repetitions time.
    slow = certify_result(result, CertifyOptions(sigmas=3.0, overhead_s=1e7, builtin=("optimal_ppt",)))
    plan = slow.plans["optimal_ppt"]
    i_min = int(np.argmin(plan.total))
    i_best = best_measurement_time(times, plan.total, 1e7)[0]
    assert plan.total[i_best] == plan.total[i_min]


def test_custom_witness_from_file_mapping_matches_reference_formula():
    # physics-references Sec. 1.5: Tr[(I - XZ - YY - ZX) rho] = 1 - 3(1 - cos theta)/2 on CZ(theta)|++>.
    times = np.linspace(0.5, 13.0, 60)
    states = np.stack([cz_plus_plus(OMEGA * t) for t in times])
    opts = options_from_mapping({
        "target": {"sigmas": 3, "overhead_s": 1.0},
        "witnesses": {"builtin": [], "custom": [
            {"label": "three_term", "expression": "1 - X@Z - Y@Y - Z@X", "separable_bound": 0.0}]},
    })
    report = certify_result(_result(states, times), opts)
    np.testing.assert_allclose(report.plans["three_term"].values, 1 - 1.5 * (1 - np.cos(OMEGA * times)), atol=1e-12)
    first = times[np.isfinite(report.plans["three_term"].total)][0]
    assert OMEGA * first > np.arccos(1 / 3)  # only certifiable once cos(theta) < 1/3 (Sec. 1.5)


def test_duan_plan_from_covariances():
    # Two-mode squeezed vacuum, r growing in time: Duan value 2 e^{-2r} (physics-references Sec. 5.3).
    times = np.linspace(0.0, 1.0, 11)
    r = 0.3 * times
    c, s = np.cosh(2 * r), np.sinh(2 * r)
    cov = np.zeros((times.size, 4, 4))
    for i in range(times.size):
        z = np.diag([1.0, -1.0])
        cov[i] = np.block([[c[i] * np.eye(2), s[i] * z], [s[i] * z, c[i] * np.eye(2)]])
    result = _result(None, times, dims=(), series={"log_negativity": 2 * r}, family="oscillators")
    report = certify_result(result, CertifyOptions(sigmas=3.0, overhead_s=5.0), covariances=cov,
                            position_scale_m=np.array([1e-15, 1e-15]))
    plan = report.plans["duan"]
    np.testing.assert_allclose(plan.value, 2 * np.exp(-2 * r), atol=1e-9)
    assert np.isinf(plan.total[0]) and np.isfinite(plan.total[-1])
    # Sec. 5.1: the fitted-covariance statistic is E_N = 2r nats for the TMSV.
    est = report.plans["estimated_log_negativity"]
    np.testing.assert_allclose(est.value, 2 * r, atol=1e-9)
    assert np.isinf(est.total[0]) and np.isfinite(est.total[-1])
    # Linear PPT witness on the fitted covariance: value 1 - e^{-2r} (TMSV, Sec. 5.1 nu~ = e^{-2r}).
    np.testing.assert_allclose(report.plans["covariance_witness"].value, 1 - np.exp(-2 * r), atol=1e-12)
    assert {row["witness"] for row in report.rows()} == {"duan", "estimated_log_negativity", "covariance_witness"}
    assert "optimal_ppt" in report.skipped


@pytest.mark.parametrize("data, key", [
    ({"target": {"confidence": 1.0}}, "confidence"),
    ({"readout": {"assignment_fidelity_a": 1.5}}, "assignment_fidelity_a"),
    ({"readout": {"detection_efficiency_b": 0}}, "detection_efficiency_b"),
    ({"target": {"bogus": 1}}, "target.bogus"),
    ({"witnesses": {"builtin": ["magic"]}}, "witnesses.builtin"),
    ({"witnesses": {"custom": [{"label": "w", "expression": "X@Q", "separable_bound": 0}]}}, "witnesses.custom[w]"),
    ({"witnesses": {"custom": [{"label": "w", "expression": "1j*X@Z", "separable_bound": 0}]}}, "witnesses.custom[w]"),
    ({"witnesses": {"custom": [{"label": "w", "expression": "X@Z"}]}}, "witnesses.custom[0].separable_bound"),
    ({"witnesses": {"custom": [{"label": "w", "expression": "1 - X@Z - Y@Y", "separable_bound": 0.5}]}},
     "witnesses.custom[w].separable_bound"),
])
def test_bad_certification_file_is_one_line_error(data, key):
    times = np.array([1.0, 2.0])
    result = _result(np.stack([cz_plus_plus(2.0)] * 2), times)
    with pytest.raises(ProtocolError) as info:
        certify_result(result, options_from_mapping(data))
    assert str(info.value).startswith(key) and "\n" not in str(info.value)


def test_plot_and_files(tmp_path):
    times = np.linspace(0.5, 12.0, 24)
    states, series = _dephased_scan(times)
    report = certify_result(_result(states, times, series=series), CertifyOptions(sigmas=3.0, overhead_s=2.0))
    assert "optimal_ppt" in report._repr_html_()
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots()
    assert plot_repetitions(report, ax=ax) is ax
    plt.close(fig)
    paths = write_certification(report, tmp_path)
    assert [p.name for p in paths] == ["certify.json", "certify.csv", "certify.png"]
    data = json.loads(paths[0].read_text())
    assert data["rows"][0]["witness"] == "optimal_ppt"
    assert len(data["series"]["optimal_ppt"]["total_repetitions"]) == times.size


def test_cli_certify_on_demo_protocol(tmp_path):
    protocol = HERE / "fixtures" / "side-by-side-coarse.toml"  # bundled demo on a coarser grid
    plan = tmp_path / "plan.toml"
    plan.write_text('[target]\nconfidence = 0.99\noverhead_s = 30.0\n'
                    '[readout]\nassignment_fidelity_a = [0.99, 0.97]\nassignment_fidelity_b = 0.98\n'
                    '[check]\ntrials = 500\nseed = 3\n')
    run = CliRunner().invoke(cli, ["certify", str(protocol), "--plan", str(plan), "--json",
                                   "--out", str(tmp_path / "out")])
    assert run.exit_code == 0, run.output
    data = json.loads(run.output)
    row = next(r for r in data["rows"] if r["witness"] == "optimal_ppt")
    assert row["certifiable"] and row["total_repetitions"] > 0
    assert (tmp_path / "out" / "certify.png").exists()
    again = CliRunner().invoke(cli, ["certify", str(protocol), "--plan", str(plan), "--json"])
    assert json.loads(again.output)["rows"] == data["rows"]  # same seed, same Monte-Carlo record


def test_cli_certify_bad_plan_is_one_line_exit_2(tmp_path):
    protocol = HERE / "fixtures" / "side-by-side-coarse.toml"
    plan = tmp_path / "plan.toml"
    plan.write_text("[readout]\nassignment_fidelity_a = 1.2\n")
    run = CliRunner().invoke(cli, ["certify", str(protocol), "--plan", str(plan)])
    assert run.exit_code == 2
    assert run.output.strip().count("\n") == 0 and "assignment_fidelity_a" in run.output


def test_cli_certify_oscillator_protocol_runs():
    run = CliRunner().invoke(cli, ["certify", str(HERE / "fixtures" / "osc-squeezed-pair.toml"), "--sigmas", "3"])
    assert run.exit_code == 0, run.output
    assert "duan" in run.output


def test_repetitions_vary_smoothly_with_time():
    # The Schmidt vectors' phases are free (they leave W unchanged); fixing them by minimising the
    # shots removes the jumps an arbitrary SVD phase causes between neighbouring times (up to
    # ~70 % on this scan without it). States: raw-frame branch phases of the in-line Bose
    # geometry, phi_ij(t) = phi_ij(2.5 s) t / 2.5 s (physics-references Sec. 1.3 table, m = 1e-14 kg).
    # On a 0.01 s grid the margin changes by < 1 %, so N may change by a few % (10 % bound:
    # N ~ 1/margin^2 plus integer rounding of settings with ~500 shots).
    phases_end = np.array([[0.351607, 0.226033], [0.791115, 0.351607]])
    times = np.linspace(1.5, 2.5, 101)
    states = np.stack([branch_phase_state(phases_end * t / 2.5) for t in times])
    plan = certify_result(_result(states, times), CertifyOptions(sigmas=3.0, builtin=("optimal_ppt",))).plans["optimal_ppt"]
    jumps = np.abs(np.diff(plan.total)) / plan.total[:-1]
    assert jumps.max() < 0.10


def test_reported_frames_and_expression_rebuild_the_witness():
    # An experimenter should be able to rebuild the measured operator from the JSON alone:
    # expression (gqsim syntax) in the reported local frames gives the reported value Tr(W rho).
    from gqsim.studies.certification.witness_design import Witness, parse_witness

    times = np.linspace(0.5, 12.0, 24)
    states, series = _dephased_scan(times)
    report = certify_result(_result(states, times, series=series), CertifyOptions(sigmas=3.0, overhead_s=2.0))
    data = json.loads(json.dumps(report.to_json_dict()))
    for row in data["rows"]:
        if "frames_at_best_time" not in row:
            continue
        fr = row["frames_at_best_time"]
        frame = {k: np.array(fr[k]["real"]) + 1j * np.array(fr[k]["imag"]) for k in ("frame_a", "frame_b")}
        plain = parse_witness(fr["expression"], (2, 2), bound=0.0)
        w = Witness(name="rebuilt", dims=(2, 2), terms=plain.terms, bound=0.0, **frame)
        i = int(np.argmin(np.abs(times - row["best_time_s"])))
        # the expression prints 6 significant digits: ~5e-7 per O(0.5) coefficient, a few coefficients
        assert w.value(states[i]) == pytest.approx(row["value"], abs=5e-6)


def test_oscillator_covariances_come_from_the_run():
    """The Duan plan's covariances are the run's own lab-frame series (no second evolution),
    equal to the exact Gaussian engine's (gqsim.oscillators.solve_moments) to rounding."""
    import gqsim
    from gqsim.studies.certification.plan import oscillator_covariances

    proto = gqsim.load_protocol(Path(__file__).resolve().parents[2] / "protocols" / "osc-squeezed-pair.toml")
    result = gqsim.simulate(proto)
    from_run, scale = oscillator_covariances(proto, result)
    rerun, scale_again = oscillator_covariances(proto)
    assert from_run.shape == (result.times_s.size, 4, 4)
    np.testing.assert_allclose(from_run, rerun, rtol=1e-12, atol=1e-12 * np.abs(rerun).max())
    np.testing.assert_array_equal(scale, scale_again)
