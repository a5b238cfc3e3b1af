"""Window bookkeeping of the moment plans and the fast Gauss transform's source tiles.

References: the window of a point is the data within the kernel's radius
(Wand & Jones 1995, Section 5.2, for compact supports; the gaussian's window is
the cutoff of the fast Gauss transform, Greengard & Strain 1991).  The
reference for the index ranges is ``numpy.searchsorted``; for the tile
moments, the definition ``sum_i q_i v_i^j / j!`` summed term by term.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from estimators import _compiled
from estimators.kernels import get_kernel
from estimators.sums import _FACTORIALS, GAUSSIAN_CUTOFF, MomentPlan, effective_radius


def _searchsorted_bounds(x: np.ndarray, points: np.ndarray, radius: float, closed: bool) -> tuple[np.ndarray, np.ndarray]:
    lo = np.searchsorted(x, points - radius, side="left" if closed else "right")
    hi = np.searchsorted(x, points + radius, side="right" if closed else "left")
    return lo, hi


@pytest.mark.parametrize("closed", [True, False])
def test_forward_window_bounds_match_searchsorted_including_points_exactly_at_the_radius(closed: bool) -> None:
    # integers and a radius of 3: many data sit exactly on a window edge, where the two conventions differ
    x = np.repeat(np.arange(0.0, 40.0), 2)
    points = np.concatenate([np.arange(-5.0, 46.0, 0.5), [17.0, 17.0, 1e-300]])
    points.sort()
    lo = np.empty(points.size, dtype=np.int64)
    hi = np.empty(points.size, dtype=np.int64)
    _compiled.window_bounds_ascending(x, points, 3.0, closed, lo, hi)
    ref_lo, ref_hi = _searchsorted_bounds(x, points, 3.0, closed)
    np.testing.assert_array_equal(lo, ref_lo)
    np.testing.assert_array_equal(hi, ref_hi)


@pytest.mark.parametrize(("kernel", "engine"), [("gaussian", "exact"), ("gaussian", "binned"), ("epanechnikov", "binned"), ("uniform", "binned")])
def test_moment_plan_windows_are_the_data_within_the_kernel_radius(kernel: str, engine: str) -> None:
    rng = np.random.default_rng(3)
    h = 0.25
    x = np.sort(np.round(rng.uniform(0.0, 30.0, 400) * 4.0) / 4.0)  # quarter steps: data on the window edges
    many = np.sort(np.concatenate([np.arange(-4.0, 34.0, 0.25), rng.uniform(-4.0, 34.0, 50)]))
    few = np.array([-0.25, 7.5, 15.25, 30.25])  # fewer than 1/16 of the data: binary searches instead of the sweep
    k = get_kernel(kernel)
    plan = MomentPlan(x, np.ones(x.size), k, h, 1, engine=engine)
    radius = (GAUSSIAN_CUTOFF if kernel == "gaussian" else 1.0) * h
    assert effective_radius(k) * h == radius
    closed = kernel in ("gaussian", "uniform")  # the kernels that do not vanish at their edge count edge points
    for points in (many, few):
        _, lo, hi = plan(points)
        ref_lo, ref_hi = _searchsorted_bounds(x, points, radius, closed)
        np.testing.assert_array_equal(lo, ref_lo)
        np.testing.assert_array_equal(hi, ref_hi)


def test_gauss_source_tiles_and_moments_match_their_definition() -> None:
    rng = np.random.default_rng(8)
    h, terms = 0.7, 24
    x = np.sort(np.concatenate([rng.uniform(-3.0, 9.0, 300), [20.0, 20.0, 20.0 + 0.7]]))  # a gap, ties, an edge
    q = np.column_stack([rng.uniform(0.5, 2.0, x.size), rng.normal(0.0, 3.0, x.size)])
    origin = float(x[0])
    tiles, moments = _compiled.gauss_sources(x, origin, h, q, _FACTORIALS, terms)
    index = np.floor((x - origin) / h)
    expected_tiles = np.unique(index)
    np.testing.assert_array_equal(tiles, expected_tiles)
    assert moments.shape == (expected_tiles.size, 2, terms)
    for s, tile in enumerate(expected_tiles):
        members = index == tile
        v = (x[members] - origin) / h - (tile + 0.5)
        assert np.all(np.abs(v) <= 0.5)
        for j in range(terms):
            ref = (q[members] * (v**j)[:, None]).sum(axis=0) / math.factorial(j)
            np.testing.assert_allclose(moments[s, :, j], ref, rtol=1e-13, atol=1e-300)


@pytest.mark.parametrize(("name", "value"), [("gaussian", 1.0 / math.sqrt(2.0 * math.pi)), ("epanechnikov", 0.75), ("uniform", 0.5), ("triangular", 1.0), ("biweight", 15.0 / 16.0), ("triweight", 35.0 / 32.0), ("tricube", 70.0 / 81.0), ("cosine", math.pi / 4.0)])
def test_kernel_value_at_zero_is_the_published_constant(name: str, value: float) -> None:
    # K(0) from the closed forms (Wand & Jones 1995, Table 2.1; Silverman 1986, Table 3.1)
    assert get_kernel(name).at_zero == pytest.approx(value, rel=1e-15)
