"""Compile and cache the numba sweeps once, so no process compiles on its first request.

Run ``python -m estimators.warmup`` after installing (``run.sh`` and the
container build do this). Compiled code is cached next to the sources.
"""

from __future__ import annotations

import time

import numpy as np


def warm() -> float:
    """Exercise every compiled signature; returns the seconds it took."""
    from .api import fit
    from .kernels import KERNELS

    start = time.perf_counter()
    rng = np.random.default_rng(0)
    x = rng.uniform(0, 10, 200)
    y = np.sin(x) + rng.normal(0, 0.1, x.size)
    for kernel in KERNELS:  # every kernel has its own compiled sweeps (loop bounds are constants)
        for degree in (0, 1, 2):
            s = fit(x, y, kernel=kernel, degree=degree, bandwidth=1.0)
            s.fitted()
            s.residual_scale
            s.predict(np.linspace(0, 10, 7))
            s.moments(np.linspace(0, 10, 7), np.ones((x.size, 3)), 4, power=2)
            if kernel == "gaussian":
                s.predict(np.array([17.5]))  # far from the data: sums term by term
    grid = np.linspace(0.5, 9.5, 9)
    for kernel in ("gaussian", "epanechnikov"):
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


if __name__ == "__main__":  # pragma: no cover
    print(f"compiled kernels ready in {warm():.1f} s")
