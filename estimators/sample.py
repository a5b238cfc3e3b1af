"""Validated data sorted once by ``x``: the input every fit and selector starts from."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from . import _compiled

__all__ = ["SortedSample", "validate_sample"]

#: range for the largest weight: beyond about 1e70 (or below 1e-70) products of weighted sums in the
#: local solves and the bootstrap's fourth powers overflow (vanish) and fits silently change degree
_WEIGHT_SCALE = (1e-50, 1e50)


class SortedSample:
    """Validated data, sorted once by ``x``; only points with positive weight are sources.

    Attributes
    ----------
    x, y, w : ndarray
        The caller's arrays (original order).
    order : ndarray
        ``argsort(x)`` (stable).
    xs, ys, ws : ndarray
        Sorted sources (weight > 0).
    y_centre : float
        Weighted mean of ``y``; sums use ``y - y_centre`` so a large offset in
        ``y`` costs no digits.
    """

    def __init__(self, x: np.ndarray, y: np.ndarray, w: np.ndarray, unit_weights: bool = False) -> None:
        self.x, self.y, self.w = x, y, w
        self.order = np.argsort(x)
        n = x.size
        xs, ys = np.empty(n), np.empty(n)
        #: number of distinct x values among the first k sorted points (sources, once zero weights are dropped)
        self.distinct_prefix = np.empty(n + 1, dtype=np.int64)
        _compiled.gather_sorted(x, y, self.order, xs, ys, self.distinct_prefix)
        if unit_weights:
            ws = np.ones_like(xs)
        else:
            ws = w[self.order]
            keep = ws > 0
            if not keep.all():
                xs, ys, ws = xs[keep], ys[keep], ws[keep]
                new = np.empty(xs.size, dtype=np.int64)
                new[0] = 1
                new[1:] = xs[1:] != xs[:-1]
                self.distinct_prefix = np.concatenate(([0], np.cumsum(new)))
        self.xs, self.ys, self.ws = xs, ys, ws
        self.y_centre = float(ys.sum() / ys.size if unit_weights else (ws * ys).sum() / ws.sum())
        self.yc = ys - self.y_centre
        self._values: np.ndarray | None = None

    @property
    def n(self) -> int:
        return int(self.x.size)

    @property
    def n_used(self) -> int:
        return int(self.xs.size)

    def reweighted(self, factor: np.ndarray) -> SortedSample:
        """The same readings with weights ``w * factor`` (``factor`` >= 0, caller's order), without sorting again.

        Points whose new weight is 0 stop being sources, as in the constructor.
        """
        out = SortedSample.__new__(SortedSample)
        out.x, out.y, out.w = self.x, self.y, self.w * factor
        out.order = self.order
        ws = out.w[self.order]
        keep = ws > 0
        xs, ys = self.x[self.order][keep], self.y[self.order][keep]
        new = np.empty(xs.size, dtype=np.int64)
        if xs.size:
            new[0] = 1
            new[1:] = xs[1:] != xs[:-1]
        out.distinct_prefix = np.concatenate(([0], np.cumsum(new)))
        out.xs, out.ys, out.ws = xs, ys, ws[keep]
        out.y_centre = float((out.ws * ys).sum() / out.ws.sum())
        out.yc = ys - out.y_centre
        out._values = None
        return out

    def values(self) -> np.ndarray:
        """Value columns ``[w, w (y - y_centre)]`` for the moment sums (computed once)."""
        if self._values is None:
            vals = np.empty((self.xs.size, 2))
            vals[:, 0] = self.ws
            np.multiply(self.ws, self.yc, out=vals[:, 1])
            self._values = vals
        return self._values


def _as_float_array(name: str, value: Any) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be an array of numbers") from None
    if arr.ndim != 1:
        arr = arr.ravel() if arr.ndim == 0 else arr
        if arr.ndim != 1:
            raise ValueError(f"{name} must be one-dimensional, got shape {arr.shape}")
    if not np.isfinite(arr).all():
        bad = int(np.flatnonzero(~np.isfinite(arr))[0])
        raise ValueError(f"{name} must hold finite numbers only; {name}[{bad}] is {arr[bad]!r}")
    return arr


def validate_sample(x: Any, y: Any, weights: Any = None) -> SortedSample:
    """Check the data once at the boundary and sort it.

    Raises
    ------
    ValueError
        With a message a person can act on: lengths differ, non-finite values,
        negative, all-zero or extremely scaled weights, fewer than 2 points.
    """
    xa = _as_float_array("x", x)
    ya = _as_float_array("y", y)
    if xa.size != ya.size:
        raise ValueError(f"x and y must have the same length, got {xa.size} and {ya.size}")
    if weights is None:
        if xa.size < 2:
            raise ValueError(f"need at least 2 points, got {xa.size}")
        return _check_span(SortedSample(xa, ya, np.ones_like(xa), unit_weights=True))
    else:
        wa = _as_float_array("weights", weights)
        if wa.size != xa.size:
            raise ValueError(f"weights must have the same length as x ({xa.size}), got {wa.size}")
        if np.any(wa < 0):
            raise ValueError(f"weights must be >= 0; weights[{int(np.argmax(wa < 0))}] is negative")
    if xa.size < 2:
        raise ValueError(f"need at least 2 points, got {xa.size}")
    if not np.any(wa > 0):
        raise ValueError("weights are all zero: at least one point must carry weight")
    if np.count_nonzero(wa > 0) < 2:
        raise ValueError("need at least 2 points with positive weight")
    top = float(np.max(wa))
    if not _WEIGHT_SCALE[0] <= top <= _WEIGHT_SCALE[1]:
        raise ValueError(
            f"the largest weight is {top:g}; it must lie between {_WEIGHT_SCALE[0]:g} and {_WEIGHT_SCALE[1]:g} "
            "(products of the weighted sums would overflow or vanish); only the ratios of the weights matter "
            "for the curve, so divide them by the largest"
        )
    return _check_span(SortedSample(xa, ya, wa))


#: the smallest x span accepted: the smallest normal double (IEEE 754 binary64) times 2**52, so
#: that every spacing down to a 2**-52 fraction of the span is still a normal number
_SMALLEST_SPAN = float(np.finfo(np.float64).tiny) * 2.0**52


def _check_span(sample: SortedSample) -> SortedSample:
    # Python floats: a difference beyond the largest double is inf, without a warning
    span = float(sample.xs[-1]) - float(sample.xs[0])
    y_span = float(sample.ys.max()) - float(sample.ys.min())
    if not (math.isfinite(span) and math.isfinite(y_span)):
        raise ValueError("x or y spans more than the largest floating-point number; rescale the data")
    if 0.0 < span < _SMALLEST_SPAN:
        # spacings among subnormal numbers lose their precision and ratios of them overflow:
        # bandwidths this small cannot be computed with
        raise ValueError(f"x spans only {span:.3g}, below {_SMALLEST_SPAN:.3g}; rescale x (for example multiply it by 1e300)")
    return sample
