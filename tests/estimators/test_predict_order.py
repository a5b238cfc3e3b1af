"""Predictions at points in any order agree with the direct formula at those points, in that order.

Reference: the dense local polynomial formula of tests/estimators/dense_reference.py, one
weighted least-squares solve per point (Fan and Gijbels 1996, eq. 3.4).
"""

from __future__ import annotations

import numpy as np
import pytest

from estimators import KERNELS, fit
from tests.estimators.dense_reference import dense_local_fit


@pytest.mark.parametrize(("kernel", "degree"), [("epanechnikov", 1), ("gaussian", 1), ("biweight", 2), ("uniform", 0)])
def test_shuffled_points_match_the_direct_formula(kernel: str, degree: int) -> None:
    rng = np.random.default_rng(41)
    x = rng.uniform(0.0, 10.0, 250)
    y = np.cos(x) + rng.normal(0.0, 0.2, x.size)
    h = 0.8
    smoother = fit(x, y, kernel=kernel, degree=degree, bandwidth=h, engine="exact")
    points = rng.permutation(np.concatenate([rng.uniform(-1.0, 11.0, 80), x[:40], x[:5]]))  # repeats and points outside
    ours = smoother.predict(points)
    reference = dense_local_fit(x, y, np.ones_like(x), points, KERNELS[kernel], h, degree)[0]
    assert np.array_equal(np.isnan(ours), np.isnan(reference))
    finite = ~np.isnan(reference)
    assert np.max(np.abs(ours[finite] - reference[finite])) <= 1e-9 * max(1.0, np.max(np.abs(reference[finite])))
    # the data points in the caller's (unsorted) order: the same as the fitted values there
    np.testing.assert_allclose(smoother.predict(x), smoother.fitted(), rtol=1e-12, atol=1e-12)
