"""Gaps in the data: spacings between consecutive readings too wide for a smoother to bridge.

A curve drawn across a stretch of x that holds no readings shows a trend nobody measured; the
service leaves the curve undefined strictly inside such a gap. Pure numpy; x is sorted once by
the caller (``SortedSample.xs``).
"""

from __future__ import annotations

import math

import numpy as np
import numpy.typing as npt

__all__ = ["GAUSSIAN_REACH", "SPACING_SAMPLE", "TYPICAL_FACTOR", "auto_max_gap", "find_gaps", "inside_gaps", "kernel_reach", "typical_spacing"]

#: reach of the gaussian kernel in bandwidths: beyond 3 standard deviations its weight is below 1.2 % of the peak
#: (common practice, the "three-sigma" cut-off)
GAUSSIAN_REACH = 3.0
#: a spacing is "far above the typical spacing" when it exceeds this many median spacings (our choice; see Notes)
TYPICAL_FACTOR = 10.0


def kernel_reach(support: float, bandwidth: float) -> float:
    """Distance from a point beyond which the kernel gives a reading (practically) no weight.

    Parameters
    ----------
    support : float
        Half-width of the kernel's support in bandwidths (``inf`` for the gaussian kernel).
    bandwidth : float
        The bandwidth in x units.

    Returns
    -------
    float
        ``support * bandwidth`` for a compact kernel, ``GAUSSIAN_REACH * bandwidth`` for an unbounded one.
    """
    scale = support if math.isfinite(support) else GAUSSIAN_REACH
    return float(scale * bandwidth)


#: spacings looked at for the typical spacing: all of them up to this many, else an evenly spread sample of this size
SPACING_SAMPLE = 65_536


def typical_spacing(xs: npt.NDArray[np.float64]) -> float:
    """Median of the positive spacings of sorted x (repeated x values are not spacings); NaN with none.

    Above ``SPACING_SAMPLE`` spacings, the median of an evenly spread (systematic) sample of that many: the
    rule needs the typical spacing, not its last digit, and the sample keeps it cheap at millions of points.
    """
    if xs.size - 1 > SPACING_SAMPLE:
        at = np.linspace(0, xs.size - 2, SPACING_SAMPLE).astype(np.intp)
        steps = xs[at + 1] - xs[at]
    else:
        steps = np.diff(xs)
    steps = steps[steps > 0]
    return float(np.median(steps)) if steps.size else math.nan


def auto_max_gap(xs: npt.NDArray[np.float64], support: float, bandwidth: float) -> float:
    """The automatic gap threshold: the larger of ``TYPICAL_FACTOR`` median spacings and the kernel's reach.

    Parameters
    ----------
    xs : ndarray
        Sorted x of the readings used.
    support, bandwidth : float
        The kernel's support (in bandwidths) and the bandwidth.

    Returns
    -------
    float
        A spacing wider than this is a gap; ``inf`` when x has fewer than two distinct values.

    Notes
    -----
    Both conditions must hold for a gap. "Far above the typical spacing" (ten medians) keeps the
    ordinary unevenness of irregular sampling from splitting the data: for readings at random
    (Poisson) times the spacings are exponential, and a spacing above ten medians (about 6.9 mean
    spacings) has probability ``exp(-6.9) = 0.001``, so only a rare few appear, and those only where
    they also exceed the kernel's reach. "Wider than the kernel's reach" means the smoother could
    not bridge the stretch from the readings on one side alone: points in its middle have no reading
    within the kernel window of the curve (for compact kernels, exactly the points whose estimate
    would be undefined), so any curve drawn there is carried over from the far sides.
    """
    spacing = typical_spacing(xs)
    if not math.isfinite(spacing):
        return math.inf
    return max(TYPICAL_FACTOR * spacing, kernel_reach(support, bandwidth))


def find_gaps(xs: npt.NDArray[np.float64], max_gap: float) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """The gaps of sorted x: consecutive readings further apart than ``max_gap``.

    Parameters
    ----------
    xs : ndarray
        Sorted x.
    max_gap : float
        Largest spacing that is not a gap (``inf``: no gaps).

    Returns
    -------
    starts, ends : ndarray
        The readings on either side of each gap, in order.
    """
    if xs.size < 2 or not max_gap < math.inf:
        empty = np.zeros(0, dtype=np.float64)
        return empty, empty.copy()
    at = np.flatnonzero(np.diff(xs) > max_gap)
    return xs[at].astype(np.float64), xs[at + 1].astype(np.float64)


def inside_gaps(points: npt.ArrayLike, starts: npt.NDArray[np.float64], ends: npt.NDArray[np.float64]) -> npt.NDArray[np.bool_]:
    """True where a point lies strictly inside a gap (``start < t < end``); gaps are sorted and disjoint.

    Parameters
    ----------
    points : array_like
        Any x values, in any order.
    starts, ends : ndarray
        Gap bounds from :func:`find_gaps`.

    Returns
    -------
    ndarray of bool
    """
    t = np.asarray(points, dtype=np.float64)
    if starts.size == 0:
        return np.zeros(t.shape, dtype=bool)
    k = np.searchsorted(starts, t, side="left") - 1  # the last gap starting strictly before t
    inside = k >= 0
    kk = np.where(inside, k, 0)
    result: npt.NDArray[np.bool_] = inside & (t < ends[kk])
    return result
