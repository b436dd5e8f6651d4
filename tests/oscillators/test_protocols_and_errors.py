"""Bundled osc-* protocols, the free-fall law (extended-precision path) and one-line bad-input errors."""

import math
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.constants import G

from gqsim import families as pipeline
from gqsim.cli import cli
from gqsim.errors import PhysicsError, ProtocolError
from gqsim.oscillators import simulate
from tests.oscillators.helpers import pair, protocol

PROTOCOLS = Path(__file__).resolve().parents[2] / "protocols"
BUNDLED = sorted(PROTOCOLS.glob("osc-*.toml"))


def test_five_bundled_protocols_exist():
    names = {p.stem for p in BUNDLED}
    assert {"osc-ground-pair", "osc-squeezed-pair", "osc-release-pair", "osc-chain-three", "osc-warm-pair",
            "osc-inverted-boost"} <= names


@pytest.mark.parametrize("path", BUNDLED, ids=lambda p: p.stem)
def test_bundled_protocols_run_through_the_pipeline(path):
    result = pipeline.simulate(path)
    assert result.family == "oscillators"
    assert result.units["log_negativity"].startswith("nats")
    en = result["log_negativity"]
    if path.stem == "osc-warm-pair":
        # about 1000 phonons against the threshold n* ~ lambda ~ 1e-9 (shared §2.2): never entangled
        assert not result.summary["log_negativity"]["signals_entanglement"]
        assert np.all(en == 0.0)
    else:
        assert result.summary["log_negativity"]["signals_entanglement"]
    if path.stem == "osc-ground-pair":
        # first-order quench law 2 lambda (analytic.py), small heating included
        assert result.summary["analytic"]["quench_max_ratio"] == pytest.approx(1.0, abs=0.01)
    if path.stem == "osc-squeezed-pair":
        assert result.summary["analytic"]["squeezed_growth_ratio"] == pytest.approx(1.0, abs=0.02)
    if path.stem == "osc-release-pair":
        assert result.summary["analytic"]["free_fall_ratio"] == pytest.approx(1.0, abs=0.01)
    if path.stem == "osc-chain-three":
        # end-to-end coupling is (1/2)^3 of the neighbour coupling: E_N ratio ~ 1/8 at first order
        ratio = result["log_negativity[first|last]"].max() / result["log_negativity[first|middle]"].max()
        assert ratio == pytest.approx(1 / 8, rel=0.01)


@pytest.mark.parametrize("r, expected", [(0.0, 6.6679e-3), (0.5, 1.8122e-2), (1.0, 4.9243e-2)])
def test_released_masses_match_the_shared_free_fall_values(r, expected):
    # shared §2.2 [DERIVED with independent covariance code]: released from omega_0 with eta = G m/(d^3 omega_0^2)
    # = 1e-8, E_N at omega_0 t = 100 is 6.6679e-3 (r = 0), 1.8122e-2 (r = 0.5), 4.9243e-2 (r = 1); the law
    # (2/3) e^{2r} (G m/d^3) omega_0 t^3 gives 6.667e-3 e^{2r}. The covariance condition number here is ~1e8,
    # so this exercises the interaction-frame extended-precision path.
    m, d = 1.0, 0.05
    omega0 = math.sqrt(G * m / (d**3 * 1e-8))
    initial = {"squeeze_r": r, "squeeze_angle_rad": 0.0} if r else None
    data = pair(mass_kg=m, distance_m=d, trap_hz=omega0 / (2 * math.pi), initial=initial)
    data["stages"] = [{"label": "free", "duration_s": 100 / omega0, "trap_hz": 0.0}]
    data["time_grid"] = {"times_s": [0.0, 50 / omega0, 100 / omega0]}
    result = simulate(protocol(data))
    assert "interaction frame" in result.summary["gaussian_path"]
    assert result["log_negativity"][-1] == pytest.approx(expected, rel=1e-4)  # table to 5 significant figures
    law = (2 / 3) * math.exp(2 * r) * G * m / d**3 * omega0 * (100 / omega0) ** 3
    assert result["log_negativity"][-1] == pytest.approx(law, rel=0.02)


def test_precise_path_agrees_with_float64_where_both_are_accurate():
    # a mildly sheared run (condition ~1e3) computed both ways: the frame change is exact
    from gqsim.oscillators.channels import build_channels
    from gqsim.oscillators.solve_moments import evolve_gaussian, evolve_gaussian_precise
    from gqsim.oscillators import measures
    from gqsim.oscillators.run import build

    data = pair(lam=0.01, points=6)
    data["stages"] = [{"label": "free", "duration_s": 5.0 / (2 * math.pi * data["bodies"][0]["trap_hz"]),
                       "trap_hz": 0.0}]
    model = build(protocol(data))
    dyn = build_channels(model)
    fast = evolve_gaussian(model, dyn)
    slow = evolve_gaussian_precise(model, dyn, digits=40)
    assert np.allclose(fast.covariances, slow.covariances, rtol=1e-11, atol=1e-11)
    assert np.allclose(measures.log_negativity(fast.covariances, [1]),
                       measures.log_negativity(slow.interaction_covariances, [1]), atol=1e-11)


# --- bad input: one-line errors naming the key ------------------------------------------------


def _expect(data, error, match):
    with pytest.raises(error, match=match):
        simulate(protocol(data))


def test_zero_trap_frequency_where_a_trap_is_required():
    data = pair(trap_hz=1.0, duration_s=1.0)
    data["bodies"][0]["trap_hz"] = 0.0
    _expect(data, ProtocolError, r"trap_hz.*must be > 0 Hz")


def test_unstable_mode():
    data = pair(lam=1e-3)
    data["stages"] = [{"label": "soft", "duration_s": 1.0, "trap_hz": 1e-9}]
    _expect(data, PhysicsError, r"mode A\.x .*inverted_modes")


def test_negative_occupation():
    _expect(pair(lam=1e-3, initial={"occupation": -0.5}), ProtocolError, r"occupation.*>= 0")


def test_squeezing_without_an_angle():
    _expect(pair(lam=1e-3, initial={"squeeze_r": 0.5}), ProtocolError, r"squeeze_angle_rad.*required")


def test_more_bodies_than_positions():
    data = pair(lam=1e-3)
    for body in data["bodies"]:
        del body["position_m"]
    data["bodies"].append(dict(data["bodies"][0], label="C"))
    data["arrangement"] = {"positions_m": [[0.0, 0.0, 0.0], [0.05, 0.0, 0.0]]}
    _expect(data, ProtocolError, r"arrangement\.positions_m.*one position per body \(3 bodies\)")


def test_inverted_mode_must_exist():
    data = pair(lam=1e-3)
    data["stages"][0]["inverted_modes"] = ["Z.x"]
    _expect(data, ProtocolError, r"inverted_modes.*must name modes")


def test_unknown_key_is_rejected():
    data = pair(lam=1e-3)
    data["bodies"][0]["trap_frequency"] = 3.0
    _expect(data, ProtocolError, r"unknown key")


def test_cli_prints_one_line_and_exits_2(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('schema_version = 1\nfamily = "oscillators"\n[[bodies]]\nmass_kg = 1.0\nposition_m = [0,0,0]\n'
                   'trap_hz = 1.0\n[bodies.initial]\noccupation = -1.0\n[[bodies]]\nmass_kg = 1.0\n'
                   'position_m = [0.1,0,0]\ntrap_hz = 1.0\n[[stages]]\nduration_s = 1.0\n')
    out = CliRunner().invoke(cli, ["run", str(bad)])
    assert out.exit_code == 2
    lines = [line for line in out.output.splitlines() if line.strip()]
    assert len(lines) == 1 and "occupation" in lines[0] and "Traceback" not in out.output


def test_cli_run_json_on_a_bundled_protocol():
    import json

    out = CliRunner().invoke(cli, ["run", str(PROTOCOLS / "osc-ground-pair.toml"), "--json"])
    assert out.exit_code == 0, out.output
    doc = json.loads(out.output)
    assert {"times_s", "series", "summary"} <= set(doc)
    assert "log_negativity" in doc["series"]


def test_plot_oscillators_returns_two_axes():
    import matplotlib.pyplot as plt

    from gqsim.report.oscillator_plots import plot_oscillators

    result = simulate(protocol(pair(lam=1e-3, points=11)))
    top, bottom = plot_oscillators(result)
    assert top.get_ylabel().startswith("log-negativity") and bottom.get_ylabel().startswith("position spread")
    plt.close("all")


def test_inverted_stage_follows_first_order_law():
    # First-order perturbation theory (the derivation in gqsim/oscillators/analytic.py): starting in the
    # ground state of omega_0, an inverted potential Omega gives mode functions cosh(Omega t) - i r sinh(Omega t)
    # with r = omega_0/Omega, so E_N ~ 2 g_0 |I|, g_0 = kappa x_zpf^2/hbar,
    # I = int_0^T (cosh - i r sinh)^2 dt = C - r^2 S - 2 i r X with C = T/2 + sinh(2 Omega T)/(4 Omega),
    # S = -T/2 + sinh(2 Omega T)/(4 Omega), X = sinh^2(Omega T)/(2 Omega)
    from scipy.constants import hbar

    m = 4 / 3 * math.pi * (1e-6) ** 3 * 2200
    d, f0, f_inv, t_end = 2e-5, 1e5, 40.0, 0.03
    data = pair(mass_kg=m, distance_m=d, trap_hz=f0)
    data["stages"] = [{"label": "inverted", "duration_s": t_end, "trap_hz": f_inv, "inverted_modes": ["A.x", "B.x"]}]
    data["time_grid"] = {"times_s": [0.0, t_end]}
    result = simulate(protocol(data))
    w0, big = 2 * math.pi * f0, 2 * math.pi * f_inv
    r = w0 / big
    c = t_end / 2 + math.sinh(2 * big * t_end) / (4 * big)
    s = -t_end / 2 + math.sinh(2 * big * t_end) / (4 * big)
    x = math.sinh(big * t_end) ** 2 / (2 * big)
    g0 = 2 * G * m * m / d**3 * hbar / (2 * m * w0) / hbar
    law = 2 * g0 * abs(complex(c - r * r * s, -2 * r * x))
    assert result["log_negativity"][-1] == pytest.approx(law, rel=1e-3)  # first order: E_N ~ 3e-6 << 1


def test_inverted_boost_beats_free_fall():
    # Weiss et al. (PRL 127, 023601 (2021), abstract): an inverted-potential stage "dramatically boost[s]
    # the entangling rate" of two weakly interacting particles; same bodies and separation as the release
    boost = pipeline.simulate(PROTOCOLS / "osc-inverted-boost.toml")
    fall = pipeline.simulate(PROTOCOLS / "osc-release-pair.toml")
    assert boost.times_s[-1] < fall.times_s[-1] / 5
    assert boost["log_negativity"].max() > 10 * fall["log_negativity"].max()
