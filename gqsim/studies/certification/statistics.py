"""Statistics stage: how many repetitions certify entanglement, when to measure, and a
seeded Monte-Carlo of measurement records that checks the analytic counts.

Stage: result -> witness design -> **statistics** -> report.

Conventions
-----------
* A witness estimate is a sum over measurement settings s of the sample mean of a
  per-shot value f_s with single-shot variance sigma_s^2 (see
  :func:`gqsim.studies.certification.witness_design.setting_table`). With N_s kept shots of setting s,
  Var(W_hat) = sum_s sigma_s^2 / N_s (independent settings; binomial/multinomial error
  propagation, physics-references Sec. 6).
* "Certify at k standard deviations" means margin >= k * sd(W_hat), with margin the
  distance of the expected value from the separable bound on the entangled side. A
  one-sided confidence level c maps to k = Phi^{-1}(c) (normal approximation; c = 0.999
  gives k = 3.090). Optionally a *power* p asks that the experiment succeeds with
  probability p, i.e. margin >= (Phi^{-1}(c) + Phi^{-1}(p)) * sd (common practice in
  sample-size planning).
* Equal split: the same N on every setting, N >= k^2 sum_s sigma_s^2 / margin^2; for two
  +-1 correlators this is N >= k^2 (2 - <A>^2 - <B>^2)/(W - 1)^2 of physics-references
  Sec. 6. Optimal split (minimum total for a given sd, Lagrange multiplier):
  N_s proportional to sigma_s, N_total = k^2 (sum_s sigma_s)^2 / margin^2.
* Undetected shots are discarded; repetitions = kept shots / (eta_a eta_b).
* Lab time of a plan = N_total * (t + overhead), t the measurement (hold) time.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats

from gqsim.errors import PhysicsError, ProtocolError
from gqsim.studies.certification.witness_design import ReadoutModel, SettingTable, optimal_ppt_witness, setting_table

__all__ = [
    "sigma_multiplier",
    "repetitions_equal_split",
    "repetitions_optimal_split",
    "RepetitionPlan",
    "plan_repetitions",
    "plan_ppt_scan",
    "lab_time",
    "best_measurement_time",
    "simulate_records",
    "estimate_from_counts",
    "MonteCarloCheck",
    "monte_carlo_check",
    "DuanPlan",
    "duan_plan",
    "sample_variance_sd",
    "pt_symplectic_log",
    "covariance_from_moments",
    "CovariancePlan",
    "log_negativity_plan",
    "COVARIANCE_SETTINGS",
    "duan_monte_carlo_check",
    "covariance_monte_carlo_check",
    "covariance_witness_plan",
]


#: Margins below this, relative to the witness scale sum_t |c_t|, are float64 round-off of
#: O(1) expectation values (eps ~ 2e-16 times a few matrix products), not entanglement.
MARGIN_RTOL = 1e-12


def sigma_multiplier(confidence: float | None = None, *, sigmas: float | None = None,
                     power: float | None = None) -> float:
    """Number of standard deviations k required between the expected value and the bound.

    Give either ``confidence`` (one-sided, in (0, 1): k = Phi^{-1}(confidence)) or
    ``sigmas`` directly. With ``power`` in (0, 1) the result is k + Phi^{-1}(power): the
    planned experiment then clears the threshold with probability ``power``
    (normal approximation; common practice).
    """
    if (confidence is None) == (sigmas is None):
        raise ProtocolError("confidence", confidence, "give exactly one of confidence (0 < c < 1) or sigmas (> 0)")
    if confidence is not None:
        if isinstance(confidence, bool) or not isinstance(confidence, (int, float)) \
                or not (0.0 < confidence < 1.0) or not np.isfinite(confidence):
            raise ProtocolError("confidence", confidence, "must be a one-sided confidence level strictly between 0 and 1")
        k = float(stats.norm.ppf(confidence))
        if k <= 0:
            raise ProtocolError("confidence", confidence, "must exceed 0.5 to certify anything")
    else:
        if isinstance(sigmas, bool) or not isinstance(sigmas, (int, float)) or not (np.isfinite(sigmas) and sigmas > 0):
            raise ProtocolError("sigmas", sigmas, "must be a positive number of standard deviations")
        k = float(sigmas)
    if power is not None:
        if isinstance(power, bool) or not isinstance(power, (int, float)) or not (0.0 < power < 1.0):
            raise ProtocolError("power", power, "must be a probability strictly between 0 and 1")
        k += float(stats.norm.ppf(power))
        if k <= 0:
            raise ProtocolError("power", power, "is too low: confidence and power together need k > 0")
    return k


def _ceil_or_inf(x: np.ndarray) -> np.ndarray:
    x = np.asarray(x, dtype=float)
    out = np.full(x.shape, np.inf)
    finite = np.isfinite(x)
    # subtract a relative 1e-12 before ceil so that exact integers (up to round-off) are not bumped up
    out[finite] = np.ceil(x[finite] * (1 - 1e-12))
    return out


def repetitions_equal_split(margin, variances, k: float, efficiency: float = 1.0) -> np.ndarray:
    """Repetitions per setting when every setting gets the same number.

    N >= k^2 sum_s sigma_s^2 / (margin^2 eta) (physics-references Sec. 6, binomial error
    propagation). ``margin`` (...,), ``variances`` (..., S). Returns (...,) floats: whole
    numbers, ``inf`` where margin <= 0 (the expected value is not on the entangled side).
    """
    margin = np.asarray(margin, dtype=float)
    var = np.asarray(variances, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        n = np.where(margin > 0, k ** 2 * var.sum(axis=-1) / margin ** 2 / efficiency, np.inf)
    return np.maximum(_ceil_or_inf(n), 1.0)


def repetitions_optimal_split(margin, variances, k: float, efficiency: float = 1.0) -> np.ndarray:
    """Repetitions per setting minimising the total for sd(W_hat) = margin / k.

    Minimising sum_s N_s subject to sum_s sigma_s^2/N_s = (margin/k)^2 gives
    N_s = k^2 sigma_s (sum_r sigma_r) / margin^2 (Lagrange multiplier; Neyman allocation in
    stratified sampling, common practice), divided by the kept fraction eta. At least one
    repetition per setting. Returns (..., S) floats, ``inf`` where margin <= 0.
    """
    margin = np.asarray(margin, dtype=float)
    sd = np.sqrt(np.maximum(np.asarray(variances, dtype=float), 0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        n = np.where((margin > 0)[..., None], k ** 2 * sd * sd.sum(axis=-1, keepdims=True)
                     / (margin[..., None] ** 2) / efficiency, np.inf)
    return np.maximum(_ceil_or_inf(n), 1.0)


def lab_time(total_repetitions, times_s, overhead_s: float) -> np.ndarray:
    """Total lab time [s] = N_total * (t + overhead): each repetition holds for t [s]."""
    _check_overhead(overhead_s)
    total = np.asarray(total_repetitions, dtype=float)
    per_rep = np.broadcast_to(np.asarray(times_s, dtype=float) + overhead_s, total.shape)
    # infinite repetitions cost infinite time, even on a zero-length grid point
    finite = np.isfinite(total)
    return np.where(finite, np.where(finite, total, 0.0) * per_rep, np.inf)


def _check_overhead(overhead_s: float) -> None:
    if isinstance(overhead_s, bool) or not isinstance(overhead_s, (int, float)) \
            or not (np.isfinite(overhead_s) and overhead_s >= 0):
        raise ProtocolError("overhead_s", overhead_s, "must be a non-negative time per repetition [s]")


def best_measurement_time(times_s, total_repetitions, overhead_s: float) -> tuple[int, float, float]:
    """Index, time [s] and lab time [s] minimising N(t) * (t + overhead) over the grid.

    Raises :class:`PhysicsError` when no time on the grid can certify (N infinite everywhere).
    """
    lt = lab_time(total_repetitions, times_s, overhead_s)
    if not np.any(np.isfinite(lt)):
        raise PhysicsError("measurement time", "any grid time",
                           "the witness never clears its separable bound on this grid; nothing to certify")
    i = int(np.nanargmin(np.where(np.isfinite(lt), lt, np.nan)))
    return i, float(np.asarray(times_s)[i]), float(lt[i])


@dataclass(frozen=True, kw_only=True)
class RepetitionPlan:
    """Repetitions needed to certify one witness at every time of a grid.

    Arrays have leading length n_times; ``per_setting`` is (n_times, S) with the
    optimal (or equal, per ``split``) split; totals include the detection-efficiency loss.
    """

    witness: str
    times_s: np.ndarray
    values: np.ndarray
    bound: float
    entangled_if: str
    margin: np.ndarray
    standard_deviation_one_shot: np.ndarray
    settings: tuple[str, ...]
    per_setting: np.ndarray
    total: np.ndarray
    sigmas: float
    split: str
    overhead_s: float
    lab_time_s: np.ndarray

    def best(self) -> dict:
        """The time that minimises the total lab time, with its plan."""
        i, t, lt = best_measurement_time(self.times_s, self.total, self.overhead_s)
        return {"index": i, "time_s": t, "lab_time_s": lt, "value": float(self.values[i]),
                "total_repetitions": float(self.total[i]),
                "per_setting": dict(zip(self.settings, self.per_setting[i].tolist()))}


def plan_repetitions(table: SettingTable, times_s=None, *, confidence: float | None = 0.999,
                     sigmas: float | None = None, power: float | None = None, split: str = "optimal",
                     overhead_s: float = 0.0) -> RepetitionPlan:
    """Repetitions to certify ``table.witness`` on each state of ``table``.

    The expected estimate is ``table.expected_values`` (equal to Tr(W rho) when readout
    errors are corrected); the single-shot variances come from the outcome
    probabilities. See the module docstring for the formulas and conventions.
    """
    if split not in ("optimal", "equal"):
        raise ProtocolError("split", split, "must be 'optimal' or 'equal'")
    k = sigma_multiplier(None if sigmas is not None else confidence, sigmas=sigmas, power=power)
    _check_overhead(overhead_s)
    values = table.expected_values
    n = values.shape[0]
    times = np.zeros(n) if times_s is None else np.asarray(times_s, dtype=float)
    if times.shape != (n,):
        raise ProtocolError("times_s", times.shape, f"must have one time per state ({n})")
    margin = table.witness.margin(values)
    scale = max(1.0, sum(abs(t.coefficient) for t in table.witness.terms))
    usable = np.where(margin > MARGIN_RTOL * scale, margin, 0.0)
    var = table.setting_variances
    eta = table.detection_efficiency
    if split == "optimal":
        per = repetitions_optimal_split(usable, var, k, eta)
    else:
        per = np.repeat(repetitions_equal_split(usable, var, k, eta)[:, None], var.shape[1], axis=1)
    total = per.sum(axis=1)
    one_shot = np.sqrt(np.maximum(var, 0.0))
    return RepetitionPlan(witness=table.witness.name, times_s=times, values=values, bound=table.witness.bound,
                          entangled_if=table.witness.entangled_if, margin=margin,
                          standard_deviation_one_shot=one_shot, settings=tuple(s.label for s in table.settings),
                          per_setting=per, total=total, sigmas=k, split=split, overhead_s=float(overhead_s),
                          lab_time_s=lab_time(total, times, overhead_s))


def plan_ppt_scan(states, dims: tuple[int, int], times_s, *, readout: ReadoutModel | None = None,
                  design=None, name: str = "optimal_ppt (per time)", **plan_kwargs) -> RepetitionPlan:
    """Repetitions over a time grid when the witness is re-designed for each time.

    At every time t the experiment would measure the witness designed for rho(t): by default
    the optimal PPT witness (:func:`gqsim.studies.certification.witness_design.optimal_ppt_witness`); ``design``
    (rho -> Witness) substitutes another per-time design. Settings used at any time form the
    union in ``settings``, with 0 repetitions at times that do not use a setting (their local
    frames may differ between times). ``plan_kwargs`` go to :func:`plan_repetitions`.
    """
    design = design or (lambda rho: optimal_ppt_witness(rho, dims))
    states = np.asarray(states)
    if states.ndim == 2:
        states = states[None]
    times = np.asarray(times_s, dtype=float)
    if times.shape != (states.shape[0],):
        raise ProtocolError("times_s", times.shape, f"must have one time per state ({states.shape[0]})")
    plans = [plan_repetitions(setting_table(design(rho), rho[None], readout), [t], **plan_kwargs)
             for rho, t in zip(states, times)]
    labels: list[str] = []
    for p in plans:
        labels += [lab for lab in p.settings if lab not in labels]
    per = np.zeros((len(plans), len(labels)))
    one_shot = np.zeros_like(per)
    for i, p in enumerate(plans):
        for j, lab in enumerate(p.settings):
            per[i, labels.index(lab)] = p.per_setting[0, j]
            one_shot[i, labels.index(lab)] = p.standard_deviation_one_shot[0, j]
    first = plans[0]
    cat = lambda name: np.concatenate([getattr(p, name) for p in plans])  # noqa: E731
    return RepetitionPlan(witness=name, times_s=times, values=cat("values"), bound=first.bound,
                          entangled_if=first.entangled_if, margin=cat("margin"), standard_deviation_one_shot=one_shot,
                          settings=tuple(labels), per_setting=per, total=cat("total"), sigmas=first.sigmas,
                          split=first.split, overhead_s=first.overhead_s, lab_time_s=cat("lab_time_s"))


# --------------------------------------------------------------------------------------
# Monte-Carlo of measurement records
# --------------------------------------------------------------------------------------

def simulate_records(table: SettingTable, shots, *, trials: int, seed: int, time_index: int = 0):
    """Seeded synthetic measurement records: counts of each reported outcome per setting.

    Each of the ``shots[s]`` repetitions of setting s is kept with probability eta
    (binomial), and kept shots fall on the reported outcomes with the multinomial
    probabilities of ``table`` at ``time_index``. Vectorised numpy; the same ``seed``
    gives the same record.

    Returns ``(kept, counts)`` with shapes (trials, S) and (trials, S, d_a d_b).
    """
    shots = np.asarray(shots)
    n_settings = len(table.settings)
    if shots.shape != (n_settings,) or not np.all(np.isfinite(shots)) or np.any(shots < 1):
        raise ProtocolError("shots", shots, f"must be {n_settings} finite positive repetition counts, one per setting")
    if not isinstance(trials, int) or trials < 1:
        raise ProtocolError("trials", trials, "must be a positive integer")
    rng = np.random.default_rng(seed)
    shots = shots.astype(np.int64)
    kept = rng.binomial(np.broadcast_to(shots, (trials, n_settings)), table.detection_efficiency)
    p = table.probabilities[time_index]
    p = p / p.sum(axis=-1, keepdims=True)
    counts = rng.multinomial(kept, np.broadcast_to(p, (trials, *p.shape)))
    return kept, counts


def estimate_from_counts(table: SettingTable, kept, counts):
    """Witness estimate and its estimated standard error from counts.

    W_hat = constant + sum_s mean_s, se^2 = sum_s s_s^2 / n_s with s_s^2 the unbiased
    sample variance of setting s's per-shot values. ``kept`` (..., S), ``counts``
    (..., S, K). Settings with fewer than two kept shots give NaN-free but infinite se.
    """
    kept = np.asarray(kept, dtype=float)
    counts = np.asarray(counts, dtype=float)
    safe = np.maximum(kept, 1.0)
    mean = np.einsum("...sk,sk->...s", counts, table.values) / safe
    second = np.einsum("...sk,sk->...s", counts, table.values ** 2) / safe
    var = np.maximum(second - mean ** 2, 0.0) * safe / np.maximum(safe - 1.0, 1.0)
    with np.errstate(divide="ignore"):
        se2 = np.where(kept >= 2, var / safe, np.inf).sum(axis=-1)
    return table.constant + mean.sum(axis=-1), np.sqrt(se2)


@dataclass(frozen=True, kw_only=True)
class MonteCarloCheck:
    """Outcome of :func:`monte_carlo_check` (all fractions over ``trials`` synthetic experiments).

    ``certified_fraction`` and ``coverage`` use the analytic sd (the quantity the repetition
    formula is about); the ``*_plugin`` variants use each experiment's own estimated standard
    error, as a real analysis would, and show where few shots per setting make the normal
    approximation optimistic.
    """

    trials: int
    seed: int
    sigmas: float
    expected_value: float
    mean_estimate: float
    analytic_sd: float
    sample_sd: float
    certified_fraction: float
    predicted_certified_fraction: float
    coverage: float
    predicted_coverage: float
    certified_fraction_plugin: float
    coverage_plugin: float

    def fraction_tolerance(self, p: float) -> float:
        """4 binomial standard errors of a fraction p estimated from ``trials`` trials."""
        return 4.0 * np.sqrt(max(p * (1 - p), 1.0 / self.trials) / self.trials)

    @property
    def agrees(self) -> bool:
        """Mean, sd, certification rate and coverage match the analytic values within 4 standard
        errors of the Monte-Carlo itself (a 4-sigma band fails ~6e-5 of the time); the sd gets 3 %
        and the rate 0.02 extra for the O(1/N) skew the normal approximation omits."""
        sd_tol = 4.0 / np.sqrt(2.0 * (self.trials - 1)) + 0.03
        p = self.predicted_certified_fraction
        return bool(abs(self.mean_estimate - self.expected_value) <= 4.0 * self.analytic_sd / np.sqrt(self.trials)
                    and abs(self.sample_sd / self.analytic_sd - 1.0) <= sd_tol
                    and abs(self.certified_fraction - p) <= self.fraction_tolerance(p) + 0.02
                    and abs(self.coverage - self.predicted_coverage)
                    <= self.fraction_tolerance(self.predicted_coverage) + 0.02)


def monte_carlo_check(table: SettingTable, shots, *, sigmas: float, trials: int = 2000, seed: int = 0,
                      time_index: int = 0) -> MonteCarloCheck:
    """Run ``trials`` synthetic experiments with ``shots`` per setting and compare with the analytics.

    Certified: the estimate lies beyond the bound by at least ``sigmas`` standard deviations;
    the normal approximation predicts a rate Phi(margin/sd - k). Coverage: the one-sided
    interval [W_hat - k sd, inf) (or (-inf, W_hat + k sd] for witnesses entangled below)
    contains the expected value; predicted Phi(k). The analytic sd uses the expected kept
    shots N_s eta.
    """
    kept, counts = simulate_records(table, shots, trials=trials, seed=seed, time_index=time_index)
    est, se = estimate_from_counts(table, kept, counts)
    expected = float(table.expected_values[time_index])
    var = table.setting_variances[time_index]
    sd = float(np.sqrt(np.sum(var / (np.asarray(shots, float) * table.detection_efficiency))))
    w = table.witness
    margin_hat = w.margin(est)
    sign = 1.0 if w.entangled_if == "above" else -1.0
    covered = lambda err: float(np.mean(sign * (est - expected) <= sigmas * err))  # noqa: E731
    margin = float(w.margin(expected))
    return MonteCarloCheck(trials=trials, seed=seed, sigmas=float(sigmas), expected_value=expected,
                           mean_estimate=float(est.mean()), analytic_sd=sd, sample_sd=float(est.std(ddof=1)),
                           certified_fraction=float(np.mean(margin_hat >= sigmas * sd)),
                           predicted_certified_fraction=float(stats.norm.cdf(margin / sd - sigmas)),
                           coverage=covered(sd), predicted_coverage=float(stats.norm.cdf(sigmas)),
                           certified_fraction_plugin=float(np.mean(margin_hat >= sigmas * se)),
                           coverage_plugin=covered(se))


# --------------------------------------------------------------------------------------
# Oscillators: Duan variance witness from sample variances
# --------------------------------------------------------------------------------------

def sample_variance_sd(variance, n) -> np.ndarray:
    """Standard deviation of the unbiased sample variance of n Gaussian samples.

    (n - 1) s^2 / sigma^2 follows chi^2 with n - 1 degrees of freedom [Cochran1934], whose
    variance is 2 (n - 1), so sd(s^2) = sigma^2 sqrt(2 / (n - 1)).
    """
    n = np.asarray(n, dtype=float)
    return np.asarray(variance, dtype=float) * np.sqrt(2.0 / (n - 1.0))


@dataclass(frozen=True, kw_only=True)
class DuanPlan:
    """Repetitions to certify the Duan criterion from sample variances.

    ``variance_u``/``variance_v`` include the readout imprecision; ``value`` =
    Var(u) + Var(v) (measured), ``bound`` = a0^2 + 1/a0^2; ``per_setting`` is (n, 2)
    for the settings (x1, x2') and (p1, p2'), x2' and p2' rotated by ``rotation_rad``.
    """

    times_s: np.ndarray
    a0: np.ndarray
    rotation_rad: np.ndarray
    variance_u: np.ndarray
    variance_v: np.ndarray
    value: np.ndarray
    bound: np.ndarray
    margin: np.ndarray
    per_setting: np.ndarray
    total: np.ndarray
    sigmas: float
    overhead_s: float
    lab_time_s: np.ndarray

    def best(self) -> dict:
        i, t, lt = best_measurement_time(self.times_s, self.total, self.overhead_s)
        return {"index": i, "time_s": t, "lab_time_s": lt, "value": float(self.value[i]),
                "bound": float(self.bound[i]), "total_repetitions": float(self.total[i])}


def _duan_variances(cov: np.ndarray, a0: np.ndarray, noise_x: float, noise_p: float):
    # cov[i, j] = <{dr_i, dr_j}>, r = (x1, p1, x2, p2), vacuum = identity: Var = cov/2.
    s = np.sign(a0)
    a = np.abs(a0)
    var_u = (a ** 2 * (cov[..., 0, 0] / 2 + noise_x) + (cov[..., 2, 2] / 2 + noise_x) / a ** 2
             + 2 * s * cov[..., 0, 2] / 2)
    var_v = (a ** 2 * (cov[..., 1, 1] / 2 + noise_p) + (cov[..., 3, 3] / 2 + noise_p) / a ** 2
             - 2 * s * cov[..., 1, 3] / 2)
    return var_u, var_v


def _rotate_second_mode(cov: np.ndarray, phi: np.ndarray) -> np.ndarray:
    # x2' = x2 cos phi + p2 sin phi, p2' = -x2 sin phi + p2 cos phi (a local phase rotation).
    c, s = np.cos(phi), np.sin(phi)
    rot = np.zeros(cov.shape)
    rot[:, 0, 0] = rot[:, 1, 1] = 1.0
    rot[:, 2, 2], rot[:, 2, 3], rot[:, 3, 2], rot[:, 3, 3] = c, s, -s, c
    return rot @ cov @ rot.transpose(0, 2, 1)


def duan_plan(covariance, times_s=None, *, a0: float | None = None, imprecision_x: float = 0.0,
              imprecision_p: float = 0.0, confidence: float | None = 0.999, sigmas: float | None = None,
              power: float | None = None, overhead_s: float = 0.0) -> DuanPlan:
    """Repetitions needed to show Var(u) + Var(v) < a0^2 + 1/a0^2 from sample variances.

    u = |a0| x1 + x2/a0 and v = |a0| p1 - p2/a0 with x = (a + a^dag)/sqrt2, [x, p] = i; every
    separable state has Var(u) + Var(v) >= a0^2 + 1/a0^2 ([Duan2000]; physics-references
    Sec. 5.3). ``covariance`` is (n, 4, 4) or (4, 4) in gqsim's convention
    sigma_ij = <{dr_i, dr_j}> (vacuum = identity), r = (x1, p1, x2, p2). u is measured in
    setting (x1, x2), v in (p1, p2); readout imprecision adds ``imprecision_x`` (variance of
    the noise added to each x reading, in units where the vacuum has Var(x) = 1/2) to both
    positions and ``imprecision_p`` to both momenta.

    ``a0`` given: lab quadratures, that a0. ``a0 = None``: at each time the second mode's
    quadratures are rotated by the angle that makes the cross term 2[Cov(x1, x2') - Cov(p1, p2')]
    most negative (closed form; a local rotation keeps the criterion valid), then a0 > 0 is
    chosen on a grid over [0.1, 10] to minimise the repetitions; the angle is in ``rotation_rad``.

    Each sample variance has sd = Var sqrt(2/(N-1)) [Cochran1934]; minimising N_u + N_v at
    fixed sd of the sum gives N_s - 1 proportional to Var_s, so
    N_s = 1 + 2 k^2 Var_s (Var_u + Var_v) / margin^2.
    """
    cov = _checked_covariances(covariance, imprecision_x, imprecision_p)
    k = sigma_multiplier(None if sigmas is not None else confidence, sigmas=sigmas, power=power)
    _check_overhead(overhead_s)
    n = cov.shape[0]
    if a0 is None:
        # Cov = sigma/2; cross(phi) = cos(phi) (C_xx - C_pp) + sin(phi) (C_xp + C_px), times 2.
        c_xx_pp = (cov[:, 0, 2] - cov[:, 1, 3]) / 2
        c_xp_px = (cov[:, 0, 3] + cov[:, 1, 2]) / 2
        phi = np.arctan2(-c_xp_px, -c_xx_pp)
        cov = _rotate_second_mode(cov, phi)
        grid = np.geomspace(0.1, 10, 801)
        vu, vv = _duan_variances(cov[:, None], grid[None, :], imprecision_x, imprecision_p)
        bound = grid ** 2 + 1 / grid ** 2
        rel = (bound - vu - vv) / (vu + vv)  # N_total ~ 2 k^2 (Var_u + Var_v)^2 / margin^2
        # ties (e.g. the vacuum, where every a0 saturates the bound) go to the symmetric a0 = 1
        a = grid[np.argmax(rel - 1e-12 * np.abs(np.log(grid)), axis=1)]
    else:
        if isinstance(a0, bool) or not isinstance(a0, (int, float)) or not np.isfinite(a0) or a0 == 0:
            raise ProtocolError("a0", a0, "must be a finite non-zero real number")
        a = np.full(n, float(a0))
        phi = np.zeros(n)
    var_u, var_v = _duan_variances(cov, a, imprecision_x, imprecision_p)
    bound = a ** 2 + 1 / a ** 2
    value = var_u + var_v
    margin = bound - value
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = np.where(margin > 0, 2 * k ** 2 * (var_u + var_v) / margin ** 2, np.inf)
    per = np.stack([1 + scale * var_u, 1 + scale * var_v], axis=1)
    per = np.maximum(_ceil_or_inf(per), 2.0)
    total = per.sum(axis=1)
    times = np.zeros(n) if times_s is None else np.asarray(times_s, dtype=float)
    if times.shape != (n,):
        raise ProtocolError("times_s", times.shape, f"must have one time per covariance matrix ({n})")
    return DuanPlan(times_s=times, a0=a, rotation_rad=phi, variance_u=var_u, variance_v=var_v, value=value,
                    bound=bound, margin=margin, per_setting=per, total=total, sigmas=k,
                    overhead_s=float(overhead_s), lab_time_s=lab_time(total, times, overhead_s))


# --------------------------------------------------------------------------------------
# Oscillators: log-negativity from an estimated covariance matrix
# --------------------------------------------------------------------------------------

_SQ = 1 / np.sqrt(2.0)
#: Quadratures read out on each mode: x, p and the diagonal (x + p)/sqrt2 (needed for Cov(x, p)),
#: as coefficient vectors on r = (x1, p1, x2, p2).
_QUADRATURES = {
    "x1": np.array([1.0, 0, 0, 0]), "p1": np.array([0, 1.0, 0, 0]), "r1": np.array([_SQ, _SQ, 0, 0]),
    "x2": np.array([0, 0, 1.0, 0]), "p2": np.array([0, 0, 0, 1.0]), "r2": np.array([0, 0, _SQ, _SQ]),
}
COVARIANCE_SETTINGS = tuple((a, b) for a in ("x1", "p1", "r1") for b in ("x2", "p2", "r2"))
_PAIRS = [(i, j) for i in range(4) for j in range(i, 4)]


def pt_symplectic_log(covariance) -> np.ndarray:
    """-ln nu~_-: the signed log-negativity [nats] of a two-mode covariance (positive = entangled).

    nu~_- is the smaller symplectic eigenvalue of the partially transposed covariance
    (p2 -> -p2), i.e. the smaller modulus among the eigenvalues of i Omega sigma~ in the
    vacuum = identity convention; E_N = max(0, -ln nu~_-) ([VidalWerner2002]; physics-references
    Sec. 5.1, which also gives the equivalent closed form via det A + det B - 2 det C). The
    eigenvalue route is used because the closed form cancels catastrophically for strongly
    squeezed or hot states (entries >> 1 with det sigma ~ 1). Without the max(0, .) it is
    smooth across the separability boundary, which the delta method below needs.
    """
    cov = np.asarray(covariance, dtype=float)
    flip = np.array([1.0, 1.0, 1.0, -1.0])
    pt = cov * flip[:, None] * flip[None, :]
    omega = np.array([[0, 1, 0, 0], [-1, 0, 0, 0], [0, 0, 0, 1], [0, 0, -1, 0]], dtype=float)
    nus = np.abs(np.linalg.eigvals(omega @ pt))
    return -np.log(np.min(nus, axis=-1))


def _moment_design(noise_x: float, noise_p: float):
    """Linear map from the 10 independent entries of Cov = sigma/2 to the 27 setting moments."""
    rows, offsets = [], []
    noise = {"x": noise_x, "p": noise_p, "r": 0.5 * (noise_x + noise_p)}
    for qa, qb in COVARIANCE_SETTINGS:
        ca, cb = _QUADRATURES[qa], _QUADRATURES[qb]
        for u, v, off in ((ca, ca, noise[qa[0]]), (cb, cb, noise[qb[0]]), (ca, cb, 0.0)):
            rows.append([u[i] * v[j] + (u[j] * v[i] if i != j else 0.0) for i, j in _PAIRS])
            offsets.append(off)
    return np.array(rows), np.array(offsets)


def _wishart_unit_covariance(cov_moments: np.ndarray, design: np.ndarray, offsets: np.ndarray) -> np.ndarray:
    """(n, 27, 27) covariance of the setting moments times (N - 1): block diagonal Wishart.

    For a bivariate normal with covariance S, the unbiased sample moments (S_aa, S_bb, S_ab)
    have (N-1) Cov = [[2 S_aa^2, 2 S_ab^2, 2 S_aa S_ab], [., 2 S_bb^2, 2 S_bb S_ab],
    [., ., S_aa S_bb + S_ab^2]] (Wishart second moments, [Anderson2003] Sec. 7.3, from memory).
    """
    m = cov_moments @ design.T + offsets  # (n, 27): true moments incl. readout noise
    n = m.shape[0]
    out = np.zeros((n, design.shape[0], design.shape[0]))
    for s in range(len(COVARIANCE_SETTINGS)):
        saa, sbb, sab = m[:, 3 * s], m[:, 3 * s + 1], m[:, 3 * s + 2]
        block = np.stack([np.stack([2 * saa ** 2, 2 * sab ** 2, 2 * saa * sab], -1),
                          np.stack([2 * sab ** 2, 2 * sbb ** 2, 2 * sbb * sab], -1),
                          np.stack([2 * saa * sab, 2 * sbb * sab, saa * sbb + sab ** 2], -1)], -2)
        out[:, 3 * s:3 * s + 3, 3 * s:3 * s + 3] = block
    return out


def _vech(cov_half: np.ndarray) -> np.ndarray:
    return np.stack([cov_half[..., i, j] for i, j in _PAIRS], axis=-1)


def _unvech(theta: np.ndarray) -> np.ndarray:
    out = np.zeros(theta.shape[:-1] + (4, 4))
    for k, (i, j) in enumerate(_PAIRS):
        out[..., i, j] = out[..., j, i] = theta[..., k]
    return out


def _hessian(theta: np.ndarray) -> np.ndarray:
    """(n, 10, 10) Hessian of -ln nu~ in the entries of Cov (central differences, step ~ eps^(1/4))."""
    h = 1e-4 * np.maximum(np.abs(theta).max(axis=1), 1e-3)
    m = theta.shape[1]
    g = lambda t: pt_symplectic_log(2 * _unvech(t))  # noqa: E731
    out = np.empty(theta.shape[:1] + (m, m))
    for i in range(m):
        for j in range(i, m):
            vals = []
            for si, sj in ((1, 1), (1, -1), (-1, 1), (-1, -1)):
                t = theta.copy()
                t[:, i] += si * h
                t[:, j] += sj * h
                vals.append(g(t))
            out[:, i, j] = out[:, j, i] = (vals[0] - vals[1] - vals[2] + vals[3]) / (4 * h ** 2)
    return out


def covariance_from_moments(moments, *, imprecision_x: float = 0.0, imprecision_p: float = 0.0) -> np.ndarray:
    """Least-squares covariance sigma (vacuum = I) from the 27 sample moments of the 9 settings.

    ``moments`` (..., 27): for each setting of :data:`COVARIANCE_SETTINGS` in order, the sample
    variances of its two quadratures and their sample covariance. The known readout noise is
    subtracted; the fit is the pseudo-inverse of the (27 x 10) design, so it is unbiased.
    """
    design, offsets = _moment_design(imprecision_x, imprecision_p)
    theta = (np.asarray(moments, dtype=float) - offsets) @ np.linalg.pinv(design).T
    return 2.0 * _unvech(theta)


@dataclass(frozen=True, kw_only=True)
class CovariancePlan:
    """Repetitions to show -ln nu~_- > 0 from an estimated covariance matrix (equal split over the
    9 settings of :data:`COVARIANCE_SETTINGS`).

    ``statistic = "linear_witness"`` (from :func:`covariance_witness_plan`): ``value`` is
    -(a . theta + c) for the linear witness with ``coefficients`` a (n, 10) on the entries of
    Cov = sigma/2 and ``constant`` c (n,); it is unbiased, so ``bias_one_shot`` is zero.

    ``bias_one_shot``: the plug-in statistic g(theta_hat) overestimates g by about
    bias_one_shot / (N - 1) (second-order delta method); the planned N assumes the experiment
    subtracts that estimate (see :func:`covariance_monte_carlo_check`), otherwise small-N
    records look more entangled than they are.
    """

    times_s: np.ndarray
    value: np.ndarray
    standard_deviation_one_shot: np.ndarray
    bias_one_shot: np.ndarray
    per_setting: np.ndarray
    total: np.ndarray
    settings: tuple[str, ...]
    sigmas: float
    overhead_s: float
    lab_time_s: np.ndarray
    statistic: str = "log_negativity"
    coefficients: np.ndarray | None = None
    constant: np.ndarray | None = None

    @property
    def bound(self) -> float:
        return 0.0

    def best(self) -> dict:
        i, t, lt = best_measurement_time(self.times_s, self.total, self.overhead_s)
        return {"index": i, "time_s": t, "lab_time_s": lt, "value": float(self.value[i]),
                "total_repetitions": float(self.total[i])}


def log_negativity_plan(covariance, times_s=None, *, imprecision_x: float = 0.0, imprecision_p: float = 0.0,
                        confidence: float | None = 0.999, sigmas: float | None = None, power: float | None = None,
                        overhead_s: float = 0.0) -> CovariancePlan:
    """Repetitions to certify Gaussian entanglement from a covariance matrix estimated by readout.

    Scheme (gqsim's own, a common homodyne-tomography layout): each repetition reads one
    quadrature of each mode, x, p or (x + p)/sqrt2, giving 9 settings; each yields two sample
    variances and one sample covariance; the 10 entries of sigma follow by least squares
    (:func:`covariance_from_moments`). The statistic is g = -ln nu~_- (:func:`pt_symplectic_log`),
    entangled when g > 0 (PPT criterion for 1 x 1 Gaussian states, [Simon2000]). Its
    single-repetition variance follows from the delta method, grad(g)^T P W P^T grad(g), with P
    the least-squares pseudo-inverse and W the Wishart moment covariance; then
    N - 1 = k^2 Var_1 / g^2 on every setting. ``covariance`` (n, 4, 4) or (4, 4) in the
    vacuum = identity convention; noise variances as in :func:`duan_plan`.
    """
    cov = _checked_covariances(covariance, imprecision_x, imprecision_p)
    k = sigma_multiplier(None if sigmas is not None else confidence, sigmas=sigmas, power=power)
    _check_overhead(overhead_s)
    design, offsets = _moment_design(imprecision_x, imprecision_p)
    pinv = np.linalg.pinv(design)
    theta = _vech(cov / 2)
    value = pt_symplectic_log(cov)
    # central differences in the 10 entries of Cov; step ~ eps^(1/3) times the entry scale
    step = 6e-6 * np.maximum(np.abs(theta).max(axis=1, keepdims=True), 1e-3)
    grad = np.empty_like(theta)
    for q in range(theta.shape[1]):
        up, down = theta.copy(), theta.copy()
        up[:, q] += step[:, 0]
        down[:, q] -= step[:, 0]
        grad[:, q] = (pt_symplectic_log(2 * _unvech(up)) - pt_symplectic_log(2 * _unvech(down))) / (2 * step[:, 0])
    w = _wishart_unit_covariance(theta, design, offsets)
    jac = grad @ pinv  # (n, 27)
    var1 = np.einsum("ni,nij,nj->n", jac, w, jac)
    theta_cov1 = np.einsum("ai,nij,bj->nab", pinv, w, pinv)  # (N - 1) Cov(theta_hat)
    bias1 = 0.5 * np.einsum("nab,nab->n", _hessian(theta), theta_cov1)
    scale = max(1.0, float(np.abs(value).max()))
    usable = np.where(value > MARGIN_RTOL * scale, value, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        n_minus_1 = np.where(usable > 0, k ** 2 * var1 / usable ** 2, np.inf)
    per_one = np.maximum(_ceil_or_inf(1.0 + n_minus_1), 2.0)
    n_set = len(COVARIANCE_SETTINGS)
    per = np.repeat(per_one[:, None], n_set, axis=1)
    total = per.sum(axis=1)
    times = np.zeros(cov.shape[0]) if times_s is None else np.asarray(times_s, dtype=float)
    if times.shape != (cov.shape[0],):
        raise ProtocolError("times_s", times.shape, f"must have one time per covariance matrix ({cov.shape[0]})")
    return CovariancePlan(times_s=times, value=value, standard_deviation_one_shot=np.sqrt(var1),
                          bias_one_shot=bias1, per_setting=per,
                          total=total, settings=tuple(f"{a},{b}" for a, b in COVARIANCE_SETTINGS), sigmas=k,
                          overhead_s=float(overhead_s), lab_time_s=lab_time(total, times, overhead_s))


def _linear_witness(cov: np.ndarray):
    """Coefficients a (n, 10) and constant c (n,) of w = a . vech(sigma/2) + c, and w itself.

    v = eigenvector of sigma~ + i Omega with the smallest eigenvalue, u = Lambda v; then
    w(sigma) = v^dag (Lambda sigma Lambda + i Omega) v = sum_ij Re(conj(u_i) u_j) sigma_ij + i v^dag Omega v.
    """
    flip = np.array([1.0, 1.0, 1.0, -1.0])
    omega = np.array([[0, 1, 0, 0], [-1, 0, 0, 0], [0, 0, 0, 1], [0, 0, -1, 0]], dtype=float)
    pt = cov * flip[:, None] * flip[None, :]
    evals, evecs = np.linalg.eigh(pt + 1j * omega)
    v = evecs[..., 0]
    u = v * flip
    z = np.real(np.conj(u)[..., :, None] * u[..., None, :])  # (n, 4, 4) real symmetric
    const = np.real(1j * np.einsum("ni,ij,nj->n", np.conj(v), omega, v))
    # w = sum_ij Z_ij sigma_ij = sum_ij Z_ij 2 Cov_ij; in vech(Cov) entries (i <= j):
    coeff = np.stack([2 * z[:, i, j] * (1.0 if i == j else 2.0) for i, j in _PAIRS], axis=-1)
    return coeff, const, evals[..., 0]


def covariance_witness_plan(covariance, times_s=None, *, imprecision_x: float = 0.0, imprecision_p: float = 0.0,
                            confidence: float | None = 0.999, sigmas: float | None = None,
                            power: float | None = None, overhead_s: float = 0.0) -> CovariancePlan:
    """Repetitions for the linear PPT witness of a two-mode covariance matrix (same 9 settings).

    Every separable state has a partially transposed covariance sigma~ = Lambda sigma Lambda
    (Lambda = diag(1, 1, 1, -1)) that is itself a bona fide covariance, sigma~ + i Omega >= 0
    ([Simon2000]; vacuum = identity convention). For a fixed vector v, w(sigma) =
    v^dag (sigma~ + i Omega) v is therefore >= 0 on separable states and linear in sigma; with v
    the eigenvector of the smallest eigenvalue lambda_min of the simulated sigma~ + i Omega it
    equals lambda_min < 0 exactly when nu~_- < 1 (the continuous-variable analogue of
    :func:`gqsim.studies.certification.witness_design.optimal_ppt_witness`, cf. [Guhne2009] on witnesses from positive
    maps). Being linear in the fitted covariance, its estimate is unbiased and its variance is
    exact: a^T P W P^T a / (N - 1) (P the least-squares pseudo-inverse, W the Wishart moment
    covariance of :func:`log_negativity_plan`). ``value`` is -lambda_min (positive = entangled).
    """
    cov = _checked_covariances(covariance, imprecision_x, imprecision_p)
    k = sigma_multiplier(None if sigmas is not None else confidence, sigmas=sigmas, power=power)
    _check_overhead(overhead_s)
    coeff, const, lam = _linear_witness(cov)
    var1 = _linear_var1(coeff, _vech(cov / 2), imprecision_x, imprecision_p)
    value = -lam
    scale = max(1.0, float(np.abs(cov).max()))
    usable = np.where(value > MARGIN_RTOL * scale, value, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        n_minus_1 = np.where(usable > 0, k ** 2 * var1 / usable ** 2, np.inf)
    per_one = np.maximum(_ceil_or_inf(1.0 + n_minus_1), 2.0)
    per = np.repeat(per_one[:, None], len(COVARIANCE_SETTINGS), axis=1)
    total = per.sum(axis=1)
    times = np.zeros(cov.shape[0]) if times_s is None else np.asarray(times_s, dtype=float)
    if times.shape != (cov.shape[0],):
        raise ProtocolError("times_s", times.shape, f"must have one time per covariance matrix ({cov.shape[0]})")
    return CovariancePlan(times_s=times, value=value, standard_deviation_one_shot=np.sqrt(var1),
                          bias_one_shot=np.zeros_like(value), per_setting=per, total=total,
                          settings=tuple(f"{a},{b}" for a, b in COVARIANCE_SETTINGS), sigmas=k,
                          overhead_s=float(overhead_s), lab_time_s=lab_time(total, times, overhead_s),
                          statistic="linear_witness", coefficients=coeff, constant=const)


def _linear_var1(coeff: np.ndarray, theta: np.ndarray, noise_x: float, noise_p: float) -> np.ndarray:
    """(N - 1) Var(a . theta_hat) for coefficient rows ``coeff`` (n, 10) at covariances ``theta`` (n, 10)."""
    design, offsets = _moment_design(noise_x, noise_p)
    pinv = np.linalg.pinv(design)
    w = _wishart_unit_covariance(theta, design, offsets)
    jac = coeff @ pinv
    return np.einsum("ni,nij,nj->n", jac, w, jac)


# --------------------------------------------------------------------------------------
# Monte-Carlo for the oscillator plans (sample-moment records)
# --------------------------------------------------------------------------------------

def _gaussian_check(est, se, expected: float, sd: float, sigmas: float, trials: int, seed: int) -> MonteCarloCheck:
    """Summarise records of a statistic that certifies when it lies *below* ``expected``'s bound side.

    ``est`` holds margin estimates (bound - value, or the value itself for -ln nu~), so the
    entangled side is "margin > 0" and coverage is for the one-sided interval [est - k se, inf).
    """
    covered = lambda err: float(np.mean(est - expected <= sigmas * err))  # noqa: E731
    return MonteCarloCheck(trials=trials, seed=seed, sigmas=float(sigmas), expected_value=float(expected),
                           mean_estimate=float(est.mean()), analytic_sd=float(sd), sample_sd=float(est.std(ddof=1)),
                           certified_fraction=float(np.mean(est >= sigmas * sd)),
                           predicted_certified_fraction=float(stats.norm.cdf(expected / sd - sigmas)),
                           coverage=covered(sd), predicted_coverage=float(stats.norm.cdf(sigmas)),
                           certified_fraction_plugin=float(np.mean(est >= sigmas * se)), coverage_plugin=covered(se))


def duan_monte_carlo_check(plan: DuanPlan, *, index: int, trials: int = 2000, seed: int = 0) -> MonteCarloCheck:
    """Seeded records of the two sample variances of a :class:`DuanPlan` at time ``index``.

    For Gaussian readings (N - 1) s^2 / Var is chi^2 with N - 1 degrees of freedom
    [Cochran1934], so each record draws the two sample variances exactly from that law; the
    statistic is the margin estimate bound - (s_u^2 + s_v^2). Same seed, same records.
    """
    n_u, n_v = plan.per_setting[index]
    if not (np.isfinite(n_u) and np.isfinite(n_v)):
        raise PhysicsError("measurement time", float(plan.times_s[index]), "the Duan witness cannot certify here")
    rng = np.random.default_rng(seed)
    s_u = plan.variance_u[index] * rng.chisquare(n_u - 1, size=trials) / (n_u - 1)
    s_v = plan.variance_v[index] * rng.chisquare(n_v - 1, size=trials) / (n_v - 1)
    est = plan.bound[index] - (s_u + s_v)
    se = np.sqrt(2 * s_u ** 2 / (n_u - 1) + 2 * s_v ** 2 / (n_v - 1))
    sd = float(np.hypot(sample_variance_sd(plan.variance_u[index], n_u), sample_variance_sd(plan.variance_v[index], n_v)))
    return _gaussian_check(est, se, float(plan.margin[index]), sd, plan.sigmas, trials, seed)


def covariance_monte_carlo_check(covariance, plan: CovariancePlan, *, index: int, imprecision_x: float = 0.0,
                                 imprecision_p: float = 0.0, trials: int = 500, seed: int = 0) -> MonteCarloCheck:
    """Seeded records of the 9 settings' sample covariance matrices for a :class:`CovariancePlan`.

    Each setting's unbiased 2 x 2 sample covariance of N Gaussian readings is drawn from the
    Wishart law W(S/(N-1), N-1) ([Anderson2003], via ``scipy.stats.wishart``); the covariance
    fit and -ln nu~ are then computed per record as an experiment would, minus the record's own
    second-order bias estimate (``bias_one_shot`` / (N - 1)). Same seed, same records.
    """
    cov = np.asarray(covariance, dtype=float).reshape(-1, 4, 4)[index]
    n = plan.per_setting[index, 0]
    if not np.isfinite(n):
        raise PhysicsError("measurement time", float(plan.times_s[index]), "the covariance plan cannot certify here")
    design, offsets = _moment_design(imprecision_x, imprecision_p)
    true_moments = _vech(cov / 2) @ design.T + offsets
    rng = np.random.default_rng(seed)
    moments = np.empty((trials, design.shape[0]))
    for s in range(len(COVARIANCE_SETTINGS)):
        saa, sbb, sab = true_moments[3 * s:3 * s + 3]
        scale = np.array([[saa, sab], [sab, sbb]]) / (n - 1)
        draws = stats.wishart(df=n - 1, scale=scale).rvs(size=trials, random_state=rng).reshape(trials, 2, 2)
        moments[:, 3 * s:3 * s + 3] = np.stack([draws[:, 0, 0], draws[:, 1, 1], draws[:, 0, 1]], axis=1)
    fitted = covariance_from_moments(moments, imprecision_x=imprecision_x, imprecision_p=imprecision_p)
    if plan.statistic == "linear_witness":
        a = np.broadcast_to(plan.coefficients[index], (trials, plan.coefficients.shape[1]))
        est = -(np.einsum("tk,tk->t", a, _vech(fitted / 2)) + plan.constant[index])
        se = np.sqrt(_linear_var1(a, _vech(fitted / 2), imprecision_x, imprecision_p) / (n - 1))
    else:
        refit = log_negativity_plan(fitted, sigmas=plan.sigmas, imprecision_x=imprecision_x,
                                    imprecision_p=imprecision_p)
        # each record subtracts its own second-order bias estimate, as the plan assumes
        est = pt_symplectic_log(fitted) - refit.bias_one_shot / (n - 1)
        se = refit.standard_deviation_one_shot / np.sqrt(n - 1)
    sd = float(plan.standard_deviation_one_shot[index] / np.sqrt(n - 1))
    return _gaussian_check(est, se, float(plan.value[index]), sd, plan.sigmas, trials, seed)


def _checked_covariances(covariance, imprecision_x, imprecision_p) -> np.ndarray:
    """(n, 4, 4) finite covariances ordered (x1, p1, x2, p2) and non-negative added quadrature
    variances; one-line errors otherwise."""
    cov = np.asarray(covariance, dtype=float)
    if cov.shape[-2:] != (4, 4):
        raise ProtocolError("covariance", cov.shape, "must be (4, 4) or (n, 4, 4), ordered (x1, p1, x2, p2)")
    cov = cov.reshape(-1, 4, 4)
    if not np.all(np.isfinite(cov)):
        raise PhysicsError("covariance", "non-finite entries", "covariance matrices must be finite")
    for key, val in (("imprecision_x", imprecision_x), ("imprecision_p", imprecision_p)):
        if isinstance(val, bool) or not isinstance(val, (int, float)) or not (np.isfinite(val) and val >= 0):
            raise ProtocolError(key, val, "must be a non-negative added variance (vacuum Var(x) = 1/2)")
    return cov
