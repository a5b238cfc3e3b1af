"""Checks of the uncertainty functions' arguments (points, level, replicates, seed) and their choices."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..names import BAND_METHODS

METHODS = BAND_METHODS
MULTIPLIERS = ("rademacher", "mammen", "gaussian")


def check_points(points: Any) -> np.ndarray:
    try:
        t = np.asarray(points, dtype=float).ravel()
    except (TypeError, ValueError):
        raise ValueError("points must be an array of numbers") from None
    if not np.all(np.isfinite(t)):
        raise ValueError("points must hold finite numbers only")
    return t


def check_level(level: Any) -> float:
    try:
        lev = float(level)
    except (TypeError, ValueError):
        raise ValueError(f"level must be a number between 0 and 1, got {level!r}") from None
    if not (0.0 < lev < 1.0):
        raise ValueError(f"level must be strictly between 0 and 1, got {level!r}")
    return lev


def check_replicates(replicates: Any, level: float) -> int:
    if isinstance(replicates, bool) or not isinstance(replicates, (int, np.integer)):
        raise ValueError(f"replicates must be a whole number, got {replicates!r}")
    need = int(math.ceil(2.0 / (1.0 - level) - 1e-9))
    if replicates < need:
        raise ValueError(f"replicates must be at least {need} for a level-{level:g} band, got {replicates}")
    return int(replicates)


def check_seed(seed: Any) -> int | None:
    if seed is None:
        return None
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise ValueError(f"seed must be a non-negative whole number or None, got {seed!r}")
    return int(seed)
