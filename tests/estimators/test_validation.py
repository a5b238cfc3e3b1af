"""Bad input raises ValueError with a message a person understands; undefined points are NaN."""

from __future__ import annotations

import numpy as np
import pytest

from estimators import fit


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"x": [1, 2, 3], "y": [1, 2]}, "same length"),
        ({"x": [1, np.nan, 3], "y": [1, 2, 3]}, "finite"),
        ({"x": [1, 2, 3], "y": [1, np.inf, 3]}, "finite"),
        ({"x": [1, 2, 3], "y": [1, 2, 3], "weights": [1, -1, 1]}, ">= 0"),
        ({"x": [1, 2, 3], "y": [1, 2, 3], "weights": [0, 0, 0]}, "all zero"),
        ({"x": [1, 2, 3], "y": [1, 2, 3], "bandwidth": 0.0}, "positive"),
        ({"x": [1, 2, 3], "y": [1, 2, 3], "bandwidth": -1.0}, "positive"),
        ({"x": [1, 2, 3], "y": [1, 2, 3], "bandwidth": "wide"}, "auto"),
        ({"x": [1, 2, 3], "y": [1, 2, 3], "kernel": "box"}, "unknown kernel"),
        ({"x": [1, 2, 3], "y": [1, 2, 3], "degree": 3}, "degree"),
        ({"x": [1], "y": [1]}, "at least 2"),
        ({"x": [1, 2, 3], "y": [1, 2, 3], "engine": "gpu"}, "engine"),
    ],
)
def test_bad_input_messages(kwargs: dict, message: str) -> None:
    kwargs = {"bandwidth": 1.0, **kwargs}
    with pytest.raises(ValueError, match=message):
        fit(**kwargs)


def test_empty_window_is_nan_and_counted() -> None:
    x = np.array([0.0, 0.5, 1.0, 9.0, 9.5, 10.0])
    s = fit(x, np.sin(x), kernel="epanechnikov", bandwidth=1.0)
    t = np.array([0.5, 5.0, 9.5])
    est = s.predict(t)
    assert np.isfinite(est[0]) and np.isnan(est[1]) and np.isfinite(est[2])
    assert list(s.window_counts(t)) == [3, 0, 3]


def test_too_few_distinct_x_drops_degree() -> None:
    """Two distinct x values in a window cannot carry a quadratic: the fit there is linear."""
    x = np.array([0.0, 0.0, 1.0, 1.0, 5.0, 5.1, 5.2, 5.3])
    y = np.array([1.0, 1.2, 2.0, 2.2, 0.0, 0.1, 0.2, 0.3])
    s = fit(x, y, kernel="epanechnikov", degree=2, bandwidth=1.5)
    sol = s.solve(np.array([0.5, 5.15]))
    assert list(sol.degree_used) == [1, 2]
    # the linear fit through the two group means (1.1 at 0, 2.1 at 1) gives 1.6 at 0.5
    assert s.predict([0.5])[0] == pytest.approx(1.6)


def test_binned_engine_is_honoured_unless_its_grid_dwarfs_the_data() -> None:
    """engine="binned" keeps its grid near the data size (Wand 1994 binning is meant for h >> spacing)."""
    rng = np.random.default_rng(5)
    x = rng.uniform(0.0, 100.0, 2000)
    y = np.sin(x / 7.0)
    assert fit(x, y, bandwidth=5.0, engine="binned").engine == "binned"
    tiny = fit(x, y, bandwidth=1e-4, engine="binned")  # 256 nodes per bandwidth: 2.6e8 nodes
    assert tiny.engine == "exact"
    np.testing.assert_array_equal(tiny.predict(x[:50]), fit(x, y, bandwidth=1e-4, engine="exact").predict(x[:50]))


def test_binned_bootstrap_grid_is_not_built_when_it_dwarfs_the_data() -> None:
    """bands(engine="binned") with a bandwidth tiny against the x range uses the exact kernel rows."""
    rng = np.random.default_rng(6)
    x = rng.uniform(0.0, 100.0, 400)
    y = np.sin(x / 7.0) + rng.normal(0.0, 0.1, x.size)
    s = fit(x, y, kernel="epanechnikov", bandwidth=1e-4)  # grid at h / 128 would hold 1e8 nodes
    grid = np.sort(x[:20])
    binned = s.bands(grid, replicates=50, seed=1, engine="binned")
    exact = s.bands(grid, replicates=50, seed=1, engine="exact")
    np.testing.assert_array_equal(binned.se, exact.se)


@pytest.mark.parametrize("scale", [1e300, 1e-300, 1e-320])
def test_weights_of_extreme_absolute_scale_are_refused(scale: float) -> None:
    # Products of weighted sums overflow (or vanish) and the local solves silently dropped a
    # degree: uniform weights of 1e300 gave another curve than unit weights. Refused instead.
    x = np.arange(1.0, 6.0)
    with pytest.raises(ValueError, match="largest weight"):
        fit(x, np.sin(x), bandwidth=1.0, weights=np.full(x.size, scale))


@pytest.mark.parametrize("degree", [0, 1, 2])
@pytest.mark.parametrize("scale", [1e-45, 1e45])
def test_a_common_factor_on_the_weights_changes_nothing_but_the_noise_unit(degree: int, scale: float) -> None:
    # Weighted least squares is unchanged when every weight is multiplied by c (Fan & Gijbels
    # 1996, eq. 3.4: the factor cancels from (X'WX)^-1 X'W); weights are precisions, so the
    # noise standard deviation of a unit-weight observation grows by sqrt(c).
    rng = np.random.default_rng(4)
    x = rng.uniform(0.0, 10.0, 60)
    y = np.sin(x) + rng.normal(0.0, 0.2, x.size)
    t = np.linspace(0.0, 10.0, 9)
    plain = fit(x, y, bandwidth=1.0, degree=degree)
    scaled = fit(x, y, bandwidth=1.0, degree=degree, weights=np.full(x.size, scale))
    np.testing.assert_allclose(scaled.predict(t), plain.predict(t), rtol=1e-9)
    assert scaled.effective_df == pytest.approx(plain.effective_df, rel=1e-9)
    assert scaled.residual_scale == pytest.approx(plain.residual_scale * np.sqrt(scale), rel=1e-9)
    np.testing.assert_allclose(scaled.bands(t, method="analytic").upper, plain.bands(t, method="analytic").upper, rtol=1e-9)
