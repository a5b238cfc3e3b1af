"""Independent dense implementation of local polynomial regression, for tests only.

At every point the weighted least-squares problem is solved directly with
``numpy.linalg.solve`` on the full design (Fan & Gijbels 1996, eq. 3.4), in
bandwidth units ``u = (x - t) / h`` so the reference itself is well conditioned.
It follows the documented degree rule of :func:`estimators.fit`: the degree at
a point is ``min(degree, distinct x in the window - 1)``, lowered while the
relative determinant of the local system is below 1e-11; no data -> NaN.
"""

from __future__ import annotations

import numpy as np

from estimators.kernels import Kernel
from estimators.sums import GAUSSIAN_CUTOFF


def dense_local_fit(
    x: np.ndarray, y: np.ndarray, w: np.ndarray, t: np.ndarray, kernel: Kernel, h: float, degree: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Return (estimate, slope, degree used, relative determinant) at ``t`` by the direct formula."""
    conditioning = np.zeros(t.size)
    est = np.full(t.size, np.nan)
    slope = np.full(t.size, np.nan)
    used = np.full(t.size, -1)
    for i, ti in enumerate(t):
        u = (x - ti) / h
        k = kernel(u) * w
        if not np.isfinite(kernel.support):
            k = np.where(np.abs(u) <= GAUSSIAN_CUTOFF, k, 0.0)
        on = k > 0
        d = min(degree, np.unique(x[on]).size - 1)
        while d >= 0:
            X = np.vander(u, d + 1, increasing=True)
            A = X.T @ (k[:, None] * X)
            if d == 0 or abs(np.linalg.det(A) / np.prod(np.diag(A))) > 1e-11:
                break
            d -= 1
        used[i] = d
        if d < 0:
            continue
        conditioning[i] = abs(np.linalg.det(A)) / A[0, 0] ** (d + 1)  # ~ spread of u in the window
        beta = np.linalg.solve(A, X.T @ (k * y))
        est[i] = beta[0]
        if d >= 1:
            slope[i] = beta[1] / h
    return est, slope, used, conditioning
