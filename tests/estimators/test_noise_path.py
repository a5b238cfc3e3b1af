"""``fit(..., noise=...)`` and ``select_bandwidth(..., noise=...)`` against outside references.

* The automatic bandwidth on the correlated path is the minimiser of the
  leave-(2l+1)-out score computed by brute-force refits (Chu & Marron 1991;
  Hart 1991), with a dense local polynomial fit (``dense_reference.py``).
* Standard errors under AR(1) noise against the Monte Carlo spread of the
  estimate (known truth); the independent-noise standard error must fall
  short there (Altman 1990, Section 2: it ignores the covariances).
* Prediction intervals for a new reading: Monte Carlo coverage with the
  reading's marginal variance (known truth).
* The path taken by ``noise="auto"`` on independent noise: Monte Carlo
  rejection rate against the test's size 0.01 (binomial tolerance).
* Bands: the correlated band's half-width equals the independent one times
  ``sqrt(long-run variance) / sigma`` (the variance of a mean of AR(1) noise,
  Box & Jenkins 1976, Section 3.2.4, closed form ``gamma(0) (1 + phi) / (1 - phi)``).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from estimators import fit, select_bandwidth
from estimators.kernels import KERNELS
from estimators.serial import exclusion_lag

from .dense_reference import dense_local_fit
from .noise_series import ar1, trend


def test_noise_is_validated_with_the_allowed_values() -> None:
    x = np.linspace(0, 1, 50)
    for bad in ("ar1", "Correlated", None, 1):
        with pytest.raises(ValueError, match="auto, independent, correlated"):
            fit(x, x, noise=bad)  # type: ignore[arg-type]
        with pytest.raises(ValueError, match="auto, independent, correlated"):
            select_bandwidth(x, x, noise=bad)  # type: ignore[arg-type]


def test_correlated_bandwidth_is_the_brute_force_leave_out_minimiser() -> None:
    # Chu & Marron (1991), Hart (1991): CV_l(h) = n^-1 sum_i (y_i - mhat_{-(i-l..i+l)}(x_i))^2, refitted densely
    rng = np.random.default_rng(7)
    n = 90
    x = (np.arange(n) + 0.5) / n
    y = trend(x) + 0.3 * ar1(rng, n, 0.6)
    kern = KERNELS["gaussian"]
    sel = select_bandwidth(x, y, noise="correlated", candidates=12)
    assert sel.selector == "modified_cv"
    assert sel.noise is not None and sel.noise.used == "correlated"
    lag = exclusion_lag(sel.noise.autocorrelation)
    brute = np.full(sel.candidates.size, np.nan)
    for k, h in enumerate(sel.candidates):
        losses = []
        for i in range(n):
            w = np.ones(n)
            w[max(i - lag, 0) : i + lag + 1] = 0.0
            est = dense_local_fit(x, y, w, np.array([x[i]]), kern, float(h), 1)[0][0]
            losses.append((y[i] - est) ** 2)
        if np.all(np.isfinite(losses)):
            brute[k] = float(np.mean(losses))
    finite = np.isfinite(sel.scores)
    # unscored only where the dense refit is undefined too, or at the smallest candidates (where the readings
    # kept carry under 1e-10 of the window's weight and the prediction has no reliable digits)
    assert np.all(np.isfinite(brute[finite]))
    assert finite.any() and finite[int(np.argmax(finite)) :].all()
    # the leave-out sums subtract the left-out terms from the window's sums: with a share s of the kernel weight
    # kept, about eps / s of relative precision is lost (s >= 1e-10 by construction), hence 1e-6 (error analysis
    # of cancellation, common practice)
    np.testing.assert_allclose(sel.scores[finite], brute[finite], rtol=1e-6)
    assert sel.chosen == sel.candidates[int(np.nanargmin(brute))]
    assert fit(x, y, noise="correlated", candidates=12).bandwidth == sel.chosen


def test_one_se_rule_on_the_correlated_path() -> None:
    # one-standard-error rule (Hastie, Tibshirani & Friedman 2009, Section 7.10): the largest candidate
    # whose score is within one standard error of the best
    rng = np.random.default_rng(9)
    n = 400
    x = (np.arange(n) + 0.5) / n
    y = trend(x) + 0.3 * ar1(rng, n, 0.6)
    best = select_bandwidth(x, y, noise="correlated")
    one = select_bandwidth(x, y, noise="correlated", rule="one_se")
    i_best = int(np.flatnonzero(best.candidates == best.chosen)[0])
    assert math.isfinite(one.score_se)
    within = np.flatnonzero(np.isfinite(one.scores) & (one.scores <= one.scores[i_best] + one.score_se))
    assert one.chosen == one.candidates[within.max()]
    assert one.chosen >= best.chosen


def test_standard_error_matches_the_monte_carlo_spread_under_ar1_noise() -> None:
    # known truth: 300 series of AR(1) noise (phi 0.6, sd 0.3); fixed bandwidth, so only the noise varies
    rng = np.random.default_rng(13)
    n, phi, h, reps = 500, 0.6, 0.04, 300
    x = (np.arange(n) + 0.5) / n
    t = np.array([0.3, 0.5, 0.7])
    est, se_corr, se_ind = [], [], []
    for _ in range(reps):
        y = trend(x) + 0.3 * ar1(rng, n, phi)
        s = fit(x, y, bandwidth=h, noise="correlated")
        est.append(s.predict(t))
        se_corr.append(s.standard_error(t))
        se_ind.append(fit(x, y, bandwidth=h, noise="independent").standard_error(t))
    spread = np.std(np.array(est), axis=0, ddof=1)
    # the SD of 300 draws is within ~4 % of the truth (1 sd of a normal SD estimate is 1/sqrt(2*299))
    ratio_corr = np.median(np.array(se_corr), axis=0) / spread
    ratio_ind = np.median(np.array(se_ind), axis=0) / spread
    assert np.all((ratio_corr > 0.85) & (ratio_corr < 1.25)), ratio_corr
    # the independent-noise SE misses the covariances: sqrt((1 - phi) / (1 + phi)) = 0.5 of the truth
    assert np.all(ratio_ind < 0.7), ratio_ind


def test_prediction_interval_covers_a_new_reading() -> None:
    # known truth: a new reading m(t) + e with e of the series' marginal law N(0, 0.3^2)
    rng = np.random.default_rng(17)
    n, phi, reps = 500, 0.6, 200
    x = (np.arange(n) + 0.5) / n
    t = np.array([0.25, 0.5, 0.75])
    hits = []
    for _ in range(reps):
        y = trend(x) + 0.3 * ar1(rng, n, phi)
        s = fit(x, y, bandwidth=0.04, noise="correlated")
        lo, hi = s.prediction_interval(t, level=0.9)
        new = trend(t) + 0.3 * rng.standard_normal(t.size)
        hits.append((lo <= new) & (new <= hi))
    share = float(np.mean(hits))
    # 600 draws at 0.9: binomial sd 0.012 (draws at one replication share the curve estimate; allow 3.5 sd)
    assert 0.86 <= share <= 0.94, share


def test_band_half_width_scales_by_the_long_run_to_marginal_ratio() -> None:
    # Box & Jenkins (1976), 3.2.4: long-run variance of AR(1) = gamma(0) (1 + phi) / (1 - phi)
    rng = np.random.default_rng(19)
    n = 800
    x = (np.arange(n) + 0.5) / n
    y = trend(x) + 0.3 * ar1(rng, n, 0.5)
    corr = fit(x, y, bandwidth=0.05, noise="correlated")
    ind = fit(x, y, bandwidth=0.05, noise="independent")
    assert corr.selection is None and corr.noise == "correlated"
    d = corr.noise_choice.diagnosis if corr.noise_choice else None
    assert d is not None
    gamma0, phi = d.marginal_variance, d.autocorrelation
    expected = math.sqrt(gamma0 * (1 + phi) / (1 - phi)) / ind.residual_scale
    t = np.linspace(0.2, 0.8, 7)
    bc = corr.bands(t, method="analytic")
    bi = ind.bands(t, method="analytic")
    np.testing.assert_allclose(bc.estimate, bi.estimate, rtol=1e-12)  # the bias-corrected centre is kept
    np.testing.assert_allclose((bc.upper - bc.lower) / (bi.upper - bi.lower), expected, rtol=1e-9)
    assert any(w.code == "correlated_noise" and f"{phi:.2f}" in w.message for w in corr.warnings)
    assert not any(w.code == "correlated_noise" for w in ind.warnings)
    assert ind.noise_autocorrelation == pytest.approx(phi)  # the estimate is reported on both paths


def test_auto_path_on_independent_noise_keeps_the_size() -> None:
    # size 0.01: over 400 replications rejections ~ Binomial(400, 0.01), mean 4, sd 2; allow up to 12
    rng = np.random.default_rng(23)
    n = 400
    x = (np.arange(n) + 0.5) / n
    found = sum(fit(x, trend(x) + 0.3 * rng.standard_normal(n), bandwidth=0.05).noise == "correlated" for _ in range(400))
    assert found <= 12


def test_auto_path_finds_ar1_at_phi_03() -> None:
    # power of the difference-based test at phi 0.3, n 500: z has mean ~ sqrt(2N) * (phi / 2) ~ 4.7 -> power ~ 0.9
    rng = np.random.default_rng(29)
    n = 500
    x = (np.arange(n) + 0.5) / n
    found = [fit(x, trend(x) + 0.3 * ar1(rng, n, 0.3), bandwidth=0.05).noise == "correlated" for _ in range(100)]
    assert np.mean(found) >= 0.8


def test_no_scorable_candidate_falls_back_to_the_largest() -> None:
    # by definition of leave-(2l+1)-out: with 2l + 1 >= n every window is left empty, so no candidate has a score
    rng = np.random.default_rng(31)
    n = 24
    x = (np.arange(n) + 0.5) / n
    y = trend(x) + 0.3 * ar1(rng, n, 0.97)
    sel = select_bandwidth(x, y, noise="correlated", candidates=8)
    assert sel.noise is not None
    lag = exclusion_lag(sel.noise.autocorrelation)
    assert 2 * lag + 1 >= n, f"setup: the estimate {sel.noise.autocorrelation:.2f} leaves readings to predict from"
    assert np.all(np.isnan(sel.scores))
    assert sel.chosen == sel.candidates[-1]
    assert any(w.code == "unscored_candidates" for w in sel.warnings)
