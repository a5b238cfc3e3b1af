"""Fits against independent references: brute-force moving average, scipy.ndimage, exact reproduction."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage

from estimators import fit


def test_uniform_degree0_equals_brute_force_moving_average() -> None:
    """Uniform kernel, degree 0, integer grid, h = 3: the centred mean of the 7 neighbours."""
    rng = np.random.default_rng(11)
    x = np.arange(200, dtype=float)
    y = rng.normal(size=200)
    est = fit(x, y, kernel="uniform", degree=0, bandwidth=3.0).predict(x)
    brute = np.array([y[max(0, i - 3) : i + 4].mean() for i in range(200)])
    assert np.max(np.abs(est - brute)) < 1e-12


def test_gaussian_degree0_matches_scipy_gaussian_filter_interior() -> None:
    """Nadaraya-Watson with a gaussian on an equally spaced grid is normalised gaussian filtering."""
    rng = np.random.default_rng(5)
    x = np.arange(2000, dtype=float)
    y = np.sin(x / 50) + rng.normal(0, 0.3, x.size)
    sigma = 12.0
    est = fit(x, y, kernel="gaussian", degree=0, bandwidth=sigma).predict(x)
    # scipy truncates at 4 sigma by default; widen so both use (essentially) the full kernel
    num = ndimage.gaussian_filter1d(y, sigma, mode="constant", truncate=10.0)
    den = ndimage.gaussian_filter1d(np.ones_like(y), sigma, mode="constant", truncate=10.0)
    interior = slice(200, 1800)
    assert np.max(np.abs(est[interior] - (num / den)[interior])) < 1e-9


@pytest.mark.parametrize("kernel", ["gaussian", "epanechnikov", "tricube", "cosine"])
def test_degree1_reproduces_lines_and_degree2_quadratics(kernel: str) -> None:
    """Local polynomial of degree p is exact on polynomials of degree p (Fan & Gijbels 1996, 3.2)."""
    rng = np.random.default_rng(2)
    x = rng.uniform(-3, 7, 300)
    t = np.linspace(-3, 7, 50)
    line = 2.5 - 0.7 * x
    quad = 1.0 + 0.3 * x - 0.2 * x * x
    assert np.allclose(fit(x, line, kernel=kernel, degree=1, bandwidth=0.8).predict(t), 2.5 - 0.7 * t, atol=1e-9)
    assert np.allclose(
        fit(x, quad, kernel=kernel, degree=2, bandwidth=0.8).predict(t), 1.0 + 0.3 * t - 0.2 * t * t, atol=1e-8
    )
    assert np.allclose(fit(x, line, kernel=kernel, degree=1, bandwidth=0.8).slope(t), -0.7, atol=1e-8)
