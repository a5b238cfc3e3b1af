"""The record of an automatic bandwidth choice: candidates, scores, the choice and its cautions."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..cautions import Caution
from ..noise_choice import NoiseChoice


@dataclass
class Selection:
    """Record of an automatic bandwidth choice: the evidence and the cautions.

    Attributes
    ----------
    selector, rule : str
        ``selector`` is the criterion actually used: ``"modified_cv"`` when the
        noise was treated as correlated.
    candidates : ndarray
        Candidate bandwidths (ascending, kernel's own scale).
    scores : ndarray
        Score of every candidate; NaN where it is undefined or was not needed.
        ``plugin``: the estimated asymptotic mean squared error of the curve;
        ``rule_of_thumb``: all NaN (the rule has no score).
    chosen : float
        The selected bandwidth. For ``plugin`` and ``rule_of_thumb`` it is the
        formula's value (clipped to the candidate range), not a grid point.
    gaussian_equivalent : float
        ``chosen`` carried to the gaussian kernel by canonical scaling.
    warnings : list of Caution
    effective_df : ndarray
        Trace of the smoother matrix at every scored candidate (NaN elsewhere).
    score_se : float
        Standard error of the best score (NaN for plugin and rule_of_thumb).
    scoring : str
        ``"exact"`` or ``"binned"``: how the candidates were scored (``"formula"``
        for plugin and rule_of_thumb).
    pilot : dict
        Intermediate quantities of plugin / rule_of_thumb (noise variance,
        curvature functional, pilot bandwidth, spread of x, ...); for
        ``modified_cv`` the noise estimates and the exclusion ``l``.
    noise : NoiseChoice or None
        The noise model used and its diagnosis (set by the selection entry points).
    """

    selector: str
    rule: str
    candidates: np.ndarray
    scores: np.ndarray
    chosen: float
    gaussian_equivalent: float
    warnings: list[Caution] = field(default_factory=list)
    effective_df: np.ndarray = field(default_factory=lambda: np.empty(0))
    score_se: float = math.nan
    scoring: str = "exact"
    pilot: dict[str, float] = field(default_factory=dict)
    noise: NoiseChoice | None = None
