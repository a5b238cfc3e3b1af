"""Cautions about a selection: grid edge, flat score, unscored candidates, an implausibly rough curve."""

from __future__ import annotations

import numpy as np

from ..cautions import Caution
from .fits import CandidateFit
from .groups import TieGroups
from .scores import indistinguishable_range, paired_se

#: the score curve is "flat" when the candidates within one paired SE of the best span this bandwidth ratio
FLAT_BANDWIDTH_RATIO = 5.0
#: steps of the fitted curve below this fraction of the spread of y do not count as turns
TURN_TOLERANCE = 1e-6
#: "implausibly rough": effective df above this fraction of the distinct x values ...
ROUGH_DF_FRACTION = 0.25
#: ... or the fitted curve turning (slope changing sign) at more than this fraction of them
ROUGH_TURN_FRACTION = 0.25


def _turns(fitted: np.ndarray, tol: float) -> int:
    """Number of sign changes of the slope of a curve given at increasing x; steps within ``tol`` are ignored."""
    step = np.diff(fitted)
    d = np.sign(step[np.abs(step) > tol])
    return int(np.count_nonzero(d[1:] != d[:-1]))


def roughness_caution(fit: CandidateFit, groups: TieGroups, h: float) -> Caution | None:
    """``implausibly_rough`` when the effective degrees of freedom exceed :data:`ROUGH_DF_FRACTION` of
    the distinct x values, or the fitted curve changes direction at more than
    :data:`ROUGH_TURN_FRACTION` of them (counted at the probe groups)."""
    gcount = groups.count
    if fit.df > ROUGH_DF_FRACTION * gcount:
        return Caution(
            "implausibly_rough",
            f"at the chosen bandwidth {h:.4g} the fit uses {fit.df:.1f} effective degrees of freedom for "
            f"{gcount} distinct x values (more than {ROUGH_DF_FRACTION:.0%}): it may follow the noise; "
            "look at the curve and consider a larger bandwidth",
        )
    fitted, _ = fit.at_groups(True, groups.probe)
    fitted = fitted[np.isfinite(fitted)]
    turns = _turns(fitted, TURN_TOLERANCE * groups.y_scale)
    if fitted.size > 2 and turns > ROUGH_TURN_FRACTION * (fitted.size - 2):
        return Caution(
            "implausibly_rough",
            f"at the chosen bandwidth {h:.4g} the curve changes direction {turns} times over {fitted.size} "
            f"distinct x values (more than {ROUGH_TURN_FRACTION:.0%}): it may follow the noise; consider a "
            "larger bandwidth",
        )
    return None


def edge_caution(index: int, grid: np.ndarray, what: str, raised: bool) -> Caution | None:
    if index == 0:
        extra = (
            f" (by default the smallest candidate at this sample size is {grid[0]:.4g}, 16 nodes of the finest "
            "binned grid; smaller candidates are refitted exactly, one pass over the data each)"
            if raised
            else ""
        )
        return Caution(
            "selection_at_grid_edge",
            f"the {what} is the smallest candidate ({grid[0]:.4g}); the best bandwidth may be smaller: "
            f"lower bandwidth_min{extra}, and check the curve for roughness",
        )
    if index == grid.size - 1:
        return Caution(
            "selection_at_grid_edge",
            f"the {what} is the largest candidate ({grid[-1]:.4g}); the best bandwidth may be larger "
            "(the data may be close to a polynomial of the fitted degree): raise bandwidth_max",
        )
    return None


def unscored_caution(selector: str, scores: np.ndarray) -> Caution | None:
    unscored = int(np.count_nonzero(~np.isfinite(scores)))
    if not unscored:
        return None
    return Caution(
        "unscored_candidates",
        f"{unscored} of {scores.size} candidates have no {selector} score: the fit or the score is undefined "
        "there, or the candidate lies far below the best and would need an exact refit",
    )


def flat_caution(
    selector: str, grid: np.ndarray, scores: np.ndarray, fits: dict[int, CandidateFit], best: int, groups: TieGroups
) -> Caution | None:
    """``flat_selection_score`` when the data cannot tell the bandwidths apart.

    Two tests, both against the standard error of the *difference* of two
    candidates' scores (paired per-unit losses, :func:`paired_se`), which,
    unlike the SE of one score, does not include the uncertainty of the noise
    level that all candidates share:

    * the best score beats the largest candidate's (the smoothest fit, close to
      one global polynomial of the fitted degree) by at most one SE: no
      structure beyond that polynomial is detectable (pure noise);
    * the candidates around the best that score within one SE of it span a
      bandwidth ratio of :data:`FLAT_BANDWIDTH_RATIO` or more.
    """
    last = grid.size - 1
    while last > best and not (last in fits and np.isfinite(scores[last])):
        last -= 1
    if last == best or scores[last] - scores[best] <= paired_se(selector, fits[last], fits[best], groups):
        return Caution(
            "flat_selection_score",
            f"the {selector} score is flat: the best candidate fits no better than the largest "
            f"({grid[last]:.4g}), within one standard error, so the data show no curve beyond a polynomial "
            "of the fitted degree and the bandwidth is not determined",
        )
    lo, hi = indistinguishable_range(selector, grid, scores, fits, best, groups)
    if grid[hi] / grid[lo] >= FLAT_BANDWIDTH_RATIO:
        return Caution(
            "flat_selection_score",
            f"the {selector} score is flat: candidates from {grid[lo]:.4g} to {grid[hi]:.4g} differ from "
            "the best by less than one standard error of the difference, so the data do not pin the "
            "bandwidth down and the choice is unreliable",
        )
    return None
