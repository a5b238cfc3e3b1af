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


def _daily_cycle(hours: np.ndarray) -> np.ndarray:
    return 10.0 + 3.0 * np.sin(2.0 * np.pi * hours / 24.0)


def test_automatic_selection_is_not_dragged_by_a_hole() -> None:
    # Hourly readings of a daily cycle with unit Gaussian noise (known truth, Monte Carlo); a 30-hour hole.
    # Oracle: the best bandwidth on a fine grid for the readings around the hole, by squared error against the truth.
    from estimators import fit

    hours = np.arange(0.0, 24.0 * 14)
    keep = (hours < 150.0) | (hours >= 180.0)
    grid = np.geomspace(0.6, 12.0, 40)
    ratios = []
    for seed in range(6):
        y = _daily_cycle(hours) + np.random.default_rng(seed).normal(0.0, 1.0, hours.size)
        x_hole, y_hole = hours[keep], y[keep]
        truth = _daily_cycle(x_hole)
        # the independent-noise path: a daily cycle read hourly moves a lot between readings, which the
        # correlation test can take for correlated noise (docs/correlated-noise.md); that is not what is tested here
        chosen = fit(x_hole, y_hole, bandwidth="auto", noise="independent")
        ase = [float(np.mean((fit(x_hole, y_hole, bandwidth=h).predict(x_hole) - truth) ** 2)) for h in grid]
        ratios.append(float(np.mean((chosen.predict(x_hole) - truth) ** 2)) / min(ase))
        # the same readings without the hole choose (nearly) the same bandwidth
        assert fit(hours, y, bandwidth="auto", noise="independent").bandwidth == pytest.approx(chosen.bandwidth, rel=0.25)
    assert float(np.median(ratios)) < 1.3  # our target for the median ratio to the oracle on independent noise (common practice: within 30 %)


def test_fit_beside_a_hole_is_the_fit_at_an_end_of_the_data() -> None:
    # A compact kernel whose reach is shorter than the hole: next to the hole, the readings across it get no weight,
    # so estimate and standard error equal those of the segment fitted alone (definition of the window).
    from estimators import fit

    hours = np.arange(0.0, 24.0 * 10)
    keep = (hours < 100.0) | (hours >= 130.0)
    y = _daily_cycle(hours) + np.random.default_rng(4).normal(0.0, 1.0, hours.size)
    x_hole, y_hole = hours[keep], y[keep]
    before = hours < 100.0
    whole = fit(x_hole, y_hole, kernel="epanechnikov", degree=1, bandwidth=6.0, noise="independent")
    segment = fit(hours[before], y[before], kernel="epanechnikov", degree=1, bandwidth=6.0, noise="independent")
    edge = np.array([92.0, 96.0, 99.0])
    assert whole.predict(edge) == pytest.approx(segment.predict(edge), rel=1e-9, abs=1e-9)
    # the noise scale is estimated from all readings, so compare the standard errors relative to it
    assert whole.standard_error(edge) / whole.residual_scale == pytest.approx(
        segment.standard_error(edge) / segment.residual_scale, rel=1e-6
    )
