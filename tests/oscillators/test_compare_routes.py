"""Oscillator route vs superposition route for the same bodies (compare-routes)."""

import json
import math
from pathlib import Path

import pytest
from click.testing import CliRunner

from gqsim.cli import cli
from gqsim.oscillators import analytic
from gqsim.studies.compare import compare_routes, shared_entangling_rate
from tests.oscillators.helpers import pair, protocol

PROTOCOLS = Path(__file__).resolve().parents[2] / "protocols"


def test_closed_form_phase_rate_matches_the_direct_branch_sum():
    # theta/t = -(1/hbar)[V(d+Dx) + V(d-Dx) - 2V(d)] (Bose et al. 2017, Eq. (2), from memory), evaluated
    # directly where cancellation is harmless (Dx/d = 0.3), for both geometries
    from scipy.constants import G, hbar
    m, d, dx = 1e-14, 450e-6, 135e-6
    v = lambda r: -G * m * m / r  # noqa: E731
    inline = -(v(d + dx) + v(d - dx) - 2 * v(d)) / hbar
    side = -(2 * v(math.hypot(d, dx)) - 2 * v(d)) / hbar
    assert analytic.superposition_phase_rate_rad_s(m, m, d, dx, "in_line") == pytest.approx(inline, rel=1e-12)
    assert analytic.superposition_phase_rate_rad_s(m, m, d, dx, "side_by_side") == pytest.approx(abs(side), rel=1e-12)


def test_trapped_pair_initial_rate_follows_the_shared_law():
    # E_N = 2 lambda |sin(omega t)| has slope 2 lambda omega = 2 kappa x_zpf^2 / hbar at t = 0 (analytic.py),
    # the same law as d(theta/2)/dt of a superposition with Dx = 2 x_zpf
    data = pair(lam=1e-3, periods=0.25, points=2001)
    comparison = compare_routes(protocol(data))
    rows = {(r["route"], r["quantity"]): r["value"] for r in comparison.rows()}
    law = rows[("oscillators", "shared law 2 kappa sigma_A sigma_B / hbar (sigma at t = 0)")]
    # first 2 % of a quarter period: sin(x)/x and frequency-shift corrections below 1e-3
    assert rows[("oscillators", "initial rate dE_N/dt (simulated)")] == pytest.approx(law, rel=2e-3)
    closed_rate = 0.5 * analytic.superposition_phase_rate_rad_s(1.0, 1.0, 0.05, comparison.branch_span_m, "in_line")
    assert closed_rate == pytest.approx(rows[("superposition", "shared law 2 kappa (Dx/2)^2 / hbar")], rel=1e-9)
    assert shared_entangling_rate(-2.0, 1.0, 3.0) == pytest.approx(12.0 / 1.054571817e-34)


def test_released_pair_matches_the_superposition_with_rms_spread():
    # first order: oscillators accumulate int 2 kappa sigma(t)^2 dt / hbar, the superposition with
    # Dx = 2 sigma_rms accumulates 2 kappa sigma_rms^2 T / hbar: equal by construction of sigma_rms
    comparison = compare_routes(PROTOCOLS / "osc-release-pair.toml")
    rows = {(r["route"], r["quantity"]): r["value"] for r in comparison.rows()}
    assert rows[("both", "ratio of E_N maxima (oscillators/superposition closed form)")] == pytest.approx(1.0, abs=0.01)


def test_compare_routes_command_json_and_files(tmp_path):
    out = CliRunner().invoke(cli, ["compare-routes", str(PROTOCOLS / "osc-ground-pair.toml"), "--json",
                                   "--out", str(tmp_path)])
    assert out.exit_code == 0, out.output
    doc = json.loads(out.output)
    assert any(r["quantity"].startswith("E_N max") for r in doc["rows"])
    for name in ("routes.csv", "routes.json", "routes.png", "routes.pdf"):
        assert (tmp_path / name).exists()


def test_compare_routes_needs_two_single_mode_bodies():
    out = CliRunner().invoke(cli, ["compare-routes", str(PROTOCOLS / "osc-chain-three.toml")])
    assert out.exit_code == 2
    assert "two bodies" in out.output
