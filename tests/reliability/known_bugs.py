"""Service defects found by fuzzing that are not fixed yet.

Each entry has a strict-xfail regression test in ``test_regressions.py``.
The fuzz test counts a failure that matches an entry as *known* (reported in
the summary, not failing the run); anything else fails it. When a defect is
fixed its regression test starts passing, strict xfail turns that into a
failure, and the entry here should be deleted together with the marker.
"""

from __future__ import annotations

import math
from typing import Any

# Magnitude beyond which x spans and bandwidths overflow the binned-grid size estimate.
HUGE = 1e290


def _series_of(body: Any) -> list[dict[str, Any]]:
    if isinstance(body, dict) and isinstance(body.get("series"), list):
        return [s for s in body["series"] if isinstance(s, dict)]
    return [body] if isinstance(body, dict) else []


def _numbers(values: Any) -> list[float]:
    if not isinstance(values, list):
        return []
    return [float(v) for v in values if isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(float(v))]


def grid_size_overflow(body: Any) -> bool:
    """Known defect GRID-OVERFLOW: gaussian kernel, engine "auto", and an x span or bandwidth near the float limit.

    ``choose_engine`` calls ``binned_grid_size``, whose ``span / bandwidth``
    (or ``span + 2 r h``) overflows to infinity, and ``int(inf)`` raises
    OverflowError, answered 500 instead of 422.
    """
    for series in _series_of(body):
        if series.get("kernel", "gaussian") != "gaussian" or series.get("engine", "auto") != "auto":
            continue
        xs = _numbers(series.get("x"))
        if len(xs) < 2:
            continue
        span = max(xs) - min(xs)
        h = series.get("bandwidth", "auto")
        for bound in ("bandwidth_min", "bandwidth_max"):
            value = series.get(bound)
            if isinstance(value, (int, float)) and not isinstance(value, bool) and value > HUGE:
                return True
        if not math.isfinite(span) or span > HUGE:
            return True
        if isinstance(h, (int, float)) and not isinstance(h, bool) and h > 0:
            if h > HUGE or span / h > HUGE:
                return True
    return False


def x_span_overflows(body: Any) -> bool:
    """Known defect SPAN-OVERFLOW: ``max(x) - min(x)`` overflows to infinity (finite x near +-1.8e308).

    The fit is answered 200 with ``curve.x`` all null (the evenly spaced grid
    over an infinite range is not finite), which violates ``CurveOut`` (numbers
    only) and is not a usable answer; it should be a 422.
    """
    for series in _series_of(body):
        xs = _numbers(series.get("x"))
        if len(xs) >= 2 and not math.isfinite(max(xs) - min(xs)):
            return True
    return False


def readyz_extra_fields(label: str, status: int) -> bool:
    """Known defect READYZ-SCHEMA: 200 from GET /readyz carries fields its documented schema forbids."""
    return label == "GET /readyz" and status == 200
