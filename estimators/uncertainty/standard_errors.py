"""Pointwise standard errors of the curve and of its slope."""

from __future__ import annotations

from typing import Any

import numpy as np

from ..local_poly import LocalPolynomial
from .arguments import check_points
from .local_fits import LocalFit, coefficient_row, local_fit, sort_points, unsort, variance
from .residuals import adjusted_residuals


def _se_of(s: LocalPolynomial, t: np.ndarray, degree: int, nu: int, robust: bool) -> tuple[np.ndarray, LocalFit]:
    ts, perm = sort_points(t)
    fit = local_fit(s, ts, degree)
    a = coefficient_row(fit, nu, s.bandwidth)
    if robust:
        res = adjusted_residuals(s)
        column = s.sample.ws**2 * res.ra**2 if res.informative.any() else np.full(s.sample.ws.shape, np.nan)
    else:
        column = s.sample.ws * s.residual_scale**2
    var = variance(s, ts, np.nan_to_num(a), column)
    var[np.isnan(a[:, 0])] = np.nan
    return unsort(np.sqrt(var), perm), fit


def standard_error(smoother: LocalPolynomial, points: Any, robust: bool = False) -> np.ndarray:
    """Pointwise standard error of the curve estimate ``smoother.predict(points)``.

    Parameters
    ----------
    smoother : Smoother
    points : array_like
        Any order; the result follows it.
    robust : bool
        False: homoscedastic, ``sigma^2 sum_j l_j(t)^2 / w_j`` with
        ``sigma = smoother.residual_scale``. True: heteroscedasticity-consistent,
        ``sum_j l_j(t)^2 ra_j^2`` with leverage-adjusted residuals (see
        ``docs/methods.md``).

    Returns
    -------
    ndarray
        NaN where the estimate is undefined.

    Notes
    -----
    This is the standard error of the plotted curve, which carries a smoothing
    bias of the same order; :func:`bands` uses the bias-corrected centre and
    its (larger) standard error. Extrapolated points get a value, but it
    describes the local polynomial's extrapolation, not the unknown curve.
    """
    t = check_points(points)
    se, _ = _se_of(smoother, t, smoother.degree, 0, bool(robust))
    return se


def slope_standard_error(smoother: LocalPolynomial, points: Any, robust: bool = False) -> np.ndarray:
    """Pointwise standard error of ``smoother.slope(points)`` (degree >= 1); see :func:`standard_error`."""
    if smoother.degree < 1:
        raise ValueError("slope needs degree >= 1 (a local linear or quadratic fit)")
    t = check_points(points)
    se, _ = _se_of(smoother, t, smoother.degree, 1, bool(robust))
    return se
