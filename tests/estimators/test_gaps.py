"""Gaps in sorted x (estimators.gaps) against brute-force loops and closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest

from estimators.gaps import GAUSSIAN_REACH, TYPICAL_FACTOR, auto_max_gap, find_gaps, inside_gaps, kernel_reach, typical_spacing


def test_find_gaps_against_a_loop() -> None:
    rng = np.random.default_rng(3)
    xs = np.sort(rng.exponential(1.0, 2000).cumsum())
    limit = 4.0
    expected = [(xs[i], xs[i + 1]) for i in range(xs.size - 1) if xs[i + 1] - xs[i] > limit]  # brute force
    starts, ends = find_gaps(xs, limit)
    assert list(zip(starts.tolist(), ends.tolist(), strict=True)) == expected
    assert len(expected) > 0


def test_no_gaps_without_a_limit_or_with_one_point() -> None:
    xs = np.array([0.0, 1.0, 100.0])
    assert find_gaps(xs, math.inf)[0].size == 0
    assert find_gaps(xs[:1], 0.5)[0].size == 0
    assert find_gaps(xs, 99.0)[0].size == 0  # a spacing equal to the limit is not a gap
    assert find_gaps(xs, 98.0)[0].tolist() == [1.0]


def test_inside_gaps_is_strict_and_matches_a_loop() -> None:
    starts, ends = np.array([2.0, 10.0]), np.array([5.0, 12.0])
    points = np.array([1.0, 2.0, 2.5, 5.0, 7.0, 10.0, 11.9, 12.0, 13.0, 3.0])
    expected = [any(a < t < b for a, b in zip(starts, ends, strict=True)) for t in points]  # definition: strictly inside
    assert inside_gaps(points, starts, ends).tolist() == expected
    assert inside_gaps(points, starts[:0], ends[:0]).tolist() == [False] * points.size


def test_typical_spacing_ignores_repeated_x() -> None:
    xs = np.array([0.0, 0.0, 0.0, 1.0, 2.0, 2.0, 3.0, 10.0])
    assert typical_spacing(xs) == 1.0  # positive spacings 1, 1, 1, 7: median 1
    assert math.isnan(typical_spacing(np.array([4.0, 4.0])))


def test_reach_of_compact_and_gaussian_kernels() -> None:
    assert kernel_reach(1.0, 2.5) == 2.5
    assert kernel_reach(math.inf, 2.0) == GAUSSIAN_REACH * 2.0


def test_auto_rule_regular_hourly_series_with_a_thirty_hour_hole() -> None:
    hours = np.r_[np.arange(0.0, 100.0), np.arange(130.0, 200.0)]
    limit = auto_max_gap(hours, math.inf, 2.0)
    assert limit == max(TYPICAL_FACTOR * 1.0, GAUSSIAN_REACH * 2.0)
    starts, ends = find_gaps(hours, limit)
    assert starts.tolist() == [99.0] and ends.tolist() == [130.0]
    # a bandwidth whose reach covers the hole: no gap (the smoother bridges it from readings on both sides)
    assert find_gaps(hours, auto_max_gap(hours, 1.0, 40.0))[0].size == 0


def test_auto_rule_on_random_times_splits_rarely() -> None:
    # Exponential spacings (readings at Poisson times): P(spacing > 10 medians) = exp(-10 ln 2) = 2**-10 (closed form).
    rng = np.random.default_rng(11)
    xs = np.cumsum(rng.exponential(1.0, 400_000))
    spacing = typical_spacing(xs)
    assert spacing == pytest.approx(math.log(2.0), rel=0.03)  # median of Exp(1) is ln 2 (closed form); sampled above 65,536 spacings
    share = np.mean(np.diff(xs) > TYPICAL_FACTOR * spacing)
    assert share == pytest.approx(2.0**-10, rel=0.15)
    # with a bandwidth of 8 mean spacings the reach (24) decides: P(any of 4e5 spacings > 24) < 4e5 * exp(-24) = 2e-5
    assert find_gaps(xs, auto_max_gap(xs, math.inf, 8.0))[0].size == 0
