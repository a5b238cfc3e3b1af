"""Outlier-resistant fits and anomaly flags, against Cleveland (1979), closed forms and known truth."""

from __future__ import annotations

import numpy as np
import pytest

from estimators import KERNELS, fit
from estimators.anomalies import find_anomalies
from estimators.robust import SCALE_MULTIPLE, bisquare, bisquare_weights

from .dense_reference import dense_local_fit
from .noise_series import ar1


def _truth(t: np.ndarray) -> np.ndarray:
    return 20.0 + 6.0 * np.sin(2.0 * np.pi * t) + 4.0 * t


def _spiky(seed: int, n: int = 800, share: float = 0.05) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0.0, 1.0, n))
    clean = _truth(x) + rng.normal(size=n)
    y = clean.copy()
    spikes = rng.choice(n, int(share * n), replace=False)
    y[spikes] += rng.uniform(8.0, 15.0, spikes.size)
    return x, y, clean, np.sort(spikes)


def test_bisquare_function_matches_cleveland_1979() -> None:
    # Cleveland (1979), Section 2: B(x) = (1 - x^2)^2 for |x| < 1, 0 for |x| >= 1
    u = np.array([-2.0, -1.0, -0.5, 0.0, 0.25, 0.5, 0.999, 1.0, 3.0])
    expected = np.array([0.0, 0.0, 0.5625, 1.0, (1 - 0.0625) ** 2, 0.5625, (1 - 0.999**2) ** 2, 0.0, 0.0])
    np.testing.assert_allclose(bisquare(u), expected, rtol=0, atol=1e-15)


def test_robustness_weights_use_six_times_the_median_absolute_residual() -> None:
    # Cleveland (1979), Section 2: s = median |e_i|, delta_k = B(e_k / (6 s))
    assert SCALE_MULTIPLE == 6.0
    r = np.array([1.0, -1.0, 2.0, -2.0, 3.0, -3.0, 100.0])  # median |r| = 2
    w, cut = bisquare_weights(r, np.ones(r.size, dtype=bool))
    assert cut == pytest.approx(12.0)
    np.testing.assert_allclose(w, (1.0 - (r / 12.0) ** 2) ** 2 * (np.abs(r) < 12.0), atol=1e-15)


def test_gross_outlier_leaves_the_fit_of_the_other_readings() -> None:
    # closed form: local linear weighted least squares on the readings without the outlier
    # (Fan & Gijbels 1996, eq. 3.4, solved densely in tests/estimators/dense_reference.py)
    rng = np.random.default_rng(3)
    n = 120
    x = np.sort(rng.uniform(0.0, 1.0, n))
    y = _truth(x) + rng.normal(size=n)
    y_bad = y.copy()
    y_bad[57] += 1000.0
    h = 0.08
    kern = KERNELS["epanechnikov"]
    s = fit(x, y_bad, kernel="epanechnikov", bandwidth=h, robust=True)
    keep = np.ones(n)
    keep[57] = 0.0
    t = np.linspace(0.02, 0.98, 41)
    ref, _, _, _ = dense_local_fit(x, y, keep, t, kern, h, 1)
    np.testing.assert_allclose(s.predict(t), ref, rtol=0, atol=1e-9)
    assert s.robustness_weights is not None and s.robustness_weights[57] == 0.0


def test_without_outliers_the_robust_fit_is_the_least_squares_fit() -> None:
    # closed form as above, on every reading: no residual reaches 6 median |r| (about 4 sd) here
    rng = np.random.default_rng(4)
    n = 150
    x = np.sort(rng.uniform(0.0, 1.0, n))
    y = _truth(x) + np.clip(rng.normal(size=n), -2.5, 2.5)
    s = fit(x, y, kernel="gaussian", bandwidth=0.05, robust=True)
    t = np.linspace(0.0, 1.0, 33)
    ref, _, _, _ = dense_local_fit(x, y, np.ones(n), t, KERNELS["gaussian"], 0.05, 1)
    np.testing.assert_allclose(s.predict(t), ref, rtol=0, atol=1e-8)


def test_spikes_do_not_drag_the_robust_fit() -> None:
    # Monte Carlo with known truth: average squared error against the plain fit of the clean readings
    ratios = []
    for seed in range(4):
        x, y, clean, _ = _spiky(seed)
        plain_clean = fit(x, clean)
        robust = fit(x, y, robust=True)
        m = _truth(x)
        ratios.append(float(np.mean((robust.fitted() - m) ** 2) / np.mean((plain_clean.fitted() - m) ** 2)))
        assert robust.selection is not None and robust.selection.selector == "robust_gcv"
    assert float(np.median(ratios)) <= 1.5


def test_a_cluster_of_spikes_cannot_hide_itself() -> None:
    # known truth: ten neighbouring readings +12 above the curve, unit noise
    rng = np.random.default_rng(7)
    n = 600
    x = np.linspace(0.0, 1.0, n)
    y = _truth(x) + rng.normal(size=n)
    y[300:310] += 12.0
    s = fit(x, y, robust=True)
    found = find_anomalies(s, 0.999)
    assert set(range(300, 310)) <= set(found.index.tolist())
    assert np.all((found.y < found.lower) | (found.y > found.upper))
    assert abs(float(s.predict([x[305]])[0]) - _truth(x[305:306])[0]) < 1.0


def test_anomaly_flags_on_spikes_and_on_clean_readings() -> None:
    # Monte Carlo with known truth; on clean data each reading falls outside a pointwise 99 %
    # prediction interval with probability about 0.01 (binomial: 3000 readings, mean 30, sd 5.4)
    x, y, _, spikes = _spiky(11)
    found = set(find_anomalies(fit(x, y, robust=True), 0.999).index.tolist())
    recall = len(found & set(spikes.tolist())) / spikes.size
    false_rate = len(found - set(spikes.tolist())) / (x.size - spikes.size)
    assert recall >= 0.9 and false_rate <= 0.01
    flags = 0
    for seed in range(3):
        rng = np.random.default_rng(100 + seed)
        xc = np.sort(rng.uniform(0.0, 1.0, 1000))
        yc = _truth(xc) + rng.normal(size=1000)
        flags += len(find_anomalies(fit(xc, yc, robust=True), 0.99))
    assert 30 - 3.5 * 5.4 <= flags <= 30 + 3.5 * 5.4


def test_robust_fit_on_correlated_noise_keeps_its_spikes_out_and_widens_its_bands() -> None:
    # AR(1) noise with phi = 0.6 (stationary, unit marginal variance; Box & Jenkins 1976, Section 3.2.4) plus 5 %
    # one-sided spikes: the resistant fit leaves the spikes out, and with noise "correlated" its standard errors are
    # those of the same fit on independent noise times the long-run factor sqrt((1 + phi) / (1 - phi)) = 2 in
    # closed form (within the estimation error of phi and of the marginal variance).
    rng = np.random.default_rng(12)
    n, phi = 1500, 0.6
    e = ar1(rng, n, phi)
    x = np.linspace(0.0, 1.0, n)
    y = _truth(x) + e
    spikes = rng.choice(n, n // 20, replace=False)
    y[spikes] += rng.uniform(8.0, 15.0, spikes.size)
    correlated = fit(x, y, robust=True, noise="correlated", bandwidth=0.05)
    independent = fit(x, y, robust=True, noise="independent", bandwidth=0.05)
    assert correlated.noise == "correlated" and independent.noise == "independent"
    weights = correlated.robustness_weights
    assert weights is not None and np.all(weights[spikes] == 0.0)
    t = np.linspace(0.2, 0.8, 7)
    ratio = correlated.standard_error(t) / independent.standard_error(t)
    assert np.all(ratio > 1.5) and np.all(ratio < 2.6)
    auto = fit(x, y, robust=True)  # automatic bandwidth, noise found correlated by the test
    assert auto.noise == "correlated" and auto.selection is not None and auto.selection.selector.startswith("robust_")
