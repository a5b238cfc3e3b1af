"""Local Poisson likelihood fits, against scipy.optimize, the textbook deviance and known truth."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import minimize
from scipy.stats import poisson

from estimators import KERNELS, fit
from estimators.poisson import poisson_deviance, poisson_quantile


def test_local_fit_maximises_the_weighted_local_log_likelihood() -> None:
    # general-purpose reference: scipy.optimize maximises
    # sum_i w_i K(u_i) [y_i (a + b u_i) - exp(a + b u_i)] directly (Fan, Heckman & Wand 1995, eq. 2.2)
    rng = np.random.default_rng(5)
    n = 60
    x = np.sort(rng.uniform(0.0, 10.0, n))
    w = rng.uniform(0.5, 2.0, n)
    y = rng.poisson(np.exp(1.0 + 0.2 * x)).astype(float)
    h = 1.3
    s = fit(x, y, weights=w, bandwidth=h, family="poisson")
    kern = KERNELS["gaussian"]
    for t in (0.4, 3.3, 7.0, 9.8):
        u = (x - t) / h
        k = kern(u) * w

        def negloglik(p: np.ndarray, k: np.ndarray = k, u: np.ndarray = u) -> float:
            eta = p[0] + p[1] * u
            return -float(np.sum(k * (y * eta - np.exp(eta))))

        best = minimize(negloglik, np.array([np.log(y.mean() + 1), 0.0]), method="BFGS", options={"gtol": 1e-10})
        assert float(s.predict([t])[0]) == pytest.approx(float(np.exp(best.x[0])), rel=1e-5)


def test_deviance_matches_the_textbook_formula() -> None:
    # McCullagh & Nelder (1989), Section 2.3: D = 2 sum [y log(y / mu) - (y - mu)], y log y = 0 at y = 0;
    # equivalently twice the log-likelihood gap to the saturated model (scipy.stats.poisson.logpmf)
    y = np.array([0.0, 1.0, 4.0, 9.0, 2.0])
    mu = np.array([0.3, 1.7, 3.2, 11.0, 2.0])
    expected = 2.0 * (poisson.logpmf(y, np.where(y > 0, y, 1.0)) * (y > 0) - poisson.logpmf(y, mu))
    np.testing.assert_allclose(poisson_deviance(y, mu), expected, rtol=1e-12, atol=1e-12)


def test_negative_count_is_refused_with_its_index() -> None:
    with pytest.raises(ValueError, match=r"y\[2\]"):
        fit([0.0, 1.0, 2.0, 3.0], [1.0, 2.0, -1.0, 4.0], family="poisson")


def test_counts_estimates_and_bands_stay_positive_and_cover() -> None:
    # Monte Carlo with known intensity 0.5 .. 37; pointwise 95 % bands, target coverage 0.90 - 0.985
    def lam(t: np.ndarray) -> np.ndarray:
        return 0.5 + 36.5 * (0.5 + 0.5 * np.sin(2.0 * np.pi * t)) ** 2

    grid = np.linspace(0.02, 0.98, 40)
    hits = []
    for seed in range(6):
        rng = np.random.default_rng(seed)
        x = np.sort(rng.uniform(0.0, 1.0, 600))
        y = rng.poisson(lam(x)).astype(float)
        s = fit(x, y, family="poisson")
        band = s.bands(grid, method="analytic")
        assert np.all(band.lower > 0) and np.all(s.predict(grid) > 0)
        hits.append(np.mean((band.lower <= lam(grid)) & (lam(grid) <= band.upper)))
    assert 0.88 <= float(np.mean(hits)) <= 0.99  # target 0.90-0.985, less the Monte Carlo error of 6 samples


def test_resistant_count_fit_leaves_a_spike_out() -> None:
    # reference: scipy.optimize maximising the local log-likelihood of the readings without the spike
    rng = np.random.default_rng(8)
    n = 80
    x = np.sort(rng.uniform(0.0, 10.0, n))
    y = rng.poisson(np.exp(1.5 + 0.15 * x)).astype(float)
    y[40] += 60.0
    h = 1.2
    s = fit(x, y, bandwidth=h, family="poisson", robust=True)
    assert s.robustness_weights is not None and s.robustness_weights[40] == 0.0
    keep = np.ones(n, dtype=bool)
    keep[s.robustness_weights == 0.0] = False
    assert np.count_nonzero(~keep) <= 3  # the spike, and at most a few readings in the Poisson tails
    kern = KERNELS["gaussian"]
    t = float(x[40])
    u = (x[keep] - t) / h
    k = kern(u)

    def negloglik(p: np.ndarray) -> float:
        eta = p[0] + p[1] * u
        return -float(np.sum(k * (y[keep] * eta - np.exp(eta))))

    best = minimize(negloglik, np.array([np.log(y.mean()), 0.0]), method="BFGS", options={"gtol": 1e-10})
    assert float(s.predict([t])[0]) == pytest.approx(float(np.exp(best.x[0])), rel=1e-5)


def test_count_quantile_matches_scipy() -> None:
    # reference: scipy.stats.poisson.ppf (the smallest k with P(X <= k) >= q)
    mu = np.array([0.0, 1e-6, 0.05, 0.5, 1.0, 2.5, 7.3, 37.0, 120.0, 1e4])
    for q in (0.0005, 0.025, 0.5, 0.975, 0.9995):
        np.testing.assert_array_equal(poisson_quantile(q, mu), poisson.ppf(q, mu))


def test_spikes_in_counts_are_flagged_by_the_resistant_count_fit() -> None:
    # Monte Carlo with known intensity 0.5 .. 37; 5 % of the counts get round(5 sqrt(lambda) + 10) more
    from estimators.anomalies import find_anomalies

    def lam(t: np.ndarray) -> np.ndarray:
        return 0.5 + 36.5 * (0.5 + 0.5 * np.sin(2.0 * np.pi * t)) ** 2

    for seed in (28, 105):
        rng = np.random.default_rng(seed)
        x = rng.uniform(0.0, 1.0, 600)
        y = rng.poisson(lam(x)).astype(float)
        hit = rng.choice(600, 30, replace=False)
        y[hit] += np.round(5.0 * np.sqrt(lam(x[hit])) + 10.0)
        flagged = find_anomalies(fit(x, y, family="poisson", robust=True), 0.999).index
        assert np.mean(np.isin(hit, flagged)) >= 0.9
        assert np.count_nonzero(~np.isin(flagged, hit)) <= 6  # at most 1 % of the 570 clean counts
