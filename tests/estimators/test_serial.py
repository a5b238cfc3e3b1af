"""Correlated noise (estimators.serial) against outside references.

* Size and power of the diagnosis by Monte Carlo: under independent noise the
  rejection rate must match the nominal level within a binomial tolerance
  (Bartlett's formula, Box & Jenkins 1976, eq. 2.1.13, gives the null variance).
* Long-run variance of an AR(1) series against the closed form
  ``sigma^2 (1 + phi) / (1 - phi)`` (textbook time-series result; Box & Jenkins 1976, 3.2.4).
* The leave-(2l+1)-out score against brute-force refits with the dense formula
  (``tests/estimators/dense_reference.py``), readings left out by zero weight.
* The risk score against the dense hat matrix: ``RSS/n + 2/n sum L_ij gamma(|i-j|) - gamma(0)``
  (Altman 1990, eq. 8).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from estimators.kernels import KERNELS
from estimators.serial import (
    NoiseDiagnosis,
    ar1_long_run_variance,
    correlated_scores,
    correlated_se_factor,
    diagnose_noise,
    exclusion_lag,
    newey_west_variance,
    series_in_x_order,
)
from estimators.sums import GAUSSIAN_CUTOFF

from .dense_reference import dense_local_fit
from .noise_series import ar1, trend


def test_diagnosis_size_under_independent_noise() -> None:
    # 400 replications at level 0.05: rejections ~ Binomial(400, 0.05), mean 20, sd 4.4; +-3 sd
    rng = np.random.default_rng(11)
    n, reps, level = 500, 400, 0.05
    x = (np.arange(n) + 0.5) / n
    rejections = 0
    for _ in range(reps):
        y = trend(x) + 0.3 * rng.standard_normal(n)
        rejections += diagnose_noise(x, y, level=level).correlated
    sd = math.sqrt(reps * level * (1 - level))
    assert abs(rejections - reps * level) <= 3 * sd, rejections


def test_diagnosis_size_with_heavy_tails_and_jitter() -> None:
    # Bartlett's formula holds for iid noise with finite fourth moment: t(5) noise, jittered stamps
    rng = np.random.default_rng(12)
    n, reps, level = 500, 400, 0.05
    rejections = 0
    for _ in range(reps):
        x = np.sort((np.arange(n) + 0.5 + rng.uniform(-0.4, 0.4, n)) / n)
        y = trend(x) + 0.3 * rng.standard_t(5, n)
        rejections += diagnose_noise(x, y, level=level).correlated
    sd = math.sqrt(reps * level * (1 - level))
    assert abs(rejections - reps * level) <= 3 * sd, rejections


def test_diagnosis_power_at_phi_03() -> None:
    rng = np.random.default_rng(13)
    n, reps = 500, 200
    x = (np.arange(n) + 0.5) / n
    found = [diagnose_noise(x, trend(x) + 0.3 * ar1(rng, n, 0.3)) for _ in range(reps)]
    power = np.mean([d.correlated for d in found])
    assert power >= 0.9, power  # at the default level 0.01; z has mean ~4.7 here
    est = np.median([d.autocorrelation for d in found])
    assert abs(est - 0.3) < 0.05, est


def test_p_value_is_uniform_under_independence() -> None:
    # Kolmogorov-Smirnov against U(0, 1) (scipy as the general-purpose reference)
    rng = np.random.default_rng(14)
    n = 400
    x = np.arange(n, dtype=float)
    p = [diagnose_noise(x, rng.standard_normal(n)).p_value for _ in range(400)]
    assert stats.kstest(p, "uniform").pvalue > 0.001


def test_ties_are_averaged_in_x_order() -> None:
    x = np.array([3.0, 1.0, 2.0, 1.0, 3.0, 3.0])
    y = np.array([6.0, 1.0, 4.0, 3.0, 9.0, 3.0])
    xg, yg, wg = series_in_x_order(x, y)
    np.testing.assert_allclose(xg, [1.0, 2.0, 3.0])
    np.testing.assert_allclose(yg, [2.0, 4.0, 6.0])  # means by hand
    np.testing.assert_allclose(wg, [2.0, 1.0, 3.0])


def test_diagnosis_of_tied_readings_counts_groups() -> None:
    rng = np.random.default_rng(15)
    x = np.repeat(np.arange(300.0), 3)
    d = diagnose_noise(x, rng.standard_normal(x.size))
    assert d.length == 300


@pytest.mark.parametrize("phi", [0.3, 0.6, 0.9])
def test_long_run_variance_of_ar1_against_closed_form(phi: float) -> None:
    rng = np.random.default_rng(int(phi * 10))
    n, sd = 400_000, 0.7
    e = sd * ar1(rng, n, phi)
    closed = sd * sd * (1 + phi) / (1 - phi)  # textbook AR(1) long-run variance
    assert ar1_long_run_variance(sd * sd, phi) == pytest.approx(closed, rel=1e-14)
    d = diagnose_noise(np.arange(n, dtype=float), e)
    assert d.autocorrelation == pytest.approx(phi, abs=0.01)
    assert d.marginal_variance == pytest.approx(sd * sd, rel=0.05)
    assert d.long_run_variance == pytest.approx(closed, rel=0.1)
    nw, lag = newey_west_variance(e)
    assert lag > 0
    assert nw == pytest.approx(closed, rel=0.1)


def test_se_factor_is_ratio_of_long_run_to_marginal_sd() -> None:
    d = NoiseDiagnosis(0.6, 5.0, 1e-6, True, 0.01, 0.09, ar1_long_run_variance(0.09, 0.6), 100)
    assert correlated_se_factor(d, 0.3) == pytest.approx(2.0)  # sqrt((1 + 0.6) / (1 - 0.6))


def test_exclusion_lag() -> None:
    # smallest l with phi^l < 0.05 (by hand: 0.6^6 = 0.047, 0.6^5 = 0.078)
    assert exclusion_lag(0.6) == 6
    assert exclusion_lag(0.0) == 1


def _diag(phi: float, gamma0: float = 0.09) -> NoiseDiagnosis:
    return NoiseDiagnosis(phi, 0.0, 1.0, True, 0.01, gamma0, ar1_long_run_variance(gamma0, phi), 0)


@pytest.mark.parametrize("kernel", ["gaussian", "epanechnikov"])
@pytest.mark.parametrize("degree", [0, 1, 2])
def test_leave_out_score_against_brute_force_refits(kernel: str, degree: int) -> None:
    rng = np.random.default_rng(21 + degree)
    n = 70
    x = np.sort(rng.uniform(0, 1, n))
    x[10] = x[11]  # a tie: the whole group is left out together
    y = trend(x) + 0.3 * ar1(rng, n, 0.6)
    kern = KERNELS[kernel]
    phi = 0.45
    lag = exclusion_lag(phi)
    grid = np.array([0.2, 0.3, 0.45]) if kernel == "epanechnikov" else np.array([0.05, 0.12, 0.35])
    got = correlated_scores(x, y, grid, _diag(phi), kernel=kern, degree=degree, criterion="leave_out")
    assert got.exclusion == lag
    for k, h in enumerate(grid):
        losses = []
        for i in range(n):
            w = np.ones(n)
            left = x[max(i - lag, 0)]
            right = x[min(i + lag, n - 1)]
            w[(x >= left) & (x <= right)] = 0.0
            est = dense_local_fit(x, y, w, np.array([x[i]]), kern, float(h), degree)[0][0]
            losses.append((y[i] - est) ** 2)
        assert got.scores[k] == pytest.approx(np.mean(losses), rel=1e-8)


def _dense_hat(x: np.ndarray, kern: object, h: float, degree: int) -> np.ndarray:
    n = x.size
    hat = np.empty((n, n))
    for i in range(n):
        u = (x - x[i]) / h
        k = kern(u)  # type: ignore[operator]
        k = np.where(np.abs(u) <= GAUSSIAN_CUTOFF, k, 0.0)
        design = np.vander(u, degree + 1, increasing=True)
        hat[i] = np.linalg.solve(design.T @ (k[:, None] * design), design.T * k)[0]
    return hat


@pytest.mark.parametrize("degree", [0, 1])
def test_risk_score_against_dense_hat_matrix(degree: int) -> None:
    rng = np.random.default_rng(31)
    n = 80
    x = np.sort(rng.uniform(0, 1, n))
    y = trend(x) + 0.3 * ar1(rng, n, 0.5)
    kern = KERNELS["gaussian"]
    diag = _diag(0.5)
    gamma = diag.autocovariance()
    grid = np.array([0.03, 0.08, 0.2])
    got = correlated_scores(x, y, grid, diag, kernel=kern, degree=degree, criterion="risk")
    lag = np.abs(np.subtract.outer(np.arange(n), np.arange(n)))
    cov = np.where(lag < gamma.size, gamma[np.minimum(lag, gamma.size - 1)], 0.0)
    for k, h in enumerate(grid):
        hat = _dense_hat(x, kern, float(h), degree)
        rss = float(np.sum((y - hat @ y) ** 2))
        expected = rss / n + 2.0 / n * float(np.sum(hat * cov)) - gamma[0]
        assert got.scores[k] == pytest.approx(expected, rel=1e-8)
        assert got.effective_df[k] == pytest.approx(np.trace(hat), rel=1e-8)


def test_risk_score_is_unbiased_for_the_average_squared_error() -> None:
    # Altman (1990): E R(h) = E ASE(h) when gamma is the true autocovariance; Monte Carlo over 300 series
    rng = np.random.default_rng(41)
    n, phi, sd = 200, 0.6, 0.3
    x = (np.arange(n) + 0.5) / n
    m = trend(x)
    kern = KERNELS["gaussian"]
    diag = _diag(phi, sd * sd)
    h = 0.02
    hat = _dense_hat(x, kern, h, 1)
    scores, ases = [], []
    for _ in range(300):
        y = m + sd * ar1(rng, n, phi)
        scores.append(correlated_scores(x, y, np.array([h]), diag, kernel=kern, criterion="risk").scores[0])
        ases.append(np.mean((hat @ y - m) ** 2))
    diff = np.array(scores) - np.array(ases)
    assert abs(diff.mean()) < 3 * diff.std(ddof=1) / math.sqrt(diff.size) + 1e-3 * np.mean(ases)


def test_one_se_picks_a_larger_bandwidth_within_one_se() -> None:
    rng = np.random.default_rng(51)
    n = 400
    x = (np.arange(n) + 0.5) / n
    y = trend(x) + 0.3 * ar1(rng, n, 0.6)
    d = diagnose_noise(x, y)
    grid = np.geomspace(0.01, 0.3, 20)
    kern = KERNELS["gaussian"]
    mn = correlated_scores(x, y, grid, d, kernel=kern, criterion="leave_out")
    se = correlated_scores(x, y, grid, d, kernel=kern, criterion="leave_out", rule="one_se")
    assert se.chosen >= mn.chosen
    i = int(np.flatnonzero(grid == se.chosen)[0])
    assert se.scores[i] <= se.scores[se.best] + se.score_se[se.best]
    assert np.all(np.isfinite(se.score_se))


def test_unsorted_x_is_refused() -> None:
    with pytest.raises(ValueError, match="ascending"):
        correlated_scores(np.array([1.0, 0.0, 2.0]), np.zeros(3), np.array([1.0]), _diag(0.5), kernel=KERNELS["gaussian"])


def test_autocovariance_of_block_means_against_simulation() -> None:
    # means of b consecutive AR(1) readings: closed-form sum against the empirical autocovariance
    from estimators.serial import _aggregated_autocovariance

    rng = np.random.default_rng(61)
    phi, b = 0.8, 5
    e = ar1(rng, 1_000_000, phi)
    means = e.reshape(-1, b).mean(axis=1)
    means = means - means.mean()
    got = _aggregated_autocovariance(phi ** np.arange(60), b)
    for k in range(3):
        emp = float(np.dot(means[k:], means[: means.size - k])) / means.size
        assert got[k] == pytest.approx(emp, abs=0.01)
    assert _aggregated_autocovariance(np.array([1.0]), b)[0] == pytest.approx(1.0 / b)  # iid: variance / b


def test_long_series_are_scored_on_means() -> None:
    # above AGGREGATE_READINGS the choice stays close to the one on the readings themselves
    from estimators import serial

    rng = np.random.default_rng(62)
    n = 6000
    x = (np.arange(n) + 0.5) / n
    y = trend(x) + 0.3 * ar1(rng, n, 0.6)
    d = diagnose_noise(x, y)
    grid = np.geomspace(0.005, 0.3, 16)
    kern = KERNELS["gaussian"]
    full = correlated_scores(x, y, grid, d, kernel=kern, criterion="leave_out")
    old = serial.AGGREGATE_READINGS
    try:
        serial.AGGREGATE_READINGS = 1500
        agg = correlated_scores(x, y, grid, d, kernel=kern, criterion="leave_out")
    finally:
        serial.AGGREGATE_READINGS = old
    assert abs(np.log(agg.chosen / full.chosen)) <= np.log(grid[1] / grid[0]) * 2.01


def test_diagnosis_with_ties_and_zero_weights_against_a_direct_computation() -> None:
    # the statistic written out with numpy: r = lag-1 autocorrelation (about zero) of the differences of the
    # weighted tie-group means, z = (r + 1/2) sqrt(2 N) (Bartlett's formula, Box & Jenkins 1976, eq. 2.1.13)
    rng = np.random.default_rng(71)
    n = 600
    x = np.round(rng.uniform(0.0, 10.0, n), 1)  # about 100 distinct values, unsorted
    y = trend(x / 10.0) + 0.3 * rng.standard_normal(n)
    w = rng.choice([0.0, 0.5, 1.0, 2.0], n)
    got = diagnose_noise(x, y, w)
    keep = w > 0
    xs, ys, ws = x[keep], y[keep], w[keep]
    groups = np.unique(xs)
    means = np.array([np.sum(ws[xs == g] * ys[xs == g]) / np.sum(ws[xs == g]) for g in groups])
    d = np.diff(means)
    r = float(d[1:] @ d[:-1]) / float(d @ d)
    assert got.length == groups.size
    assert got.statistic == pytest.approx((r + 0.5) * math.sqrt(2.0 * d.size), rel=1e-10)
