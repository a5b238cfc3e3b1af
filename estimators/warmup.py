"""Compile and cache the numba sweeps once, so no process compiles on its first request.

Run ``python -m estimators.warmup`` after installing (``run.sh`` and the
container build do this). Compiled code is cached next to the sources, or in
``NUMBA_CACHE_DIR``. Run as a program it prints one line per step (kernel and
degree, n of m, elapsed seconds); :func:`warm` itself prints nothing.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable

import numpy as np

DEGREES = (0, 1, 2)
BAND_KERNELS = ("gaussian", "epanechnikov")


def steps() -> list[str]:
    """Names of the warm-up steps, in order: one per kernel and degree, then the bands."""
    from .kernels import KERNELS

    return [f"{kernel} degree {degree}" for kernel in KERNELS for degree in DEGREES] + [
        f"bands {kernel}" for kernel in BAND_KERNELS
    ]


def warm(progress: Callable[[int, int, str], None] | None = None) -> float:
    """Exercise every compiled signature; returns the seconds it took.

    Parameters
    ----------
    progress : callable, optional
        Called before each step with (index from 1, number of steps, step name).

    Returns
    -------
    float
        Seconds spent.
    """
    from .api import fit
    from .kernels import KERNELS

    names = steps()
    done = 0

    def step() -> None:
        nonlocal done
        done += 1
        if progress is not None:
            progress(done, len(names), names[done - 1])

    start = time.perf_counter()
    rng = np.random.default_rng(0)
    x = rng.uniform(0, 10, 200)
    y = np.sin(x) + rng.normal(0, 0.1, x.size)
    for kernel in KERNELS:  # every kernel has its own compiled sweeps (loop bounds are constants)
        for degree in DEGREES:
            step()
            s = fit(x, y, kernel=kernel, degree=degree, bandwidth=1.0)
            s.fitted()
            _ = s.residual_scale
            s.predict(np.linspace(0, 10, 7))
            s.moments(np.linspace(0, 10, 7), np.ones((x.size, 3)), 4, power=2)
            s.standard_error(np.linspace(0, 10, 7))
            if kernel == "gaussian":
                s.predict(np.array([17.5]))  # far from the data: sums term by term
            fit(x, y, kernel=kernel, degree=degree, bandwidth=1.0, engine="binned").predict(np.linspace(0, 10, 7))
            fit(x, y, kernel=kernel, degree=degree, bandwidth="auto").predict(np.linspace(0, 10, 7))
            if kernel == "gaussian" and degree == 1:  # the correlated-noise path; every fit runs the diagnosis's loop
                fit(x, y, kernel=kernel, degree=degree, bandwidth="auto", noise="correlated").predict(np.linspace(0, 10, 7))
    grid = np.linspace(0.5, 9.5, 9)
    for kernel in BAND_KERNELS:
        step()
        s = fit(x, y, kernel=kernel, bandwidth=1.0)
        for method, options in (
            ("wild_bootstrap", {}),
            ("wild_bootstrap", {"multiplier": "mammen"}),
            ("wild_bootstrap", {"simultaneous": True}),
            ("residual_bootstrap", {}),
            ("wild_bootstrap", {"engine": "binned"}),
        ):
            s.bands(grid, method=method, replicates=40, seed=0, **options)
        s.prediction_interval(grid)
    return time.perf_counter() - start


def _main() -> None:  # pragma: no cover - the program's own output
    start = time.perf_counter()
    print("compiling the numerical kernels once (later starts load them from the cache)", flush=True)

    def show(index: int, total: int, name: str) -> None:
        line = f"  [{index:>2}/{total}] {name:<24} {time.perf_counter() - start:6.1f} s"
        if sys.stdout.isatty():
            print("\r" + line, end="", flush=True)
        else:
            print(line, flush=True)

    seconds = warm(show)
    if sys.stdout.isatty():
        print()
    print(f"compiled kernels ready in {seconds:.1f} s", flush=True)


if __name__ == "__main__":  # pragma: no cover
    _main()
