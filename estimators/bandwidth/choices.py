"""Names of the selectors, rules and scoring modes, and the checks of selection arguments."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

MAX_CANDIDATES = 1000


def check_choice(name: str, value: Any, allowed: tuple[str, ...]) -> str:
    if not isinstance(value, str) or value not in allowed:
        raise ValueError(f"unknown {name} {value!r}; choose one of {', '.join(allowed)}")
    return value


def check_degree(degree: Any) -> int:
    if isinstance(degree, bool) or not isinstance(degree, (int, np.integer)) or degree not in (0, 1, 2):
        raise ValueError(f"degree must be 0, 1 or 2, got {degree!r}")
    return int(degree)


def check_count(count: Any) -> int:
    if isinstance(count, bool) or not isinstance(count, (int, np.integer)):
        raise ValueError(f"candidates must be a whole number of candidate bandwidths, got {count!r}")
    if not 2 <= int(count) <= MAX_CANDIDATES:
        raise ValueError(f"candidates must be between 2 and {MAX_CANDIDATES}, got {int(count)}")
    return int(count)


def check_bound(name: str, value: Any) -> float | None:
    if value is None:
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a positive number, got {value!r}") from None
    if not math.isfinite(v) or v <= 0:
        raise ValueError(f"{name} must be a positive finite number, got {value!r}")
    return v
