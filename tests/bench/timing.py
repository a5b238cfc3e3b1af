"""Best-of-N wall-clock timing shared by the benchmarks."""

from __future__ import annotations

import time
from collections.abc import Callable


def best_of(fn: Callable[[], object], repeat: int) -> float:
    """Seconds of the fastest of ``repeat`` calls (the least disturbed run on a shared machine)."""
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best
