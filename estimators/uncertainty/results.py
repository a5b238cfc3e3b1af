"""Result records of the uncertainty functions: a confidence band and a slope summary."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..cautions import Caution


@dataclass
class Bands:
    """A confidence band for the curve at a set of points (caller's order).

    Attributes
    ----------
    lower, upper : ndarray
        Band limits; NaN where the estimate is undefined, and everywhere when
        every data point alone determines its fit (no residual carries noise
        information; warning ``noise_not_estimable``).
    se : ndarray
        Standard error of the band's centre (bootstrap standard deviation for
        the bootstrap methods).
    estimate : ndarray
        The band's centre: the bias-corrected estimate (see ``docs/methods.md``),
        or ``s.predict`` when ``bias_correction=False``.
    method : str
        ``"analytic"``, ``"wild_bootstrap"`` or ``"residual_bootstrap"``.
    level : float
        Nominal coverage.
    simultaneous : bool
        True: the band covers the whole curve at the requested points at once
        with probability ``level``; False: pointwise only.
    replicates, seed : int or None
        Monte Carlo size and seed (None for analytic pointwise bands).
    critical_value : float
        Multiplier of ``se`` (``z``, or the sup-t quantile); NaN for pointwise
        bootstrap bands, which use bootstrap quantiles directly.
    bias_corrected : bool
    centre_degree : int
        Degree of the local fit that forms the centre.
    noise : str
        ``"constant"`` or ``"local"``: the noise scale used (analytic and
        residual bootstrap), ``"residuals"`` for the wild bootstrap.
    warnings : list of Caution
    """

    lower: np.ndarray
    upper: np.ndarray
    se: np.ndarray
    estimate: np.ndarray
    method: str
    level: float
    simultaneous: bool
    replicates: int | None
    seed: int | None
    critical_value: float = math.nan
    bias_corrected: bool = True
    centre_degree: int = 0
    noise: str = ""
    warnings: list[Caution] = field(default_factory=list)


@dataclass
class SlopeSummary:
    """Direction of the curve at one point, for a dashboard.

    ``direction`` is ``"up"`` when the whole interval for the slope is above 0,
    ``"down"`` when it is below 0 and ``"flat"`` otherwise (the data cannot
    tell the direction at this level).
    """

    x: float
    slope: float
    lower: float
    upper: float
    se: float
    level: float
    direction: str
    extrapolated: bool
    warnings: list[Caution] = field(default_factory=list)
