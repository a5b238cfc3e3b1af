"""Compiled loop of the noise diagnosis (numba): lag-1 difference sums of the tie-group means, one pass.

Used by :mod:`estimators.serial`; cached on disk like :mod:`estimators._compiled`.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["difference_sums"]


@njit(cache=True, nogil=True)
def difference_sums(xs: np.ndarray, ys: np.ndarray, ws: np.ndarray) -> tuple[int, float, float]:  # pragma: no cover
    """Sums of the first differences ``d`` of the series of tie-group means, in one pass.

    ``xs`` ascending; readings with weight <= 0 are left out; readings sharing
    one ``x`` are averaged with their weights (the series of
    :func:`estimators.serial.series_in_x_order`).

    Returns
    -------
    (groups, sum d_i^2, sum d_i d_{i-1})
        Number of groups (series length), and the two sums over the
        ``groups - 1`` differences.
    """
    n = xs.size
    # common case first: unit weights, no ties (plain differences of the readings); leaves at the first exception
    plain = n > 0 and ws[0] == 1.0
    d1 = 0.0
    cross = 0.0
    prev_diff = 0.0
    i = 1
    while plain and i < n:
        if xs[i] == xs[i - 1] or ws[i] != 1.0:
            plain = False
            break
        d = ys[i] - ys[i - 1]
        d1 += d * d
        cross += d * prev_diff
        prev_diff = d
        i += 1
    if plain:
        return n, d1, cross
    groups = 0
    d1 = 0.0
    cross = 0.0
    prev_mean = 0.0
    prev_diff = 0.0
    cur_x = 0.0
    wsum = 0.0
    wy = 0.0
    for i in range(n + 1):
        if i < n:
            w = ws[i]
            if not w > 0.0:
                continue
            x = xs[i]
            if wsum > 0.0 and x == cur_x:  # a tie: same group
                wsum += w
                wy += w * ys[i]
                continue
        if wsum > 0.0:  # close the group before this reading (or the last one)
            mean = wy if wsum == 1.0 else wy / wsum
            if groups > 0:
                d = mean - prev_mean
                d1 += d * d
                if groups > 1:
                    cross += d * prev_diff
                prev_diff = d
            prev_mean = mean
            groups += 1
        if i < n:
            cur_x = xs[i]
            wsum = ws[i]
            wy = ws[i] * ys[i]
    return groups, d1, cross
