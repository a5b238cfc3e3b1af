"""Prediction intervals for a new observation."""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy.special import ndtri

from ..local_poly import LocalPolynomial
from .arguments import check_level, check_points
from .local_fits import centre_degree, coefficient_row, local_fit, sort_points, unsort, variance
from .noise import noise_column, noise_scale


def prediction_interval(
    smoother: LocalPolynomial,
    points: Any,
    level: float = 0.95,
    *,
    curve_factor: float = 1.0,
    noise_variance: float | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Interval that holds a new observation (unit weight) at each point with probability ``level``.

    ``m(t) +- z sqrt(se(t)^2 + sigma^2(t))``: the curve's sampling variance
    plus the local noise variance (constant when the data show no unequal
    noise; see ``docs/methods.md``). ``m`` and ``se`` are those of the
    bias-corrected centre the bands use, so the interval for a new observation
    always contains the band for the curve (outside the data, where the
    corrected fit's variance grows fastest, a plain-fit interval would not).

    Parameters
    ----------
    curve_factor : float
        Factor on the curve's standard error (for serially correlated noise,
        :func:`estimators.serial.correlated_se_factor`).
    noise_variance : float, optional
        Variance of a new reading about the curve, in place of the local noise
        scale (for serially correlated noise, the marginal variance
        ``gamma(0)``, not the long-run variance).

    Notes
    -----
    Pointwise; assumes roughly normal noise. Outside the data range the
    interval is still given (noise scale of the nearest end) but it is an
    extrapolation the data do not support: check ``smoother.extrapolated``.
    """
    s = smoother
    t = check_points(points)
    lev = check_level(level)
    ts, perm = sort_points(t)
    fit = local_fit(s, ts, centre_degree(s.degree))
    centre = fit.beta[:, 0] + s.sample.y_centre
    a = coefficient_row(fit, 0, s.bandwidth)
    noise = noise_scale(s)
    var_curve = variance(s, ts, np.nan_to_num(a), noise_column(s, noise))
    reading = noise.at(ts) if noise_variance is None else np.full(ts.shape, float(noise_variance))
    half = float(ndtri(0.5 + lev / 2.0)) * np.sqrt(var_curve * float(curve_factor) ** 2 + reading)
    lower = np.where(np.isfinite(centre), centre - half, np.nan)
    upper = np.where(np.isfinite(centre), centre + half, np.nan)
    return unsort(lower, perm), unsort(upper, perm)
