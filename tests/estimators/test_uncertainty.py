"""Standard errors, bands, prediction intervals and slopes against independent references.

References used here:

* the weighted least-squares formula for the equivalent-kernel weights of a
  local polynomial fit (Fan & Gijbels 1996, eq. 3.5), written out densely in
  this file;
* the bias-corrected estimator of Calonico, Cattaneo & Farrell (2018, eq. 2.3),
  ``mhat_p - e0' S_p^-1 X' W Z gamma``, also written out densely;
* Mammen's (1993) two-point weights: mean 0, variance 1, third moment 1;
* binomial standard errors for Monte Carlo coverage (``sqrt(p (1 - p) / N)``).
"""

from __future__ import annotations

import math
import tracemalloc

import numpy as np
import pytest

from estimators import KERNELS, Bands, fit
from estimators.uncertainty import (
    bands,
    prediction_interval,
    slope_standard_error,
    slope_summary,
    standard_error,
)
from estimators.uncertainty.bootstrap import MAMMEN
from estimators.uncertainty.local_fits import coefficient_row, local_fit

from .reference_bootstrap import propagate


def _dense_weights(x: np.ndarray, w: np.ndarray, t: np.ndarray, kernel: str, h: float, degree: int) -> np.ndarray:
    """Rows ``l(t) = e_nu' (X' W X)^-1 X' W`` for nu = 0 and 1 (direct WLS formula); shape (2, m, n)."""
    k = KERNELS[kernel]
    out = np.zeros((2, t.size, x.size))
    for i, ti in enumerate(t):
        u = (x - ti) / h
        kw = k(u) * w
        xmat = np.vander(u, degree + 1, increasing=True)
        rows = np.linalg.solve(xmat.T @ (kw[:, None] * xmat), (xmat * kw[:, None]).T)
        out[0, i] = rows[0]
        if degree >= 1:
            out[1, i] = rows[1] / h
    return out


def _data(n: int, seed: int, weights: bool = False) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    rng = np.random.default_rng(seed)
    x = rng.uniform(0.0, 10.0, n)
    y = np.sin(x) + (0.1 + 0.05 * x) * rng.standard_normal(n)
    w = rng.uniform(0.5, 2.0, n) if weights else None
    return x, y, w


# -- analytic standard errors against the dense formula ----------------------


@pytest.mark.parametrize("kernel", ["gaussian", "epanechnikov", "tricube", "uniform"])
@pytest.mark.parametrize("degree", [0, 1, 2])
@pytest.mark.parametrize("weighted", [False, True])
def test_standard_errors_equal_dense_weights(kernel: str, degree: int, weighted: bool) -> None:
    x, y, w = _data(60, 11 + degree, weighted)
    h = 2.5
    s = fit(x, y, kernel=kernel, degree=degree, bandwidth=h, weights=w)
    wv = np.ones_like(x) if w is None else w
    t = np.array([-0.5, 0.3, 2.0, 5.1, 7.7, 10.4])  # two slightly outside the data
    rows = _dense_weights(x, wv, t, kernel, h, degree)
    hat = _dense_weights(x, wv, x, kernel, h, degree)[0]
    resid = y - hat @ y
    cross = (hat**2 / wv[None, :]).sum(axis=1)  # sum_k L_jk^2 / w_k
    factor = 1.0 - 2.0 * np.diag(hat) + wv * cross
    sigma2 = np.sum(wv * resid**2) / (x.size - 2.0 * np.trace(hat) + np.sum(wv * cross))
    ra2 = resid**2 / factor

    homo = np.sqrt(sigma2 * (rows[0] ** 2 / wv).sum(axis=1))
    robust = np.sqrt((rows[0] ** 2 * ra2).sum(axis=1))
    np.testing.assert_allclose(standard_error(s, t), homo, rtol=1e-8)
    np.testing.assert_allclose(s.standard_error(t, robust=True), robust, rtol=1e-8)
    if degree >= 1:
        slope_homo = np.sqrt(sigma2 * (rows[1] ** 2 / wv).sum(axis=1))
        np.testing.assert_allclose(slope_standard_error(s, t), slope_homo, rtol=1e-8)
        slope_robust = np.sqrt((rows[1] ** 2 * ra2).sum(axis=1))
        np.testing.assert_allclose(slope_standard_error(s, t, robust=True), slope_robust, rtol=1e-8)


@pytest.mark.parametrize("degree", [0, 1, 2])
def test_band_centre_is_the_bias_corrected_estimator(degree: int) -> None:
    """Bands.estimate equals CCF's explicit correction ``mhat_p - e0' S^-1 X'WZ gamma`` (pilot h = main h)."""
    x, y, _ = _data(80, 3)
    h = 2.0
    s = fit(x, y, kernel="epanechnikov", degree=degree, bandwidth=h)
    t = np.array([0.4, 3.3, 6.0, 9.5])
    q = degree + 1 if degree % 2 == 1 else degree + 2
    k = KERNELS["epanechnikov"]
    expected = []
    for ti in t:
        u = (x - ti) / h
        kw = k(u)
        xp = np.vander(u, degree + 1, increasing=True)
        zq = np.vander(u, q + 1, increasing=True)[:, degree + 1 :]
        gram = xp.T @ (kw[:, None] * xp)
        beta_p = np.linalg.solve(gram, xp.T @ (kw * y))
        full = np.hstack([xp, zq])
        gamma = np.linalg.solve(full.T @ (kw[:, None] * full), full.T @ (kw * y))[degree + 1 :]
        bias = np.linalg.solve(gram, xp.T @ (kw[:, None] * zq)) @ gamma
        expected.append(beta_p[0] - bias[0])
    b = s.bands(t, method="analytic")
    np.testing.assert_allclose(b.estimate, expected, rtol=1e-9, atol=1e-9)
    assert b.centre_degree == q
    plain = bands(s, t, method="analytic", bias_correction=False)
    np.testing.assert_allclose(plain.estimate, s.predict(t), rtol=1e-12)


# -- bootstrap ---------------------------------------------------------------


@pytest.mark.parametrize("multiplier", ["rademacher", "mammen", "gaussian"])
def test_wild_bootstrap_se_converges_to_robust_analytic_se(multiplier: str) -> None:
    """E*[D*^2] = sum l^2 ra^2 exactly; Var*(D*^2) <= 2 (sum l^2 ra^2)^2 when E eta^4 <= 3.

    So the relative error of the bootstrap SE has standard deviation at most
    ``sqrt(1 / (2 B))``; 4 of them bound it for every point.
    """
    x, y, _ = _data(150, 5)
    s = fit(x, y, kernel="biweight", bandwidth=1.8)
    t = np.linspace(0.5, 9.5, 6)
    target = standard_error(s, t, robust=True)
    for reps in (400, 25600):
        b = bands(s, t, method="wild_bootstrap", replicates=reps, seed=1, multiplier=multiplier, bias_correction=False)
        rel = np.abs(b.se / target - 1.0)
        assert np.all(rel <= 4.0 * math.sqrt(1.0 / (2 * reps))), (reps, rel)


@pytest.mark.parametrize("multiplier", ["rademacher", "mammen", "gaussian"])
def test_binned_wild_bootstrap_se_matches_robust_analytic_se(multiplier: str) -> None:
    """Large n: errors meet the weights on a grid; same bound as above plus 0.5% for binning."""
    rng = np.random.default_rng(6)
    x = rng.uniform(0, 100, 30000)
    y = np.sin(x / 4) + (0.2 + 0.004 * x) * rng.standard_normal(x.size)
    t = np.linspace(1.0, 99.0, 6)
    for kernel in ("gaussian", "epanechnikov"):
        s = fit(x, y, kernel=kernel, bandwidth=1.0)
        reps = 4000
        b = bands(s, t, replicates=reps, seed=2, multiplier=multiplier, bias_correction=False, engine="binned")
        rel = np.abs(b.se / standard_error(s, t, robust=True) - 1.0)
        assert np.all(rel <= 4.0 * math.sqrt(1.0 / (2 * reps)) + 5e-3), (kernel, rel)


def test_mammen_weights_have_published_moments() -> None:
    low, high, p_low = MAMMEN
    moments = [p_low * low**k + (1 - p_low) * high**k for k in (1, 2, 3)]
    np.testing.assert_allclose(moments, [0.0, 1.0, 1.0], atol=1e-12)


@pytest.mark.parametrize("kernel", ["gaussian", "epanechnikov", "biweight", "tricube", "cosine", "triangular"])
def test_binned_errors_match_exact_weights(kernel: str) -> None:
    """The binned path changes bootstrap variances by less than 0.5% (measured: <= 0.27%)."""
    rng = np.random.default_rng(8)
    x = rng.uniform(0, 100, 30000)
    y = np.sin(x / 4) + rng.normal(0, 0.3, x.size)
    s = fit(x, y, kernel=kernel, bandwidth=1.5)
    t = np.sort(np.concatenate([rng.uniform(-1, 101, 40), [0.0, 100.0]]))
    sol = local_fit(s, t, 2)
    a = coefficient_row(sol, 0, s.bandwidth)
    errors = rng.standard_normal((s.n_used, 6)) * (0.2 + 0.1 * np.sin(s.sample.xs))[:, None]
    exact = propagate(s, t, a, errors, "exact")
    binned = propagate(s, t, a, errors, "binned")
    ratio = (binned**2).sum(axis=1) / (exact**2).sum(axis=1)
    assert np.max(np.abs(ratio - 1.0)) < 5e-3


@pytest.mark.parametrize(
    "method,simultaneous,multiplier",
    [
        ("wild_bootstrap", False, "rademacher"),
        ("wild_bootstrap", False, "mammen"),
        ("wild_bootstrap", True, None),
        ("residual_bootstrap", False, None),
        ("residual_bootstrap", True, None),
        ("analytic", True, None),
    ],
)
def test_same_seed_same_bands(method: str, simultaneous: bool, multiplier: str | None) -> None:
    x, y, _ = _data(120, 9)
    s = fit(x, y, kernel="gaussian", bandwidth=0.8)
    t = np.linspace(0, 10, 25)
    kw = dict(method=method, replicates=200, simultaneous=simultaneous, multiplier=multiplier)
    one = bands(s, t, seed=42, **kw)  # type: ignore[arg-type]
    two = bands(fit(x, y, kernel="gaussian", bandwidth=0.8), t, seed=42, **kw)  # type: ignore[arg-type]
    other = bands(s, t, seed=43, **kw)  # type: ignore[arg-type]
    assert np.array_equal(one.lower, two.lower) and np.array_equal(one.upper, two.upper)
    assert not np.array_equal(one.upper, other.upper)
    assert one.seed == 42 and one.replicates == 200 and one.simultaneous is simultaneous


@pytest.mark.parametrize("method", ["analytic", "wild_bootstrap", "residual_bootstrap"])
def test_simultaneous_band_contains_pointwise_band(method: str) -> None:
    x, y, _ = _data(200, 21)
    s = fit(x, y, kernel="epanechnikov", bandwidth=1.2)
    t = np.linspace(0.5, 9.5, 30)
    pw = s.bands(t, method=method, replicates=400, seed=3)
    sim = s.bands(t, method=method, replicates=400, seed=3, simultaneous=True)
    assert sim.simultaneous and not pw.simultaneous
    assert np.all(sim.lower <= pw.lower + 1e-12) and np.all(sim.upper >= pw.upper - 1e-12)
    assert np.mean(sim.upper - sim.lower) > 1.2 * np.mean(pw.upper - pw.lower)
    assert sim.critical_value > 1.96
    assert any(c.code == "pointwise_bands" for c in pw.warnings)
    assert not any(c.code == "pointwise_bands" for c in sim.warnings)


def test_bootstrap_memory_does_not_grow_with_replicates_times_n() -> None:
    """n * replicates = 1.5e8 floats (1.2 GB) if held at once; the blocked path stays far below."""
    rng = np.random.default_rng(4)
    n = 50000
    x = rng.uniform(0, 100, n)
    y = np.sin(x / 4) + rng.normal(0, 0.3, n)
    s = fit(x, y, kernel="epanechnikov", bandwidth=2.0)
    t = np.linspace(0, 100, 50)
    s.bands(t, replicates=100)  # residual quantities are computed once per smoother
    tracemalloc.start()
    s.bands(t, replicates=3000, seed=1)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert peak < 80 * 2**20


# -- Monte Carlo coverage ------------------------------------------------------

COVERAGE_REPS = 400
COVERAGE_POINTS = np.array([0.1, 0.3, 0.5, 0.7, 0.9])  # 2h apart: disjoint windows, independent given the data


@pytest.fixture(scope="module")
def coverage() -> dict[str, np.ndarray]:
    """Coverage indicators at a fixed bandwidth near the GCV choice (epanechnikov, h = 0.1, n = 200)."""
    hits: dict[str, list[np.ndarray]] = {k: [] for k in ("plain", "analytic", "wild", "residual", "sim", "pi")}
    truth = np.sin(2 * np.pi * COVERAGE_POINTS)
    for rep in range(COVERAGE_REPS):
        rng = np.random.default_rng([2024, rep])
        x = rng.uniform(0, 1, 200)
        sd = 0.1 + 0.4 * x
        y = np.sin(2 * np.pi * x) + sd * rng.standard_normal(200)
        s = fit(x, y, kernel="epanechnikov", bandwidth=0.1)
        t = COVERAGE_POINTS
        for key, kw in (
            ("plain", dict(method="analytic", bias_correction=False)),
            ("analytic", dict(method="analytic")),
            ("wild", dict(method="wild_bootstrap", replicates=300)),
            ("residual", dict(method="residual_bootstrap", replicates=300)),
            ("sim", dict(method="analytic", simultaneous=True, replicates=400)),
        ):
            b = bands(s, t, seed=rep, **kw)  # type: ignore[arg-type]
            hits[key].append((b.lower <= truth) & (truth <= b.upper))
        lo, hi = prediction_interval(s, t)
        new = truth + (0.1 + 0.4 * t) * rng.standard_normal(t.size)
        hits["pi"].append((lo <= new) & (new <= hi))
    return {k: np.array(v) for k, v in hits.items()}


def _binomial_bounds(n: int, p: float = 0.95, k: float = 3.5) -> tuple[float, float]:
    se = math.sqrt(p * (1 - p) / n)
    return p - k * se, p + k * se


@pytest.mark.parametrize("key", ["analytic", "wild", "residual", "pi"])
def test_pointwise_coverage_within_binomial_bounds(coverage: dict[str, np.ndarray], key: str) -> None:
    """2000 nearly independent trials (400 data sets x 5 points): SE 0.0049, 3.5 SE gives 0.933..0.967."""
    hit = coverage[key]
    lo, hi = _binomial_bounds(hit.size)
    assert lo <= hit.mean() <= hi, hit.mean()


def test_plain_band_under_covers_where_the_corrected_one_does_not(coverage: dict[str, np.ndarray]) -> None:
    """The smoothing bias is real in this design (so the check above means something)."""
    plain, corrected = coverage["plain"].mean(), coverage["analytic"].mean()
    assert plain < 0.93 and corrected - plain > 3.5 * math.sqrt(2 * 0.05 * 0.95 / coverage["plain"].size)


def test_simultaneous_coverage_of_all_points(coverage: dict[str, np.ndarray]) -> None:
    """400 replications: SE 0.011; at least 0.95 - 3.5 SE = 0.912 must hold all five points at once."""
    whole = coverage["sim"].all(axis=1)
    assert whole.mean() >= _binomial_bounds(whole.size)[0], whole.mean()


# -- prediction intervals, extrapolation, slopes -------------------------------


def test_prediction_interval_follows_unequal_noise() -> None:
    rng = np.random.default_rng(12)
    x = rng.uniform(0, 1, 2000)
    y = np.sin(2 * np.pi * x) + (0.05 + 0.5 * x) * rng.standard_normal(x.size)
    s = fit(x, y, kernel="epanechnikov", bandwidth=0.08)
    lo, hi = s.prediction_interval(np.array([0.15, 0.85]), level=0.9)
    half = (hi - lo) / 2
    expected = 1.6449 * (0.05 + 0.5 * np.array([0.15, 0.85]))  # z_0.95 (handbook) times the true sd
    np.testing.assert_allclose(half, expected, rtol=0.15)


@pytest.mark.parametrize("kernel", ["gaussian", "epanechnikov"])
def test_extrapolated_points_get_intervals_and_a_caution(kernel: str) -> None:
    x, y, _ = _data(150, 17)
    s = fit(x, y, kernel=kernel, bandwidth=1.0)
    inside, outside = s.x_max - 0.5, s.x_max + 0.5  # outside the data, inside the window reach
    t = np.array([inside, outside])
    lo, hi = s.prediction_interval(t)
    b = s.bands(t, method="wild_bootstrap", replicates=200)
    assert np.all(np.isfinite(lo)) and np.all(np.isfinite(hi)) and np.all(np.isfinite(b.lower))
    assert hi[1] - lo[1] > hi[0] - lo[0]
    assert list(s.extrapolated(t)) == [False, True]
    assert any(c.code == "extrapolation" for c in b.warnings)


def test_empty_windows_are_undefined_not_invented() -> None:
    x, y, _ = _data(100, 2)
    s = fit(x, y, kernel="epanechnikov", bandwidth=0.5)
    t = np.array([5.0, 30.0])
    b = s.bands(t, method="analytic")
    lo, hi = s.prediction_interval(t)
    assert np.isfinite(b.lower[0]) and np.isnan(b.lower[1]) and np.isnan(lo[1]) and np.isnan(hi[1])
    assert any(c.code == "empty_window" for c in b.warnings)


@pytest.mark.parametrize("slope,expected", [(2.0, "up"), (-2.0, "down"), (0.0, "flat")])
def test_slope_summary_direction(slope: float, expected: str) -> None:
    rng = np.random.default_rng(31)
    x = np.sort(rng.uniform(0, 10, 300))
    y = 5.0 + slope * x + rng.normal(0, 1.0, x.size)
    s = fit(x, y, kernel="epanechnikov", bandwidth=2.0)
    summary = slope_summary(s, level=0.95)
    assert summary.direction == expected
    assert summary.x == pytest.approx(s.x_max)
    assert summary.lower <= slope <= summary.upper


def test_degree_zero_has_no_slope() -> None:
    x, y, _ = _data(50, 1)
    s = fit(x, y, degree=0, bandwidth=1.0)
    with pytest.raises(ValueError, match="degree >= 1"):
        slope_summary(s)


# -- validation -----------------------------------------------------------------


@pytest.mark.parametrize(
    "kwargs,message",
    [
        (dict(method="jackknife"), "unknown method"),
        (dict(level=1.0), "strictly between 0 and 1"),
        (dict(level="high"), "level must be a number"),
        (dict(replicates=10), "at least 40"),
        (dict(replicates=2.5), "whole number"),
        (dict(seed=-1), "seed"),
        (dict(multiplier="coin"), "unknown multiplier"),
        (dict(engine="fast"), "unknown engine"),
    ],
)
def test_bad_arguments_are_refused(kwargs: dict[str, object], message: str) -> None:
    x, y, _ = _data(50, 1)
    s = fit(x, y, bandwidth=1.0)
    with pytest.raises(ValueError, match=message):
        bands(s, [1.0, 2.0], **kwargs)  # type: ignore[arg-type]


def test_nonfinite_points_are_refused() -> None:
    x, y, _ = _data(50, 1)
    s = fit(x, y, bandwidth=1.0)
    with pytest.raises(ValueError, match="finite"):
        s.standard_error([1.0, float("nan")])


def test_bands_is_exported_and_results_follow_the_callers_order() -> None:
    x, y, _ = _data(80, 6)
    s = fit(x, y, kernel="epanechnikov", bandwidth=1.5)
    t = np.array([7.0, 1.0, 4.0])
    b = s.bands(t, method="analytic")
    assert isinstance(b, Bands)
    order = np.argsort(t)
    b_sorted = s.bands(t[order], method="analytic")
    np.testing.assert_allclose(b.lower[order], b_sorted.lower)
    np.testing.assert_allclose(s.standard_error(t)[order], s.standard_error(t[order]))


def test_prediction_interval_contains_the_curve_band_inside_and_outside_the_data() -> None:
    """A new observation is the curve plus noise: its interval can never be narrower than the curve's band."""
    import numpy as np

    from estimators import fit

    rng = np.random.default_rng(17)
    x = rng.uniform(0, 10, 300)
    y = np.sin(x) + rng.normal(0, 0.3, x.size)
    s = fit(x, y, kernel="gaussian", bandwidth=0.6)
    t = np.array([-1.0, 0.5, 5.0, 9.5, 11.0])  # two beyond the data range
    band = s.bands(t, level=0.95, method="analytic")
    lower, upper = s.prediction_interval(t, level=0.95)
    assert np.all(lower <= band.lower + 1e-12) and np.all(upper >= band.upper - 1e-12)


@pytest.mark.parametrize("method", ["analytic", "wild_bootstrap", "residual_bootstrap"])
def test_a_fit_through_every_point_gives_no_band_and_says_why(method: str) -> None:
    # Two points, local linear: the fit is the line through them (hat matrix I, Hastie &
    # Tibshirani 1990, Section 3.4), every residual is 0 whatever the noise, so nothing
    # about the noise can be learnt; zero-width bands would claim certainty.
    s = fit(np.array([1.0, 2.0]), np.array([1.0, 2.0]), kernel="gaussian", bandwidth=1.0)
    t = np.array([1.0, 1.5, 2.0])
    assert np.all(np.isfinite(s.predict(t)))
    b = s.bands(t, method=method, replicates=50)
    assert np.all(np.isnan(b.lower)) and np.all(np.isnan(b.upper)) and np.all(np.isnan(b.se))
    assert "noise_not_estimable" in [w.code for w in b.warnings]
    lower, upper = s.prediction_interval(t)
    assert np.all(np.isnan(lower)) and np.all(np.isnan(upper))
    assert np.all(np.isnan(s.standard_error(t))) and np.all(np.isnan(s.standard_error(t, robust=True)))


def test_points_that_alone_determine_their_fit_are_left_out_of_the_noise_scale() -> None:
    # A point 50 bandwidths from the rest is its own fit (residual 0, d_j = 0) and carries no
    # weight in the others' fits; the constant noise variance is the mean of r_j^2 / d_j over the
    # other points only, d_j = 1 - 2 L_jj + sum_k L_jk^2 from the explicit local linear smoother
    # matrix e1' (X'KX)^-1 X'K (Fan & Gijbels 1996, eq. 3.4) of those points (unit weights).
    from estimators.uncertainty.noise import noise_scale

    rng = np.random.default_rng(8)
    x = np.sort(rng.uniform(0.0, 5.0, 9))  # fewer than 10 informative points: the constant scale is used
    y = np.sin(x) + rng.normal(0.0, 0.2, x.size)
    h = 0.8
    s = fit(np.append(x, 45.0), np.append(y, 3.0), kernel="gaussian", bandwidth=h)
    big_l = np.empty((x.size, x.size))
    for i, t in enumerate(x):
        u = (x - t) / h
        k = np.exp(-0.5 * u * u)
        design = np.column_stack([np.ones_like(u), u])
        big_l[i] = np.linalg.solve(design.T @ (k[:, None] * design), design.T * k)[0]
    d = 1.0 - 2.0 * np.diag(big_l) + np.sum(big_l**2, axis=1)
    r = y - big_l @ y
    noise = noise_scale(s)
    assert noise.kind == "constant"
    assert noise.constant == pytest.approx(np.mean(r**2 / d), rel=1e-9)
