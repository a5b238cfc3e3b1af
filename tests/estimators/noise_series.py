"""Series with serially correlated noise for tests and studies (known truth)."""

from __future__ import annotations

import math

import numpy as np


def ar1(rng: np.random.Generator, n: int, phi: float) -> np.ndarray:
    """Stationary AR(1) with unit marginal variance, started from its stationary law (Box & Jenkins 1976, 3.2.4)."""
    eps = rng.standard_normal(n)
    e = np.empty(n)
    e[0] = eps[0]
    s = math.sqrt(1.0 - phi * phi)
    for i in range(1, n):
        e[i] = phi * e[i - 1] + s * eps[i]
    return e


def trend(x: np.ndarray) -> np.ndarray:
    """The study's first truth, ``sin(2 pi x) + 0.5 x``."""
    return np.sin(2.0 * math.pi * x) + 0.5 * x
