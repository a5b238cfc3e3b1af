"""Selection criteria (loocv, gcv, aicc), their per-point losses and standard errors.

Method notes: ``docs/methods.md`` (bandwidth selection: selectors, rules).
"""

from __future__ import annotations

import math

import numpy as np

from .fits import CandidateFit
from .groups import TieGroups


def _loocv_losses(fit: CandidateFit, groups: TieGroups, probe: bool = False) -> np.ndarray:
    """Per-group leave-one-group-out losses (at the probe groups with ``probe``).

    For the group ``g`` of points sharing ``x_g`` the local design rows at
    ``x_g`` are identical (``u = 0``), so deleting the whole group is a rank-one
    update of the local moment matrix and the Sherman-Morrison formula gives
    the exact deleted fit
    ``yhat_{-g} = (yhat_g - sum_{j in g} L_gj y_j) / (1 - sum_{j in g} L_gj)``
    with ``L_gj = w_j K(0) [S(x_g)^-1]_00``. Hence
    ``ybar_g - yhat_{-g} = (ybar_g - yhat_g) / (1 - sum_j L_gj)``.
    Undefined (NaN) when ``1 - sum_j L_gj`` vanishes: the group's own points
    determine its fit, e.g. fewer than ``degree + 1`` other distinct x values
    in the window.
    """
    idx = groups.probe if probe else slice(None)
    fitted, lev = fit.at_groups(probe, groups.probe)
    denom = 1.0 - lev
    if not (np.all(np.isfinite(fitted)) and np.all(denom > 1e-9)):
        return np.full(fitted.size, np.nan)
    losses: np.ndarray = groups.wss[idx] + groups.Wt[idx] * ((groups.ybar[idx] - fitted) / denom) ** 2
    return losses


def score_of(selector: str, fit: CandidateFit, groups: TieGroups) -> float:
    n = groups.n
    if not (math.isfinite(fit.rss) and math.isfinite(fit.df)):
        return math.nan
    if selector == "gcv":
        return fit.rss / n / (1.0 - fit.df / n) ** 2 if fit.df < n else math.nan
    if selector == "aicc":
        if n - fit.df - 2.0 <= 0 or fit.rss <= 0:
            return math.nan
        return math.log(fit.rss / n) + 1.0 + 2.0 * (fit.df + 1.0) / (n - fit.df - 2.0)
    losses = _loocv_losses(fit, groups)
    return float(np.sum(losses)) / n if np.all(np.isfinite(losses)) else math.nan


def _unit_losses(selector: str, fit: CandidateFit, groups: TieGroups) -> np.ndarray:
    """Per-unit contributions ``l_g`` with ``score ~ n^-1 sum_g l_g`` (up to a constant), at the probe groups.

    The units are the tie groups (distinct x values; single points when there
    are no ties), because points that share an x share their fitted value.
    ``loocv``: the leave-one-group-out losses. ``gcv``:
    ``(wss_g + Wt_g (ybar_g - yhat_g)^2) / (1 - tr L / n)^2``, the inflation
    factor treated as fixed. ``aicc``: the delta method on the logarithm,
    ``(wss_g + Wt_g (ybar_g - yhat_g)^2) / s2`` with ``s2 = RSS / n``, the
    penalty treated as fixed. With more than :data:`PROBE_GROUPS` groups only
    evenly spaced probe groups are used (enough for a standard error).
    """
    n = groups.n
    if selector == "loocv":
        return _loocv_losses(fit, groups, probe=True)
    idx = groups.probe
    fitted, _ = fit.at_groups(True, idx)
    losses: np.ndarray = groups.wss[idx] + groups.Wt[idx] * (groups.ybar[idx] - fitted) ** 2
    if selector == "gcv":
        return losses / (1.0 - fit.df / n) ** 2
    s2 = fit.rss / n
    return losses / s2 if s2 > 0 else np.full(losses.size, np.nan)


def _se_of_sum(values: np.ndarray, groups: TieGroups) -> float:
    """Standard error of ``n^-1 sum_g v_g`` over all ``G`` groups, the probe values a sample of them.

    ``sqrt(G) sd(v) / n``.
    """
    if values.size < 2 or not np.all(np.isfinite(values)):
        return math.nan
    return math.sqrt(groups.count) * float(np.std(values, ddof=1)) / groups.n


def score_se(selector: str, fit: CandidateFit, groups: TieGroups) -> float:
    """Standard error of a candidate's score from its per-unit losses (:func:`_unit_losses`)."""
    return _se_of_sum(_unit_losses(selector, fit, groups), groups)


def paired_se(selector: str, fit: CandidateFit, best: CandidateFit, groups: TieGroups) -> float:
    """Standard error of the score difference between a candidate and the best, from paired unit losses."""
    return _se_of_sum(_unit_losses(selector, fit, groups) - _unit_losses(selector, best, groups), groups)


def indistinguishable_range(
    selector: str, grid: np.ndarray, scores: np.ndarray, fits: dict[int, CandidateFit], best: int, groups: TieGroups
) -> tuple[int, int]:
    """Contiguous run of candidates around the best whose score exceeds the best by at most one paired SE."""

    def close(i: int) -> bool:
        if i not in fits or not np.isfinite(scores[i]):
            return False
        se = paired_se(selector, fits[i], fits[best], groups)
        return math.isfinite(se) and scores[i] - scores[best] <= se

    lo = best
    while lo > 0 and close(lo - 1):
        lo -= 1
    hi = best
    while hi < grid.size - 1 and close(hi + 1):
        hi += 1
    return lo, hi
