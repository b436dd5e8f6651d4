"""Duan-criterion repetition counts from sample variances (oscillators)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from gqsim.errors import ProtocolError
from gqsim.studies.certification.statistics import duan_plan, sample_variance_sd

ATOL = 1e-12  # closed-form covariance entries of size O(e^{2r}) in float64


def tmsv(r: float, n_th: float = 0.0) -> np.ndarray:
    """Two-mode squeezed (thermal) covariance, vacuum = I, order (x1, p1, x2, p2) (physics-references Sec. 5.1)."""
    c, s = np.cosh(2 * r), np.sinh(2 * r)
    z = np.diag([1.0, -1.0])
    return (2 * n_th + 1) * np.block([[c * np.eye(2), s * z], [s * z, c * np.eye(2)]])


def rotate_mode_2(cov: np.ndarray, phi: float) -> np.ndarray:
    c, s = np.cos(phi), np.sin(phi)
    rot = np.eye(4)
    rot[2:, 2:] = [[c, s], [-s, c]]
    return rot @ cov @ rot.T


@pytest.mark.parametrize("r, expected", [(0.5, 0.735759), (1.0, 0.270671)])
def test_tmsv_duan_value_matches_reference(r, expected):
    # physics-references Sec. 5.3: Var(x1 - x2) + Var(p1 + p2) = 2 e^{-2r} (a0 = -1), bound 2.
    plan = duan_plan(tmsv(r), a0=-1.0, sigmas=3.0)
    assert plan.value[0] == pytest.approx(expected, abs=1e-6)
    assert plan.bound[0] == pytest.approx(2.0)
    # The "wrong-sign" pair detects nothing: 2 e^{2r} (5.4366 at r = 0.5).
    wrong = duan_plan(tmsv(r), a0=1.0, sigmas=3.0)
    assert wrong.value[0] == pytest.approx(2 * np.exp(2 * r), rel=1e-12)
    assert np.isinf(wrong.total[0])


def test_optimised_quadratures_undo_a_local_rotation():
    # A local phase rotation of mode 2 cannot change entanglement; the optimised plan finds
    # the rotated EPR pair and recovers 2 e^{-2r} (Sec. 5.3) at a0 = 1.
    r = 0.5
    plan = duan_plan(rotate_mode_2(tmsv(r), 1.1), sigmas=3.0)
    assert plan.value[0] == pytest.approx(2 * np.exp(-2 * r), abs=1e-9)
    assert plan.a0[0] == pytest.approx(1.0, abs=0.01)


def test_vacuum_and_thermal_states_cannot_be_certified():
    # Product vacuum saturates the bound (Sec. 5.3); squeezed thermal with 2r < ln(2n+1) is separable (Sec. 5.1).
    assert np.isinf(duan_plan(np.eye(4), a0=1.0, sigmas=3.0).total[0])
    assert np.isinf(duan_plan(tmsv(0.2, n_th=1.0), sigmas=3.0).total[0])


def test_readout_imprecision_adds_to_the_variances():
    # Noise of variance e_x on each x reading and e_p on each p reading adds
    # (a0^2 + 1/a0^2)(e_x + e_p) to Var(u) + Var(v) (independent noise, elementary).
    r, ex, ep, a0 = 0.5, 0.03, 0.07, -1.3
    clean = duan_plan(tmsv(r), a0=a0, sigmas=3.0)
    noisy = duan_plan(tmsv(r), a0=a0, sigmas=3.0, imprecision_x=ex, imprecision_p=ep)
    assert noisy.value[0] - clean.value[0] == pytest.approx((a0 ** 2 + a0 ** -2) * (ex + ep), abs=ATOL)
    assert noisy.total[0] > clean.total[0]


def test_sample_variance_sd_matches_chi_square():
    # Cochran 1934: (n-1) s^2/sigma^2 ~ chi^2_{n-1}; sd(s^2) = sigma^2 sd(chi^2_{n-1})/(n-1) (scipy.stats).
    for n in (5, 50, 1000):
        assert sample_variance_sd(2.5, n) == pytest.approx(2.5 * stats.chi2.std(n - 1) / (n - 1), rel=1e-12)


def test_duan_monte_carlo_matches_analytic_count():
    # Seeded Gaussian samples of (x1, x2) and (p1, p2) with readout noise; the sum of the two
    # sample variances must have the analytic mean and sd, and at the planned N (k = 2) the
    # known-variance certification rate must match Phi(margin/sd - k) within 4 binomial s.e.
    r, ex, ep, k = 0.1, 0.02, 0.03, 2.0
    cov = tmsv(r)
    plan = duan_plan(cov, a0=-1.0, sigmas=k, imprecision_x=ex, imprecision_p=ep)
    n_u, n_v = (int(v) for v in plan.per_setting[0])
    assert 100 < n_u < 5000  # normal approximation regime
    trials = 2000
    rng = np.random.default_rng(31)
    moments = cov / 2 + np.diag([ex, ep, ex, ep])  # Cov = sigma/2 plus independent readout noise
    xs = rng.multivariate_normal(np.zeros(4), moments, size=(trials, n_u))
    ps = rng.multivariate_normal(np.zeros(4), moments, size=(trials, n_v))
    u = xs[..., 0] - xs[..., 2]            # a0 = -1: u = x1 - x2
    v = ps[..., 1] + ps[..., 3]            #          v = p1 + p2
    d_hat = u.var(axis=1, ddof=1) + v.var(axis=1, ddof=1)
    sd = np.hypot(sample_variance_sd(plan.variance_u[0], n_u), sample_variance_sd(plan.variance_v[0], n_v))
    assert abs(d_hat.mean() - plan.value[0]) <= 4 * sd / np.sqrt(trials)
    assert d_hat.std(ddof=1) == pytest.approx(sd, rel=4 / np.sqrt(2 * (trials - 1)) + 0.02)  # 2 %: chi^2 skew
    assert plan.margin[0] >= k * sd
    certified = np.mean(plan.bound[0] - d_hat >= k * sd)
    predicted = stats.norm.cdf(plan.margin[0] / sd - k)
    assert abs(certified - predicted) <= 4 * np.sqrt(predicted * (1 - predicted) / trials) + 0.02


@pytest.mark.parametrize("kwargs, key", [
    ({"imprecision_x": -0.1}, "imprecision_x"),
    ({"a0": 0.0}, "a0"),
    ({"confidence": 1.0}, "confidence"),
])
def test_bad_duan_inputs_are_one_line_errors(kwargs, key):
    with pytest.raises(ProtocolError) as info:
        duan_plan(tmsv(0.5), **kwargs)
    assert str(info.value).startswith(key) and "\n" not in str(info.value)


# ---- log-negativity from an estimated covariance matrix --------------------------------

from gqsim.studies.certification.statistics import (  # noqa: E402
    COVARIANCE_SETTINGS,
    covariance_from_moments,
    log_negativity_plan,
    pt_symplectic_log,
)

_Q = {"x1": [1, 0, 0, 0], "p1": [0, 1, 0, 0], "r1": [2 ** -0.5, 2 ** -0.5, 0, 0],
      "x2": [0, 0, 1, 0], "p2": [0, 0, 0, 1], "r2": [0, 0, 2 ** -0.5, 2 ** -0.5]}


@pytest.mark.parametrize("r, n_th, expected", [(0.5, 0.0, 1.0), (1.0, 0.0, 2.0), (1.0, 1.0, 0.901388)])
def test_signed_log_negativity_matches_reference(r, n_th, expected):
    # physics-references Sec. 5.1: TMSV E_N = 2r nats; squeezed thermal 2r - ln(2n+1) (0.901388).
    assert pt_symplectic_log(tmsv(r, n_th)) == pytest.approx(expected, abs=1e-6)
    assert pt_symplectic_log(np.eye(4)) == pytest.approx(0.0, abs=1e-15)  # vacuum: nu~ = 1


def test_covariance_fit_recovers_sigma_from_exact_moments():
    # Exact moments of every setting, with readout noise: the least-squares fit is exact.
    cov = rotate_mode_2(tmsv(0.4), 0.7)
    cov[0, 1] = cov[1, 0] = 0.2  # local x-p correlation, only visible through the r quadrature
    ex, ep = 0.02, 0.05
    noise = {"x": ex, "p": ep, "r": (ex + ep) / 2}
    moments = []
    for a, b in COVARIANCE_SETTINGS:
        ca, cb = np.array(_Q[a]), np.array(_Q[b])
        moments += [ca @ cov @ ca / 2 + noise[a[0]], cb @ cov @ cb / 2 + noise[b[0]], ca @ cov @ cb / 2]
    np.testing.assert_allclose(covariance_from_moments(moments, imprecision_x=ex, imprecision_p=ep), cov, atol=1e-12)


def test_log_negativity_plan_against_monte_carlo():
    # Delta method + Wishart moments vs seeded Gaussian records of the 9 settings: the mean and
    # spread of the fitted -ln nu~ must match the analytic value and sd within 4 Monte-Carlo s.e.
    # plus 10 % of an sd for the estimator's O(1/N) bias and nonlinearity (at N = 400 the bias
    # is ~0.2 sd, at N = 3000 ~0.08 sd).
    cov, ex, ep = tmsv(0.15), 0.01, 0.02
    plan = log_negativity_plan(cov, sigmas=3.0, imprecision_x=ex, imprecision_p=ep)
    n = 3000
    trials = 300
    rng = np.random.default_rng(12)
    noise = {"x": ex, "p": ep, "r": (ex + ep) / 2}
    moments = np.empty((trials, 27))
    for s, (a, b) in enumerate(COVARIANCE_SETTINGS):
        c = np.array([_Q[a], _Q[b]])
        sig = c @ (cov / 2) @ c.T + np.diag([noise[a[0]], noise[b[0]]])
        draws = rng.multivariate_normal(np.zeros(2), sig, size=(trials, n))
        centred = draws - draws.mean(axis=1, keepdims=True)
        m = np.einsum("tni,tnj->tij", centred, centred) / (n - 1)
        moments[:, 3 * s:3 * s + 3] = np.stack([m[:, 0, 0], m[:, 1, 1], m[:, 0, 1]], axis=1)
    g = pt_symplectic_log(covariance_from_moments(moments, imprecision_x=ex, imprecision_p=ep))
    sd = plan.standard_deviation_one_shot[0] / np.sqrt(n - 1)
    assert abs(g.mean() - plan.value[0]) <= 4 * sd / np.sqrt(trials) + 0.1 * sd
    assert g.std(ddof=1) == pytest.approx(sd, rel=4 / np.sqrt(2 * (trials - 1)) + 0.1)
    # The planned N puts the value k analytic sd above 0.
    n_plan = plan.per_setting[0, 0]
    assert plan.value[0] >= 3.0 * plan.standard_deviation_one_shot[0] / np.sqrt(n_plan - 1)


# ---- Monte-Carlo checks of the oscillator plans -----------------------------------------

from gqsim.studies.certification.statistics import covariance_monte_carlo_check, duan_monte_carlo_check  # noqa: E402


def test_duan_monte_carlo_check_at_planned_repetitions():
    # Records drawn from the chi-square law of sample variances (Cochran 1934); at the planned N the
    # certification rate is ~Phi(0) and the spread matches the analytic sd.
    plan = duan_plan(tmsv(0.1), sigmas=3.0, imprecision_x=0.01, imprecision_p=0.01)
    first = duan_monte_carlo_check(plan, index=0, trials=4000, seed=8)
    again = duan_monte_carlo_check(plan, index=0, trials=4000, seed=8)
    assert first == again  # same seed, same records
    assert first.agrees
    assert first.predicted_certified_fraction == pytest.approx(0.5, abs=0.05)


def test_covariance_plan_bias_matches_monte_carlo_and_correction_restores_agreement():
    # Second-order delta method: the raw fitted -ln nu~ is biased by ~bias_one_shot/(N - 1); with each
    # record's own bias estimate removed, the Wishart records (Anderson 2003, scipy.stats.wishart)
    # reproduce the analytic mean, sd and certification rate at the planned N.
    cov, ex, ep = tmsv(0.1), 0.01, 0.01
    plan = log_negativity_plan(cov, sigmas=3.0, imprecision_x=ex, imprecision_p=ep)
    check = covariance_monte_carlo_check(cov, plan, index=0, imprecision_x=ex, imprecision_p=ep, trials=800, seed=2)
    assert check.agrees
    n = plan.per_setting[0, 0]
    assert plan.bias_one_shot[0] / (n - 1) > 0.2 * check.analytic_sd  # the correction matters at this N


# ---- linear PPT witness on the fitted covariance -----------------------------------------

from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402
from scipy.linalg import expm  # noqa: E402

from gqsim.studies.certification.statistics import covariance_witness_plan  # noqa: E402
from gqsim.studies.certification.statistics import _vech  # noqa: E402

_OMEGA = np.array([[0, 1, 0, 0], [-1, 0, 0, 0], [0, 0, 0, 1], [0, 0, -1, 0]], dtype=float)


@pytest.mark.parametrize("r, n_th", [(0.5, 0.0), (1.0, 0.0), (1.0, 1.0), (0.2, 1.0)])
def test_covariance_witness_value_on_squeezed_thermal_states(r, n_th):
    # For sigma = (2n+1)[[c I, s Z], [s Z, c I]], sigma~ + i Omega has eigenvalues (2n+1)(c +- s) +- 1,
    # so the witness value is (2n+1) e^{-2r} - 1: negative exactly when 2r > ln(2n+1), the entangled
    # region of physics-references Sec. 5.1 (derived here).
    plan = covariance_witness_plan(tmsv(r, n_th), sigmas=3.0)
    expected = (2 * n_th + 1) * np.exp(-2 * r) - 1
    assert -plan.value[0] == pytest.approx(expected, abs=1e-12)
    assert np.isfinite(plan.total[0]) == (2 * r > np.log(2 * n_th + 1))


def _random_gaussian(rng, entangling: bool) -> np.ndarray:
    nu = 1 + rng.exponential(0.5, size=2)
    d = np.diag([nu[0], nu[0], nu[1], nu[1]])
    h = rng.normal(size=(4, 4))
    h = h + h.T
    if not entangling:  # local symplectics only: a product state
        h[:2, 2:] = h[2:, :2] = 0
    s = expm(_OMEGA @ (0.4 * h))
    return s @ d @ s.T


@settings(derandomize=True, max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1))
def test_covariance_witness_sign_and_separable_bound(seed):
    # Simon 2000: a two-mode Gaussian state is entangled iff sigma~ + i Omega is not >= 0 (nu~_- < 1);
    # the witness built for it is >= 0 on every product state.
    rng = np.random.default_rng(seed)
    cov = _random_gaussian(rng, entangling=True)
    plan = covariance_witness_plan(cov, sigmas=3.0)
    g = pt_symplectic_log(cov)
    if abs(g) > 1e-9:
        assert (plan.value[0] > 0) == (g > 0)
    product = _random_gaussian(rng, entangling=False)
    w_product = plan.coefficients[0] @ _vech(product / 2) + plan.constant[0]
    assert w_product >= -1e-9


def test_covariance_witness_monte_carlo_agrees_at_planned_repetitions():
    # Linear in the fitted covariance, so unbiased: Wishart records (scipy.stats.wishart) must reproduce
    # mean, sd, certification rate and coverage at the planned N.
    cov, ex, ep = tmsv(0.1), 0.01, 0.02
    plan = covariance_witness_plan(cov, sigmas=3.0, imprecision_x=ex, imprecision_p=ep)
    check = covariance_monte_carlo_check(cov, plan, index=0, imprecision_x=ex, imprecision_p=ep, trials=1000, seed=3)
    assert check.agrees
    assert abs(check.mean_estimate - check.expected_value) <= 4 * check.analytic_sd / np.sqrt(check.trials)


def test_monte_carlo_flags_the_fitted_log_negativity_near_a_product_state():
    # Locally squeezed pair (r = 1) with weak gravity-like correlations c (the pattern of a weak
    # x1 x2 coupling quench): -ln nu~ is not smooth on the scale of the sampling noise here, so the
    # delta-method count is optimistic (records certify far more often than the planned ~50 %) and
    # the Monte-Carlo check must say so; the linear witness stays exact (Simon 2000 criterion).
    a, c = np.exp(-2.0), 2.3e-7
    cov = np.diag([a, 1 / a, a, 1 / a])
    for i, j, v in ((0, 1, -c), (2, 3, -c), (0, 3, c), (1, 2, c)):
        cov[i, j] = cov[j, i] = v
    nonlinear = log_negativity_plan(cov, sigmas=3.0)
    linear = covariance_witness_plan(cov, sigmas=3.0)
    bad = covariance_monte_carlo_check(cov, nonlinear, index=0, trials=400, seed=1)
    good = covariance_monte_carlo_check(cov, linear, index=0, trials=400, seed=1)
    assert not bad.agrees and bad.certified_fraction > bad.predicted_certified_fraction + 0.2
    assert good.agrees
    assert linear.total[0] > nonlinear.total[0]  # the honest count is the larger one
