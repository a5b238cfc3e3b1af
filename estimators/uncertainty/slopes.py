"""Direction of the curve at one point (rising, falling or flat), for a dashboard."""

from __future__ import annotations

import math

import numpy as np
from scipy.special import ndtri

from ..local_poly import LocalPolynomial
from .arguments import check_level, check_points
from .cautions import band_cautions
from .local_fits import coefficient_row, local_fit, variance
from .noise import noise_column, noise_scale
from .results import SlopeSummary


def slope_summary(
    smoother: LocalPolynomial, level: float = 0.95, at: float | None = None, *, bias_correction: bool = False
) -> SlopeSummary:
    """Is the fitted trend rising, falling or flat at the last data point (or at ``at``)?

    The slope is ``smoother.slope`` at the point: at the edge of the data it is
    the trend of the local fit over the last window (about one bandwidth), not
    an instantaneous derivative. Its interval is ``slope +- z se`` with the
    analytic standard error from the local noise scale.

    Parameters
    ----------
    smoother : Smoother
        Degree >= 1.
    level : float
    at : float, optional
        Defaults to the largest ``x``.
    bias_correction : bool
        Centre and scale from the fit one degree higher (robust bias
        correction for the derivative). Off by default: at the edge of the
        data it multiplies the standard error by about 3.5, so the summary
        would say ``"flat"`` for all but the steepest trends.

    Returns
    -------
    SlopeSummary
        ``direction`` is ``"up"`` / ``"down"`` when the whole interval is
        above / below zero, else ``"flat"``. Pointwise: one point, one level.
    """
    s = smoother
    if s.degree < 1:
        raise ValueError("slope needs degree >= 1 (a local linear or quadratic fit)")
    lev = check_level(level)
    x0 = s.x_max if at is None else float(check_points([at])[0])
    t = np.array([x0])
    slope = float(s.slope(t)[0])
    fit = local_fit(s, t, s.degree + 1 if bias_correction else s.degree)
    a = coefficient_row(fit, 1, s.bandwidth)
    centre = float(fit.beta[0, 1] / s.bandwidth) if fit.degree_used[0] >= 1 else math.nan
    se = math.nan
    if math.isfinite(centre):
        se = float(np.sqrt(variance(s, t, a, noise_column(s, noise_scale(s))))[0])
    z = float(ndtri(0.5 + lev / 2.0))
    lower, upper = centre - z * se, centre + z * se
    if lower > 0:
        direction = "up"
    elif upper < 0:
        direction = "down"
    else:
        direction = "flat"
    warnings = band_cautions(s, t, np.array([centre]), fit, True)
    return SlopeSummary(x0, slope, lower, upper, se, lev, direction, bool(s.extrapolated(t)[0]), warnings)
