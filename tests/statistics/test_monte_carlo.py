"""Seeded Monte-Carlo of measurement records against the analytic repetition counts.

Tolerances are 4 binomial (or normal) standard errors of the Monte-Carlo estimate itself:
a correct implementation fails such a check with probability ~6e-5 per assertion, and the
seed is fixed, so the test is deterministic.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from gqsim.errors import ProtocolError
from gqsim.studies.certification.statistics import estimate_from_counts, monte_carlo_check, plan_repetitions, simulate_records
from gqsim.studies.certification.witness_design import ReadoutModel, optimal_ppt_witness, setting_table, spin_correlation_witness
from tests.statistics.stat_states import branch_phase_state, cz_plus_plus, dephased

N_SE = 4.0  # standard errors allowed between a Monte-Carlo estimate and its prediction
READOUT = ReadoutModel(assignment_fidelity_a=[0.97, 0.92], assignment_fidelity_b=0.95,
                       detection_efficiency_a=0.8, detection_efficiency_b=0.9)


def _frac_tol(p: float, trials: int) -> float:
    return N_SE * np.sqrt(p * (1 - p) / trials)


def test_same_seed_same_record_and_different_seed_differs():
    table = setting_table(spin_correlation_witness(), cz_plus_plus(2.2), READOUT)
    a = simulate_records(table, [100, 100], trials=50, seed=123)
    b = simulate_records(table, [100, 100], trials=50, seed=123)
    c = simulate_records(table, [100, 100], trials=50, seed=124)
    for x, y in zip(a, b):
        np.testing.assert_array_equal(x, y)
    assert not np.array_equal(a[1], c[1])
    kept, counts = a
    np.testing.assert_array_equal(counts.sum(axis=-1), kept)  # every kept shot lands on one outcome


def test_kept_shots_follow_binomial_detection():
    # Detection: kept ~ Binomial(N, eta_a eta_b); compare the mean with scipy.stats.binom.
    table = setting_table(spin_correlation_witness(), cz_plus_plus(2.2), READOUT)
    trials, n = 4000, 200
    kept, _ = simulate_records(table, [n, n], trials=trials, seed=5)
    eta = 0.8 * 0.9
    sd_mean = np.sqrt(stats.binom.var(n, eta) / trials)
    assert abs(kept.mean(axis=0) - stats.binom.mean(n, eta)).max() <= N_SE * sd_mean


@pytest.mark.parametrize("witness_kind", ["spin", "ppt"])
def test_monte_carlo_reproduces_analytic_sd_and_certification_rate(witness_kind):
    # At the analytic N (k = 3, optimal split) the expected value sits k sd from the bound, so the
    # normal approximation predicts certification in ~50 % of experiments (a little more: N is
    # rounded up); at (4/3)^2 N, margin/sd = 4 and the prediction is Phi(1) = 0.84. The sample mean
    # and sd of the estimate must match the analytic values (binomial error propagation,
    # physics-references Sec. 6). Far tails (Phi(3)) are not compared: there the normal
    # approximation itself is off by more than the Monte-Carlo error at these N.
    rho = cz_plus_plus(2.2)
    witness = spin_correlation_witness() if witness_kind == "spin" else optimal_ppt_witness(rho, (2, 2))
    table = setting_table(witness, rho, READOUT)
    plan = plan_repetitions(table, sigmas=3.0)
    trials = 4000
    for scale in (1.0, 16 / 9):
        shots = np.ceil(plan.per_setting[0] * scale)
        mc = monte_carlo_check(table, shots, sigmas=3.0, trials=trials, seed=2024)
        assert abs(mc.mean_estimate - mc.expected_value) <= N_SE * mc.analytic_sd / np.sqrt(trials)
        # sd of a sample sd of a near-normal variable: sd / sqrt(2 (T - 1)); 3 % extra for the
        # few-shot shape and the binomial spread of kept shots (O(1/N) corrections).
        assert mc.sample_sd == pytest.approx(mc.analytic_sd, rel=N_SE / np.sqrt(2 * (trials - 1)) + 0.03)
        p = mc.predicted_certified_fraction
        assert 0.5 <= p <= (0.9 if scale > 1 else 0.7)
        assert abs(mc.certified_fraction - p) <= _frac_tol(p, trials) + 0.02  # 0.02: O(1/sqrt N) skew
    assert plan.margin[0] >= 3.0 * np.sqrt(np.sum(plan.standard_deviation_one_shot[0] ** 2
                                                  / (plan.per_setting[0] * READOUT.detection_efficiency)))


def test_one_sigma_interval_coverage():
    # Coverage of the one-sided interval [W_hat - k se, inf): predicted Phi(k) (normal
    # approximation), checked at k = 1 where 4000 trials resolve it to +-0.023.
    rho = cz_plus_plus(2.5)
    table = setting_table(spin_correlation_witness(), rho, READOUT)
    mc = monte_carlo_check(table, [400, 400], sigmas=1.0, trials=4000, seed=77)
    assert mc.predicted_coverage == pytest.approx(stats.norm.cdf(1.0))
    assert abs(mc.coverage - mc.predicted_coverage) <= _frac_tol(mc.predicted_coverage, 4000)
    # With 400 shots per setting the estimated standard error is as good as the true one.
    assert abs(mc.coverage_plugin - mc.predicted_coverage) <= _frac_tol(mc.predicted_coverage, 4000)
    assert mc.agrees


def test_qutrit_ppt_witness_monte_carlo():
    # Dephased three-branch phase state (physics-references Secs. 1.7, 1.8): optimal Gell-Mann
    # settings; the Monte-Carlo mean must reproduce Tr(W rho) (corrected readout is unbiased).
    phases = np.array([[0.0, 0.3, 1.1], [0.2, 0.0, 0.4], [0.9, 0.1, 0.0]]) * 2
    rho = dephased(branch_phase_state(phases), (3, 3), 0.05)
    witness = optimal_ppt_witness(rho, (3, 3))
    readout = ReadoutModel(assignment_fidelity_a=0.95, assignment_fidelity_b=[0.9, 0.95, 0.97])
    table = setting_table(witness, rho, readout)
    plan = plan_repetitions(table, sigmas=3.0)
    trials = 1000
    mc = monte_carlo_check(table, plan.per_setting[0] * 4, sigmas=3.0, trials=trials, seed=9)
    assert mc.expected_value == pytest.approx(float(witness.value(rho)), abs=1e-10)
    assert abs(mc.mean_estimate - mc.expected_value) <= N_SE * mc.analytic_sd / np.sqrt(trials)
    assert mc.sample_sd == pytest.approx(mc.analytic_sd, rel=N_SE / np.sqrt(2 * (trials - 1)) + 0.03)


def test_estimate_from_counts_on_hand_made_record():
    # Two +-1 settings with all shots on +1 and -1 respectively: W_hat = 1 - 1 = 0, sample var 0.
    table = setting_table(spin_correlation_witness(), cz_plus_plus(2.2))
    kept = np.array([10, 10])
    plus_a = [10, 0, 0, 0]  # outcome (0, 0): X = +1, Z = +1 -> XZ = +1
    minus_b = [0, 10, 0, 0]  # outcome (0, 1): Y = +1, Y = -1 -> YY = -1
    est, se = estimate_from_counts(table, kept, np.array([plus_a, minus_b]))
    assert est == pytest.approx(0.0, abs=1e-12)
    assert se == pytest.approx(0.0, abs=1e-7)  # sqrt of float64 round-off in E[f^2] - E[f]^2


def test_bad_shot_counts_are_refused():
    table = setting_table(spin_correlation_witness(), cz_plus_plus(2.2))
    with pytest.raises(ProtocolError, match="shots"):
        simulate_records(table, [10], trials=5, seed=0)
    with pytest.raises(ProtocolError, match="trials"):
        simulate_records(table, [10, 10], trials=0, seed=0)
