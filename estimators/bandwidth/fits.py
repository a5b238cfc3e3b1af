"""Data-point quantities of one candidate bandwidth, and the exact scorer that computes them."""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from ..kernels import Kernel
from ..local_poly import LocalPolynomial
from ..sample import SortedSample
from .groups import TieGroups

#: binned scoring: nodes per bandwidth at which scores are trusted as they are
BINNED_NODES_PER_BANDWIDTH = 16
#: binned scoring with r nodes per bandwidth: relative score error at most this / r**2
#: (measured: 0.04 to 0.15 for the binnable kernels at r = 2 to 32, degrees 0 to 2)
BINNED_ERROR_CONSTANT = 0.25


class CandidateFit:
    """Data-point quantities of one candidate.

    ``rss`` is ``sum wt_i (y_i - yhat_i)^2`` (rescaled weights); ``df`` the
    trace of the smoother matrix; ``at_groups()`` returns the fitted value
    (centred) and the summed leverage ``sum_{j in g} L_gj`` at every distinct x,
    ``at_groups(probe=True)`` the same at the probe groups only.
    """

    def __init__(
        self,
        rss: float,
        df: float,
        at_groups: Callable[[np.ndarray | None], tuple[np.ndarray, np.ndarray]],
        nodes_per_bandwidth: float = math.inf,
    ) -> None:
        self.rss = rss
        self.df = df
        self._at_groups = at_groups
        self._cache: dict[bool, tuple[np.ndarray, np.ndarray]] = {}
        self.nodes_per_bandwidth = nodes_per_bandwidth

    @property
    def coarse(self) -> bool:
        """Binned on a grid with fewer than :data:`BINNED_NODES_PER_BANDWIDTH` nodes per bandwidth."""
        return self.nodes_per_bandwidth < BINNED_NODES_PER_BANDWIDTH

    def error_bound(self, selector: str, score: float) -> float:
        """Bound on the binning error of a coarse candidate's score (0 otherwise)."""
        if not self.coarse:
            return 0.0
        rel = BINNED_ERROR_CONSTANT / self.nodes_per_bandwidth**2
        return rel if selector == "aicc" else rel * abs(score)

    def at_groups(self, probe: bool = False, index: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        if probe not in self._cache:
            self._cache[probe] = self._at_groups(index if probe else None)
        return self._cache[probe]


def _take(fitted: np.ndarray, lev: np.ndarray, idx: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
    return (fitted, lev) if idx is None else (fitted[idx], lev[idx])


class ExactScorer:
    """Exact fits with the core's fast sums, evaluated once per distinct x."""

    name = "exact"

    def __init__(self, sample: SortedSample, groups: TieGroups, kernel: Kernel, degree: int) -> None:
        self.sample, self.groups, self.kernel, self.degree = sample, groups, kernel, degree
        self.k0 = kernel.at_zero

    def evaluate(self, h: float) -> CandidateFit:
        g = self.groups
        sol = LocalPolynomial(self.sample, self.kernel, self.degree, h, engine="exact").solve(g.x)
        fitted = sol.beta[:, 0]
        lev = self.k0 * sol.inv[:, 0, 0] * g.W
        if not (np.all(np.isfinite(fitted)) and np.all(np.isfinite(lev))):
            return CandidateFit(math.nan, math.nan, lambda idx: _take(fitted, lev, idx))
        rss = float(np.sum(g.wss) + np.sum(g.Wt * (g.ybar - fitted) ** 2))
        return CandidateFit(rss, float(np.sum(lev)), lambda idx: _take(fitted, lev, idx))
