"""The candidate grid: geometric between a well-posed minimum and half the x range.

Method notes: ``docs/methods.md`` (bandwidth selection: candidates).
"""

from __future__ import annotations

import math

import numpy as np

from ..cautions import Caution
from ..kernels import Kernel, convert_bandwidth
from ..sample import SortedSample
from .choices import check_bound, check_count

#: the default smallest bandwidth is this factor times the distance that puts enough distinct
#: x values in every window (the farthest needed neighbour gets K(0.8))
WELL_POSED_MARGIN = 1.25


def knn_distances(u: np.ndarray, k: int) -> np.ndarray:
    """For each distinct value ``u_j``: half-width of the narrowest window around it holding ``k`` of them."""
    g = u.size
    best = np.full(g, np.inf)
    for a in range(k):  # window of k consecutive values starting a places left of j
        j = np.arange(a, g - k + a + 1)
        d = np.maximum(u[j] - u[j - a], u[j - a + k - 1] - u[j])
        np.minimum.at(best, j, d)
    return best


def _knn_spread(u: np.ndarray, k: int) -> float:
    """Largest :func:`knn_distances`: the window half-width that holds ``k`` distinct values everywhere."""
    return float(np.max(knn_distances(u, k)))


def well_posed_minimum(sample: SortedSample, kernel: Kernel, degree: int, leave_out: bool = False) -> float:
    """Smallest default candidate: every window at a data point holds enough distinct x values.

    Enough means ``degree + 1`` (the local fit of that degree is defined), or
    ``degree + 2`` with ``leave_out`` (for ``loocv``: the fit stays defined when
    the point's own tie group is left out; not needed for the gaussian kernel,
    whose windows never empty). The distance that achieves this at
    every distinct x is multiplied by :data:`WELL_POSED_MARGIN`, so the farthest
    needed neighbour sits at ``|u| <= 0.8`` rather than on the edge of the
    window. For the gaussian kernel (unbounded support) the compact-kernel
    value is carried over from the Epanechnikov kernel by canonical scaling.

    Raises
    ------
    ValueError
        Fewer distinct x values than that.
    """
    u = np.unique(sample.xs)
    k = degree + 2 if leave_out and math.isfinite(kernel.support) else max(degree + 1, 2)
    if u.size < k:
        raise ValueError(
            f"automatic selection for degree {degree} needs at least {k} distinct x values, got {u.size}; "
            "use a lower degree or give the bandwidth"
        )
    h = WELL_POSED_MARGIN * _knn_spread(u, k)
    if not math.isfinite(kernel.support):
        h = convert_bandwidth(h, "epanechnikov", kernel.name)
    return h


def candidate_grid(
    sample: SortedSample,
    kernel: Kernel,
    degree: int,
    count: int = 40,
    bandwidth_min: float | None = None,
    bandwidth_max: float | None = None,
    leave_out: bool = False,
    floor: float = 0.0,
) -> tuple[np.ndarray, list[Caution]]:
    """Geometric grid of candidate bandwidths and any caution about it.

    Default range: from :func:`well_posed_minimum` (with ``leave_out`` for
    ``loocv``), but at least ``floor``, to half the x range. When
    the design is so uneven that the minimum exceeds half the range, the
    maximum becomes four times the minimum (and a ``sparse_design`` caution
    says so).
    """
    count = check_count(count)
    lo_given = check_bound("bandwidth_min", bandwidth_min)
    hi_given = check_bound("bandwidth_max", bandwidth_max)
    span = float(sample.xs[-1] - sample.xs[0])
    if span <= 0:
        raise ValueError("all x values are equal: a bandwidth cannot be selected")
    cautions: list[Caution] = []
    lo = lo_given if lo_given is not None else float(max(well_posed_minimum(sample, kernel, degree, leave_out), floor))
    if hi_given is not None:
        hi = hi_given
    else:
        hi = span / 2.0
        if lo_given is None and lo >= hi / 2.0:
            hi = 4.0 * lo
            cautions.append(
                Caution(
                    "sparse_design",
                    f"the x values are so uneven that a window holding enough distinct x values "
                    f"everywhere needs a bandwidth of {lo:.4g} or more (x range {span:.4g}); "
                    "the candidates reach beyond half the x range",
                )
            )
    for name, value in (("bandwidth_min", lo_given), ("bandwidth_max", hi_given)):
        if value is not None and not (span / value * 1e-9 < 1e12 and value < 1e6 * span):
            raise ValueError(
                f"{name} ({value:.6g}) is out of proportion to the x range ({span:.6g}); "
                "choose candidates between the data spacing and the x range"
            )
    if not lo < hi:
        if lo_given is not None and hi_given is not None:
            raise ValueError(f"bandwidth_min ({lo:.6g}) must be below bandwidth_max ({hi:.6g})")
        if lo_given is not None:
            raise ValueError(
                f"bandwidth_min ({lo:.6g}) must be below bandwidth_max, which defaults to half the x range ({hi:.6g})"
            )
        raise ValueError(
            f"bandwidth_max ({hi:.6g}) must be above bandwidth_min, which defaults to {lo:.6g}: the smallest "
            f"bandwidth that keeps every window well posed for degree {degree}"
        )
    return np.geomspace(lo, hi, count), cautions
