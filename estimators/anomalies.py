"""Anomalous readings: those outside the prediction interval of an outlier-resistant fit.

A reading is flagged when it lies outside the interval that would hold a new reading at its
``x`` with probability ``level`` (:func:`estimators.uncertainty.prediction_interval`). The
interval comes from a resistant fit (:mod:`estimators.robust`): the outlying readings enter
neither the curve nor the noise scale, so a cluster of spikes cannot widen the interval or
pull the curve towards itself and hide. On data without outliers each reading is flagged with
probability about ``1 - level`` (the interval is pointwise; expect ``n (1 - level)`` flags).

This is the usual outlier rule of a fitted regression with a prediction interval as the
yardstick (Barnett & Lewis 1994, Chapter 8).

References
----------
Barnett, V. & Lewis, T. (1994). Outliers in Statistical Data, 3rd ed. Wiley.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .uncertainty.arguments import check_level

__all__ = ["Anomalies", "DEFAULT_ANOMALY_LEVEL", "find_anomalies"]

DEFAULT_ANOMALY_LEVEL = 0.999


@dataclass
class Anomalies:
    """Flagged readings, in increasing ``index`` order.

    Attributes
    ----------
    index : ndarray of int
        Position of each flagged reading in the fitted arrays.
    x, y : ndarray
        The reading.
    estimate : ndarray
        The resistant fit's curve at ``x``.
    lower, upper : ndarray
        The prediction interval at ``x`` that the reading falls outside.
    level : float
    """

    index: np.ndarray
    x: np.ndarray
    y: np.ndarray
    estimate: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    level: float

    def __len__(self) -> int:
        return int(self.index.size)


def find_anomalies(smoother: Any, level: float = DEFAULT_ANOMALY_LEVEL, counted: np.ndarray | None = None) -> Anomalies:
    """Readings of ``smoother``'s data outside its prediction interval at ``level``.

    Parameters
    ----------
    smoother : Smoother
        A resistant fit (``estimators.fit(..., robust=True)``); a plain fit would let the
        anomalies shape the interval they are judged by.
    level : float
        In (0, 1); the probability that a new reading falls inside the interval.
    counted : ndarray of bool, optional
        Readings that may be flagged (default: those with a positive weight in the caller's
        ``weights``; the robustness weights do not matter here).

    Returns
    -------
    Anomalies
    """
    lev = check_level(level)
    sample = smoother.sample
    x, y = sample.x, sample.y
    may = np.ones(x.size, dtype=bool) if counted is None else np.asarray(counted, dtype=bool)
    lower, upper = smoother.prediction_interval(x, level=lev)
    outside = may & np.isfinite(lower) & np.isfinite(upper) & ((y < lower) | (y > upper))
    idx = np.flatnonzero(outside)
    estimate = smoother.predict(x[idx])
    return Anomalies(idx, x[idx].copy(), y[idx].copy(), estimate, lower[idx], upper[idx], lev)
