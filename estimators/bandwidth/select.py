"""Bandwidth selection: score the candidates or apply a formula, then apply the rule."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..cautions import Caution
from ..kernels import Kernel, convert_bandwidth, get_kernel
from ..names import RULES, SCORED_SELECTORS, SCORINGS, SELECTORS
from ..noise_choice import NoiseChoice, check_noise, choose_noise
from ..sample import SortedSample, validate_sample
from .binned import BinnedScorer, binned_floor, resolve_scoring
from .cautions import edge_caution, flat_caution, roughness_caution, unscored_caution
from .choices import check_choice, check_degree
from .fits import CandidateFit, ExactScorer
from .grid import candidate_grid
from .groups import TieGroups
from .plugin import plugin_bandwidth
from .record import Selection
from .rule_of_thumb import rule_of_thumb_bandwidth
from .scores import score_of, score_se
from .serial_select import select_correlated

#: binned loocv: candidates where some tie group has a larger leverage are refitted exactly
LOOCV_BINNED_MAX_LEVERAGE = 0.9
#: scores within this fraction of the best count as equal (the smoothest of them is chosen)
_TIE = 1e-12


def _score_candidates(
    selector: str, grid: np.ndarray, scorer: Any, exact: ExactScorer, groups: TieGroups
) -> tuple[np.ndarray, dict[int, CandidateFit]]:
    """Score every candidate.

    With binned scoring two kinds of candidates are refitted exactly: for
    ``loocv``, those where some tie group has a leverage above
    :data:`LOOCV_BINNED_MAX_LEVERAGE` (the division by ``1 - L`` would magnify
    the binning error, e.g. windows of a few points); and *coarse* candidates
    (fewer than :data:`BINNED_NODES_PER_BANDWIDTH` nodes per bandwidth) next to
    the best or whose score, less its error bound, could beat the best. Coarse
    candidates below one node per bandwidth are not binned at all and stay
    unscored unless they are next to the best.
    """
    count = grid.size
    scores = np.full(count, np.nan)
    fits: dict[int, CandidateFit] = {}
    coarse: set[int] = set()
    for i, h in enumerate(grid):
        if isinstance(scorer, BinnedScorer) and scorer.nodes_per_bandwidth(float(h)) < 1.0:
            coarse.add(i)  # too coarse to bin at all: scored exactly only if needed
            continue
        fit = scorer.evaluate(float(h))
        if selector == "loocv" and isinstance(scorer, BinnedScorer):
            _, lev = fit.at_groups()
            if not np.all(lev <= LOOCV_BINNED_MAX_LEVERAGE):  # 1 / (1 - L) would magnify the binning error
                fit = exact.evaluate(float(h))
        fits[i] = fit
        scores[i] = score_of(selector, fit, groups)
        if fit.coarse:
            coarse.add(i)
    exact_done: set[int] = set()
    while coarse - exact_done:
        if not np.isfinite(scores).any():
            todo = sorted(coarse - exact_done)[-1:]
        else:
            best = int(np.nanargmin(scores))
            near = {best - 1, best, best + 1}
            reach = scores[best] + fits[best].error_bound(selector, scores[best])
            todo = sorted(
                i for i in coarse - exact_done
                if i in near
                or (i in fits and np.isfinite(scores[i]) and scores[i] - fits[i].error_bound(selector, scores[i]) <= reach)
            )
        if not todo:
            break
        for i in todo:
            fit = exact.evaluate(float(grid[i]))
            fits[i] = fit
            scores[i] = score_of(selector, fit, groups)
            exact_done.add(i)
    return scores, fits


def _select_scored(
    selector: str, rule: str, sample: SortedSample, kernel: Kernel, degree: int, mode: str,
    candidates: int, bandwidth_min: float | None, bandwidth_max: float | None,
) -> Selection:
    floor = binned_floor(sample) if mode == "binned" else 0.0
    grid, cautions = candidate_grid(
        sample, kernel, degree, candidates, bandwidth_min, bandwidth_max, leave_out=selector == "loocv", floor=floor
    )
    raised = bandwidth_min is None and grid[0] == floor
    groups = TieGroups(sample)
    exact = ExactScorer(sample, groups, kernel, degree)
    scorer: Any = exact if mode == "exact" else BinnedScorer(sample, groups, kernel, degree, float(grid[0]), float(grid[-1]))
    scores, fits = _score_candidates(selector, grid, scorer, exact, groups)
    if not np.isfinite(scores).any():
        hint = " (y is constant: every bandwidth gives the same flat curve)" if np.ptp(sample.ys) == 0 else ""
        raise ValueError(
            f"no candidate bandwidth between {grid[0]:.4g} and {grid[-1]:.4g} could be scored with {selector}{hint}; "
            "widen the range or give a fixed bandwidth"
        )
    best = int(np.nanargmin(scores))
    # equal scores (constant y, or data every candidate fits exactly): the smoothest of them
    tied = np.flatnonzero(np.isfinite(scores) & (scores <= scores[best] + _TIE * abs(scores[best])))
    best = int(tied.max())
    se = score_se(selector, fits[best], groups)
    thr = scores[best] + (se if math.isfinite(se) else 0.0)
    within = np.flatnonzero(np.isfinite(scores) & (scores <= thr))
    chosen_i = best if rule == "min" else int(within.max())
    chosen = float(grid[chosen_i])
    edge = edge_caution(best, grid, "best-scoring bandwidth", raised)
    if edge is None and chosen_i != best:
        edge = edge_caution(chosen_i, grid, "bandwidth chosen by one_se", raised)
    for caution in (
        edge,
        flat_caution(selector, grid, scores, fits, best, groups),
        unscored_caution(selector, scores),
        roughness_caution(fits[chosen_i], groups, chosen),
    ):
        if caution is not None:
            cautions.append(caution)
    df = np.array([fits[i].df if i in fits else math.nan for i in range(grid.size)])
    return Selection(
        selector, rule, grid, scores, chosen, convert_bandwidth(chosen, kernel.name, "gaussian"),
        cautions, df, se, scorer.name,
    )


def _select_formula(
    selector: str, rule: str, sample: SortedSample, kernel: Kernel, degree: int, mode: str,
    candidates: int, bandwidth_min: float | None, bandwidth_max: float | None,
) -> Selection:
    grid, cautions = candidate_grid(sample, kernel, degree, candidates, bandwidth_min, bandwidth_max)
    if selector == "plugin":
        raw, amise, pilot = plugin_bandwidth(sample, kernel, degree)
        scores = np.asarray(amise(grid), dtype=float)
        what = "plug-in bandwidth"
    else:
        raw, pilot = rule_of_thumb_bandwidth(sample, kernel)
        scores = np.full(grid.size, np.nan)
        what = "rule-of-thumb bandwidth"
        cautions.append(
            Caution(
                "reference_rule",
                "the rule of thumb uses only the spread of x (normal reference), not the shape of the curve; "
                "compare it with a score-based selector such as gcv",
            )
        )
    chosen = float(min(max(raw, grid[0]), grid[-1]))
    pilot["formula_bandwidth"] = raw
    if raw < grid[0] or raw > grid[-1]:
        side = "smallest" if raw < grid[0] else "largest"
        cautions.append(
            Caution(
                "selection_at_grid_edge",
                f"the {what} ({raw:.4g}) lies outside the candidate range and was set to the {side} "
                f"candidate ({chosen:.4g})",
            )
        )
    groups = TieGroups(sample)
    # one fit at the chosen value for the roughness check (a coarse binned fit is good enough for it)
    scorer: Any = (
        ExactScorer(sample, groups, kernel, degree)
        if mode == "exact"
        else BinnedScorer(sample, groups, kernel, degree, chosen, chosen)
    )
    rough = roughness_caution(scorer.evaluate(chosen), groups, chosen)
    if rough is not None:
        cautions.append(rough)
    return Selection(
        selector, rule, grid, scores, chosen, convert_bandwidth(chosen, kernel.name, "gaussian"), cautions,
        np.full(grid.size, np.nan), math.nan, "formula", pilot,
    )


def select_for_sample(
    sample: SortedSample,
    kernel: Kernel,
    degree: int,
    *,
    selector: str = "gcv",
    rule: str = "min",
    candidates: int = 40,
    bandwidth_min: float | None = None,
    bandwidth_max: float | None = None,
    scoring: str = "auto",
    noise: str | NoiseChoice = "auto",
) -> Selection:
    """Select a bandwidth for validated, sorted data; see :func:`select_bandwidth`.

    ``noise`` is a ``noise`` argument (checked here) or a :class:`NoiseChoice`
    already made for this sample.
    """
    selector = check_choice("selector", selector, SELECTORS)
    rule = check_choice("rule", rule, RULES)
    scoring = check_choice("scoring", scoring, SCORINGS)
    degree = check_degree(degree)
    requested = noise.requested if isinstance(noise, NoiseChoice) else check_noise(noise)
    if rule == "one_se" and selector not in SCORED_SELECTORS:
        raise ValueError(
            f"rule 'one_se' needs a selector that scores candidates with a standard error "
            f"({', '.join(SCORED_SELECTORS)}); {selector} computes its bandwidth from a formula"
        )
    mode = resolve_scoring(scoring, kernel, sample, selector)
    choice = noise if isinstance(noise, NoiseChoice) else choose_noise(sample, requested)
    if choice.correlated:
        floor = binned_floor(sample) if mode == "binned" else 0.0
        selection = select_correlated(
            sample, kernel, degree, choice.diagnosis, rule=rule, candidates=candidates,
            bandwidth_min=bandwidth_min, bandwidth_max=bandwidth_max, floor=floor,
        )
    else:
        select = _select_scored if selector in SCORED_SELECTORS else _select_formula
        selection = select(selector, rule, sample, kernel, degree, mode, candidates, bandwidth_min, bandwidth_max)
    selection.noise = choice
    selection.warnings.extend(choice.cautions())
    return selection


def select_bandwidth(
    x: Any,
    y: Any,
    *,
    kernel: str = "gaussian",
    degree: int = 1,
    selector: str = "gcv",
    rule: str = "min",
    weights: Any = None,
    candidates: int = 40,
    bandwidth_min: float | None = None,
    bandwidth_max: float | None = None,
    scoring: str = "auto",
    noise: str = "auto",
) -> Selection:
    """Select a bandwidth and return the evidence.

    Parameters
    ----------
    x, y : array_like
        Data, any order; ties allowed.
    kernel : str
        One of :data:`estimators.KERNELS`.
    degree : {0, 1, 2}
    selector : {"gcv", "loocv", "aicc", "plugin", "rule_of_thumb"}
    rule : {"min", "one_se"}
        ``one_se`` needs a scoring selector (gcv, loocv, aicc).
    weights : array_like, optional
        Non-negative precisions.
    candidates : int
        Number of candidate bandwidths (2 to 1000), geometric between
        ``bandwidth_min`` (default: :func:`well_posed_minimum`) and
        ``bandwidth_max`` (default: half the x range).
    scoring : {"auto", "exact", "binned"}
        How gcv / loocv / aicc score candidates; ``auto`` bins from 1000
        points (gaussian: always) except for the uniform and triangular kernels.
    noise : {"auto", "independent", "correlated"}
        Serial correlation of the noise in ``x`` order. ``auto`` tests for it
        (difference-based, two-sided level 0.01) and, when found, or always
        with ``correlated``, scores the candidates by modified (leave-(2l+1)-out)
        cross-validation instead of ``selector`` (the record's ``selector`` is
        then ``"modified_cv"``); ``independent`` uses ``selector`` as given.
        The diagnosis is kept in the record's ``noise``.

    Returns
    -------
    Selection

    Raises
    ------
    ValueError
        Bad input, with a message for a person.
    """
    kern = get_kernel(kernel)
    deg = check_degree(degree)
    requested = check_noise(noise)
    sample = validate_sample(x, y, weights)
    return select_for_sample(
        sample, kern, deg, selector=selector, rule=rule, candidates=candidates,
        bandwidth_min=bandwidth_min, bandwidth_max=bandwidth_max, scoring=scoring, noise=requested,
    )
