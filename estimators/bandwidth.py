"""Bandwidth selection (baseline: GCV over a geometric grid; extended in this module)."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .cautions import Caution
from .kernels import Kernel, convert_bandwidth, get_kernel
from .local_poly import Smoother, SortedSample, validate_sample

__all__ = ["Selection", "select_bandwidth", "select_for_sample", "SELECTORS", "RULES"]

SELECTORS = ("loocv", "gcv", "aicc", "plugin", "rule_of_thumb")
RULES = ("min", "one_se")


@dataclass
class Selection:
    """Record of an automatic bandwidth choice: the evidence and the cautions."""

    selector: str
    rule: str
    candidates: np.ndarray
    scores: np.ndarray
    chosen: float
    gaussian_equivalent: float
    warnings: list[Caution] = field(default_factory=list)


def candidate_grid(sample: SortedSample, count: int, lo: float | None, hi: float | None) -> np.ndarray:
    span = float(sample.xs[-1] - sample.xs[0])
    if span <= 0:
        raise ValueError("all x values are equal: a bandwidth cannot be selected")
    gaps = np.diff(np.unique(sample.xs))
    lo = float(lo) if lo is not None else max(float(np.max(gaps)) * 0.5, span / max(sample.n_used, 1) * 4)
    hi = float(hi) if hi is not None else span / 2
    if not lo < hi:
        raise ValueError(f"bandwidth_min ({lo}) must be below bandwidth_max ({hi})")
    return np.geomspace(lo, hi, int(count))


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
) -> Selection:
    if selector not in SELECTORS:
        raise ValueError(f"unknown selector {selector!r}; choose one of {', '.join(SELECTORS)}")
    if rule not in RULES:
        raise ValueError(f"unknown rule {rule!r}; choose one of {', '.join(RULES)}")
    grid = candidate_grid(sample, candidates, bandwidth_min, bandwidth_max)
    scores = np.full(grid.size, np.nan)
    n = sample.n_used
    for i, h in enumerate(grid):
        s = Smoother(sample, kernel, degree, float(h))
        r = s.residuals()
        ok = np.isfinite(r) & (sample.w > 0)
        if not ok.all():
            continue
        rss = float(np.sum(sample.w * r * r))
        df = s.effective_df
        if df < n:
            scores[i] = n * rss / (n - df) ** 2
    if not np.isfinite(scores).any():
        raise ValueError("no candidate bandwidth gives a defined fit at every data point")
    chosen = float(grid[int(np.nanargmin(scores))])
    return Selection(selector, rule, grid, scores, chosen, convert_bandwidth(chosen, kernel.name, "gaussian"))


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
) -> Selection:
    """Select a bandwidth; returns the :class:`Selection` record with every candidate's score."""
    sample = validate_sample(x, y, weights)
    return select_for_sample(
        sample, get_kernel(kernel), int(degree), selector=selector, rule=rule, candidates=candidates,
        bandwidth_min=bandwidth_min, bandwidth_max=bandwidth_max,
    )
