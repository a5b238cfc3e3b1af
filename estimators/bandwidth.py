"""Automatic bandwidth selection: the candidate grid, five selectors, two rules, and the evidence.

Selectors
---------
``gcv``
    Generalised cross-validation (Craven & Wahba 1979),
    ``GCV(h) = n^-1 sum_i w_i r_i^2 / (1 - tr L / n)^2``.
``loocv``
    Exact leave-one-out cross-validation through the diagonal of the smoother
    matrix, without refitting. With tied ``x`` values a whole *group* of points
    sharing one ``x`` is left out together (see :func:`_loocv_losses`): plain
    leave-one-out would let the tied partners of a point predict it and so
    favour tiny bandwidths.
``aicc``
    Improved AIC (Hurvich, Simonoff & Tsai 1998),
    ``log sigma^2 + 1 + 2 (tr L + 1) / (n - tr L - 2)``.
``plugin``
    Direct plug-in (Ruppert, Sheather & Wand 1995), see :func:`_plugin`.
``rule_of_thumb``
    Normal reference rule on the spread of ``x`` (Silverman 1986, eq. 3.31),
    carried to the kernel by canonical scaling (Marron & Nolan 1988).

Rules
-----
``min`` takes the best-scoring candidate. ``one_se`` takes the largest
bandwidth whose score is within one standard error of the minimum (Breiman,
Friedman, Olshen & Stone 1984, Section 3.4.3; Hastie, Tibshirani & Friedman
2009, Section 7.10). The standard error comes from the per-point losses of the
best candidate, grouped by distinct ``x`` (see :func:`_score_se`).

Weights
-------
Weights are relative precisions (``Var(y_i) = sigma^2 / w_i``). Scores use the
weights rescaled to mean 1 over the points that carry weight, and ``n`` is the
number of those points, so multiplying all weights by a constant changes
nothing.

Candidates
----------
A geometric grid (default 40) from the smallest bandwidth at which every
window at a data point holds enough distinct x values for the degree
(:func:`well_posed_minimum`) to half the x range; the caller may set the
minimum, the maximum and the count.

Scoring and large samples
-------------------------
The data are sorted once (:class:`estimators.local_poly.SortedSample`). From
1000 points on (for the gaussian kernel from the start), ``gcv``, ``aicc`` and
``loocv`` score the candidates on linearly binned data (:class:`_BinnedScorer`):
the data are binned once, ``O(n)``, and each candidate then costs
``O(M log M)`` on a grid of ``2049 <= M <= 2**18 + 1`` nodes with at least 16
nodes per bandwidth. Measured against the exact sums
(``tests/estimators/test_bandwidth.py``): relative score errors below ``3e-3``
at the smallest candidates (windows of two or three points), below ``1e-4``
around the minimum, and the binned choice never costs more than ``1e-4`` of
the exact minimum score, while the score's own standard error is about
``3e-2`` at ``n = 3000``. For large samples the default smallest candidate is
therefore at least 16 nodes of the finest grid (``x range / 16384``);
smaller candidates (set ``bandwidth_min``) are scored on the finest grid with
an error bound and refitted exactly when they come near the minimum, and
binned ``loocv`` candidates with leverages above 0.9 are refitted exactly.
The uniform and triangular kernels have a jump or a kink at ``u = 0``, where
every point sits in its own window, which makes binning errors first order,
so they are always scored exactly. :func:`estimators.fit` refits exactly at
the chosen bandwidth.

Cautions
--------
``selection_at_grid_edge`` (the best or chosen candidate is the first or last,
or a formula value was clipped), ``flat_selection_score`` (see
:func:`_flat_caution`), ``implausibly_rough`` (effective degrees of freedom
above 25% of the distinct x values, or the curve changing direction at more
than 25% of them), ``unscored_candidates``, ``sparse_design`` (the default
maximum had to exceed half the x range) and ``reference_rule`` (the rule of
thumb ignores y).

References
----------
.. [1] Craven, P. and Wahba, G. (1979). Smoothing noisy data with spline
   functions. *Numer. Math.* 31, 377-403.
.. [2] Hurvich, C. M., Simonoff, J. S. and Tsai, C.-L. (1998). Smoothing
   parameter selection in nonparametric regression using an improved Akaike
   information criterion. *J. R. Statist. Soc. B* 60, 271-293.
.. [3] Ruppert, D., Sheather, S. J. and Wand, M. P. (1995). An effective
   bandwidth selector for local least squares regression. *J. Amer. Statist.
   Assoc.* 90, 1257-1270.
.. [4] Silverman, B. W. (1986). *Density Estimation for Statistics and Data
   Analysis*. Chapman & Hall. Section 3.4.2.
.. [5] Marron, J. S. and Nolan, D. (1988). Canonical kernels for density
   estimation. *Statist. Probab. Lett.* 7, 195-199.
.. [6] Breiman, L., Friedman, J. H., Olshen, R. A. and Stone, C. J. (1984).
   *Classification and Regression Trees*. Wadsworth.
.. [7] Hastie, T., Tibshirani, R. and Friedman, J. (2009). *The Elements of
   Statistical Learning*, 2nd ed. Springer.
.. [8] Fan, J. and Gijbels, I. (1996). *Local Polynomial Modelling and Its
   Applications*. Chapman & Hall. Theorem 3.1 (equivalent kernels).
.. [9] Gasser, T., Sroka, L. and Jennen-Steinmetz, C. (1986). Residual
   variance and residual pattern in nonlinear regression. *Biometrika* 73,
   625-633.
.. [10] Wand, M. P. (1994). Fast computation of multivariate kernel
   estimators. *J. Comput. Graph. Statist.* 3, 433-445 (linear binning).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any, Callable

import numpy as np
from scipy import fft as sfft
from scipy import integrate

from .cautions import Caution
from .kernels import KERNELS, Kernel, convert_bandwidth, get_kernel
from .local_poly import Smoother, SortedSample, validate_sample
from .sums import GAUSSIAN_CUTOFF

__all__ = [
    "Selection",
    "select_bandwidth",
    "select_for_sample",
    "candidate_grid",
    "well_posed_minimum",
    "SELECTORS",
    "RULES",
    "SCORINGS",
]

SELECTORS = ("loocv", "gcv", "aicc", "plugin", "rule_of_thumb")
RULES = ("min", "one_se")
SCORINGS = ("auto", "exact", "binned")
SCORED_SELECTORS = ("loocv", "gcv", "aicc")

MAX_CANDIDATES = 1000
#: the default smallest bandwidth is this factor times the distance that puts enough distinct
#: x values in every window (the farthest needed neighbour gets K(0.8))
WELL_POSED_MARGIN = 1.25
#: binned scoring: nodes per bandwidth at which scores are trusted as they are
BINNED_NODES_PER_BANDWIDTH = 16
#: binned scoring: fewest nodes in any grid (bounds the linear-interpolation error at large bandwidths)
BINNED_MIN_NODES = 2049
#: binned scoring: most nodes in the finest grid
BINNED_MAX_NODES = 2**18 + 1
#: binned scoring: sample size from which it is used for compact kernels
BINNED_SCORING_MIN_N = 1000
#: binned scoring with r nodes per bandwidth: relative score error at most this / r**2
#: (measured: 0.04 to 0.15 for the binnable kernels at r = 2 to 32, degrees 0 to 2)
BINNED_ERROR_CONSTANT = 0.25
#: binned loocv: candidates where some tie group has a larger leverage are refitted exactly
LOOCV_BINNED_MAX_LEVERAGE = 0.9
#: the score curve is "flat" when the candidates within one paired SE of the best span this bandwidth ratio
FLAT_BANDWIDTH_RATIO = 5.0
#: standard errors and the turn count use at most this many evenly spaced tie groups
PROBE_GROUPS = 20000
#: steps of the fitted curve below this fraction of the spread of y do not count as turns
TURN_TOLERANCE = 1e-6
#: "implausibly rough": effective df above this fraction of the distinct x values ...
ROUGH_DF_FRACTION = 0.25
#: ... or the fitted curve turning (slope changing sign) at more than this fraction of them
ROUGH_TURN_FRACTION = 0.25
#: plug-in: share of the x range left out at each end by the weight function
PLUGIN_TRIM = 0.05
#: plug-in: most blocks of the polynomial pilot
PLUGIN_MAX_BLOCKS = 25
#: plug-in: block counts tried by Mallows' Cp
PLUGIN_BLOCK_COUNTS = (1, 2, 3, 4, 5, 6, 8, 10, 12, 15, 20, 25)
_SINGULAR = 1e-10
#: scores within this fraction of the best count as equal (the smoothest of them is chosen)
_TIE = 1e-12


@dataclass
class Selection:
    """Record of an automatic bandwidth choice: the evidence and the cautions.

    Attributes
    ----------
    selector, rule : str
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
        curvature functional, pilot bandwidth, spread of x, ...).
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


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------


def _check_choice(name: str, value: Any, allowed: tuple[str, ...]) -> str:
    if not isinstance(value, str) or value not in allowed:
        raise ValueError(f"unknown {name} {value!r}; choose one of {', '.join(allowed)}")
    return value


def _check_degree(degree: Any) -> int:
    if isinstance(degree, bool) or not isinstance(degree, (int, np.integer)) or degree not in (0, 1, 2):
        raise ValueError(f"degree must be 0, 1 or 2, got {degree!r}")
    return int(degree)


def _check_count(count: Any) -> int:
    if isinstance(count, bool) or not isinstance(count, (int, np.integer)):
        raise ValueError(f"candidates must be a whole number of candidate bandwidths, got {count!r}")
    if not 2 <= int(count) <= MAX_CANDIDATES:
        raise ValueError(f"candidates must be between 2 and {MAX_CANDIDATES}, got {int(count)}")
    return int(count)


def _check_bound(name: str, value: Any) -> float | None:
    if value is None:
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a positive number, got {value!r}") from None
    if not math.isfinite(v) or v <= 0:
        raise ValueError(f"{name} must be a positive finite number, got {value!r}")
    return v


# ---------------------------------------------------------------------------
# tie groups
# ---------------------------------------------------------------------------


class _Groups:
    """The sources grouped by distinct ``x``, with the sums every score needs.

    ``W`` raw weight per group; ``Wt`` weight rescaled to mean 1 per point;
    ``ybar`` weighted group mean of ``y - y_centre``; ``wss`` within-group
    weighted sum of squares (rescaled weights), so that
    ``sum_{i in g} wt_i (y_i - f)^2 = wss_g + Wt_g (ybar_g - f)^2`` exactly.
    """

    def __init__(self, sample: SortedSample) -> None:
        xs, ws, yc = sample.xs, sample.ws, sample.yc
        new = np.empty(xs.size, dtype=bool)
        new[0] = True
        new[1:] = xs[1:] != xs[:-1]
        starts = np.flatnonzero(new)
        gid = np.cumsum(new) - 1
        self.x = xs[starts]
        self.scale = sample.n_used / float(np.sum(ws))
        self.W = np.add.reduceat(ws, starts)
        self.Wt = self.W * self.scale
        self.ybar = np.add.reduceat(ws * yc, starts) / self.W
        dev = yc - self.ybar[gid]
        self.wss = np.add.reduceat(ws * dev * dev, starts) * self.scale
        self.n = sample.n_used
        #: weighted standard deviation of y (for tolerances)
        self.y_scale = math.sqrt(float(np.sum(self.wss) + np.sum(self.Wt * self.ybar**2)) / self.n)
        #: evenly spaced groups on which standard errors and roughness are judged (all when few)
        self.probe = np.unique(np.linspace(0, self.x.size - 1, min(self.x.size, PROBE_GROUPS)).astype(np.int64))

    @property
    def count(self) -> int:
        return int(self.x.size)


# ---------------------------------------------------------------------------
# candidate grid
# ---------------------------------------------------------------------------


def _knn_distances(u: np.ndarray, k: int) -> np.ndarray:
    """For each distinct value ``u_j``: half-width of the narrowest window around it holding ``k`` of them."""
    g = u.size
    best = np.full(g, np.inf)
    for a in range(k):  # window of k consecutive values starting a places left of j
        j = np.arange(a, g - k + a + 1)
        d = np.maximum(u[j] - u[j - a], u[j - a + k - 1] - u[j])
        np.minimum.at(best, j, d)
    return best


def _knn_spread(u: np.ndarray, k: int) -> float:
    """Largest :func:`_knn_distances`: the window half-width that holds ``k`` distinct values everywhere."""
    return float(np.max(_knn_distances(u, k)))


def well_posed_minimum(sample: SortedSample, kernel: Kernel, degree: int, leave_out: bool = False) -> float:
    """Smallest default candidate: every window at a data point holds enough distinct x values.

    Enough means ``degree + 1`` (the local fit of that degree is defined), or
    ``degree + 2`` with ``leave_out`` (for ``loocv``: the fit stays defined when
    the point's own tie group is left out; not needed for the gaussian kernel,
    whose windows never empty). The distance that achieves this at
    every distinct x is multiplied by :data:`WELL_POSED_MARGIN`, so the farthest
    needed neighbour sits at ``|u| <= 0.8`` rather than on the edge of the
    window. For the gaussian kernel (unbounded support) the compact-kernel
    value is carried over from the Epanechnikov kernel by canonical scaling.

    Raises
    ------
    ValueError
        Fewer distinct x values than that.
    """
    u = np.unique(sample.xs)
    k = degree + 2 if leave_out and math.isfinite(kernel.support) else max(degree + 1, 2)
    if u.size < k:
        raise ValueError(
            f"automatic selection for degree {degree} needs at least {k} distinct x values, got {u.size}; "
            "use a lower degree or give the bandwidth"
        )
    h = WELL_POSED_MARGIN * _knn_spread(u, k)
    if not math.isfinite(kernel.support):
        h = convert_bandwidth(h, "epanechnikov", kernel.name)
    return h


def candidate_grid(
    sample: SortedSample,
    kernel: Kernel,
    degree: int,
    count: int = 40,
    bandwidth_min: float | None = None,
    bandwidth_max: float | None = None,
    leave_out: bool = False,
    floor: float = 0.0,
) -> tuple[np.ndarray, list[Caution]]:
    """Geometric grid of candidate bandwidths and any caution about it.

    Default range: from :func:`well_posed_minimum` (with ``leave_out`` for
    ``loocv``), but at least ``floor``, to half the x range. When
    the design is so uneven that the minimum exceeds half the range, the
    maximum becomes four times the minimum (and a ``sparse_design`` caution
    says so).
    """
    count = _check_count(count)
    lo_given = _check_bound("bandwidth_min", bandwidth_min)
    hi_given = _check_bound("bandwidth_max", bandwidth_max)
    span = float(sample.xs[-1] - sample.xs[0])
    if span <= 0:
        raise ValueError("all x values are equal: a bandwidth cannot be selected")
    cautions: list[Caution] = []
    lo_default = max(well_posed_minimum(sample, kernel, degree, leave_out), floor) if lo_given is None else None
    lo = lo_given if lo_given is not None else float(lo_default)  # type: ignore[arg-type]
    if hi_given is not None:
        hi = hi_given
    else:
        hi = span / 2.0
        if lo_given is None and lo >= hi / 2.0:
            hi = 4.0 * lo
            cautions.append(
                Caution(
                    "sparse_design",
                    f"the x values are so uneven that a window holding enough distinct x values "
                    f"everywhere needs a bandwidth of {lo:.4g} or more (x range {span:.4g}); "
                    "the candidates reach beyond half the x range",
                )
            )
    for name, value in (("bandwidth_min", lo_given), ("bandwidth_max", hi_given)):
        if value is not None and not (span / value * 1e-9 < 1e12 and value < 1e6 * span):
            raise ValueError(
                f"{name} ({value:.6g}) is out of proportion to the x range ({span:.6g}); "
                "choose candidates between the data spacing and the x range"
            )
    if not lo < hi:
        if lo_given is not None and hi_given is not None:
            raise ValueError(f"bandwidth_min ({lo:.6g}) must be below bandwidth_max ({hi:.6g})")
        if lo_given is not None:
            raise ValueError(
                f"bandwidth_min ({lo:.6g}) must be below bandwidth_max, which defaults to half the x range ({hi:.6g})"
            )
        raise ValueError(
            f"bandwidth_max ({hi:.6g}) must be above bandwidth_min, which defaults to {lo:.6g}: the smallest "
            f"bandwidth that keeps every window well posed for degree {degree}"
        )
    return np.geomspace(lo, hi, count), cautions


# ---------------------------------------------------------------------------
# candidate fits: exact and binned
# ---------------------------------------------------------------------------


class _Fit:
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


class _ExactScorer:
    """Exact fits with the core's fast sums, evaluated once per distinct x."""

    name = "exact"

    def __init__(self, sample: SortedSample, groups: _Groups, kernel: Kernel, degree: int) -> None:
        self.sample, self.groups, self.kernel, self.degree = sample, groups, kernel, degree
        self.k0 = kernel.at_zero

    def evaluate(self, h: float) -> _Fit:
        g = self.groups
        sol = Smoother(self.sample, self.kernel, self.degree, h, engine="exact").solve(g.x)
        fitted = sol.beta[:, 0]
        lev = self.k0 * sol.inv[:, 0, 0] * g.W
        if not (np.all(np.isfinite(fitted)) and np.all(np.isfinite(lev))):
            return _Fit(math.nan, math.nan, lambda idx: _take(fitted, lev, idx))
        rss = float(np.sum(g.wss) + np.sum(g.Wt * (g.ybar - fitted) ** 2))
        return _Fit(rss, float(np.sum(lev)), lambda idx: _take(fitted, lev, idx))


class _Level:
    """Linearly binned data on a regular grid, with the exact mass matrix of the hat functions.

    ``c_j = sum w_i phi_j(x_i)``, ``d_j = sum w_i yc_i phi_j(x_i)``,
    ``a_j = sum w_i phi_j(x_i)^2``, ``b_j = sum w_i phi_j(x_i) phi_{j+1}(x_i)``.
    For grid values ``G`` and the piecewise linear curve through them,
    ``sum w_i (yc_i - G(x_i))^2 = wyy - 2 d.G + a.G^2 + 2 b.(G_j G_{j+1})``
    holds exactly.
    """

    def __init__(self, step: float, c: np.ndarray, d: np.ndarray, a: np.ndarray, b: np.ndarray) -> None:
        self.step, self.c, self.d, self.a, self.b = step, c, d, a, b
        self._spectra: dict[int, np.ndarray] = {}

    @classmethod
    def bin(cls, xs: np.ndarray, ws: np.ndarray, yc: np.ndarray, nodes: int) -> "_Level":
        step = float(xs[-1] - xs[0]) / (nodes - 1)
        pos = (xs - xs[0]) / step
        j = np.minimum(pos.astype(np.int64), nodes - 2)
        th = pos - j
        w1 = ws * th
        w0 = ws - w1
        jj = np.concatenate([j, j + 1])

        def spread(v0: np.ndarray, v1: np.ndarray) -> np.ndarray:
            return np.bincount(jj, np.concatenate([v0, v1]), nodes)

        return cls(
            step,
            spread(w0, w1),
            spread(w0 * yc, w1 * yc),
            spread(w0 * (1.0 - th), w1 * th),
            np.bincount(j, w0 * th, nodes - 1),
        )

    def coarsen(self) -> "_Level":
        """The same data binned at twice the spacing (exact: coarse hats are sums of fine ones)."""
        c, d, a, b = self.c, self.d, self.a, self.b

        def restrict(v: np.ndarray) -> np.ndarray:
            out = v[0::2].copy()
            out[:-1] += 0.5 * v[1::2]
            out[1:] += 0.5 * v[1::2]
            return out

        ac = a[0::2].copy()
        ac[:-1] += 0.25 * a[1::2] + b[0::2]
        ac[1:] += 0.25 * a[1::2] + b[1::2]
        bc = 0.25 * a[1::2] + 0.5 * b[0::2] + 0.5 * b[1::2]
        return _Level(2.0 * self.step, restrict(c), restrict(d), ac, bc)

    def spectra(self, length: int) -> np.ndarray:
        if length not in self._spectra:
            self._spectra[length] = sfft.rfft(np.stack([self.c, self.d]), length, axis=1)
        return self._spectra[length]


def _grid_solve(smom: np.ndarray, tmom: np.ndarray, degree: int) -> tuple[np.ndarray, np.ndarray]:
    """Local fits at grid nodes from moments ``S_k`` (rows) and ``T_k``.

    Returns the intercept ``G`` and ``H = [S^-1]_00``; zero where the window is
    empty. Where the local system is numerically singular the degree drops.
    """
    m = smom.shape[1]
    fitted = np.zeros(m)
    h00 = np.zeros(m)
    s0 = smom[0]
    live = s0 > 1e-12 * float(np.max(s0))
    deg = np.where(live, degree, -1)
    with np.errstate(divide="ignore", invalid="ignore"):
        if degree >= 2:
            a, b, c, d, e = (smom[k] for k in range(5))
            c00 = c * e - d * d
            c01 = -(b * e - c * d)
            c02 = b * d - c * c
            det2 = a * c00 + b * c01 + c * c02
            weak = (deg == 2) & ~(np.abs(det2) > _SINGULAR * np.abs(a * c * e))
            deg[weak] = 1
            at = deg == 2
            fitted[at] = ((c00 * tmom[0] + c01 * tmom[1] + c02 * tmom[2]) / det2)[at]
            h00[at] = (c00 / det2)[at]
        if degree >= 1:
            a, b, c = smom[0], smom[1], smom[2]
            det1 = a * c - b * b
            weak = (deg == 1) & ~(np.abs(det1) > _SINGULAR * np.abs(a * c))
            deg[weak] = 0
            at = deg == 1
            fitted[at] = ((c * tmom[0] - b * tmom[1]) / det1)[at]
            h00[at] = (c / det1)[at]
        at = deg == 0
        fitted[at] = (tmom[0] / s0)[at]
        h00[at] = (1.0 / s0)[at]
    return fitted, h00


class _BinnedScorer:
    """Scores on linearly binned data (Wand 1994) with exact accounting of the interpolation.

    The data are binned once onto the finest grid (``O(n)``); coarser grids
    are derived exactly by restriction. A candidate ``h`` is fitted at the
    nodes of the coarsest grid with at least
    :data:`BINNED_NODES_PER_BANDWIDTH` nodes per bandwidth (moment sums by FFT
    convolution with the sampled kernel), and its residual sum of squares and
    trace are then exact for the piecewise linear curve through the node
    values (see :class:`_Level`). Candidates with fewer nodes per bandwidth
    than that (only when the finest grid is capped at
    :data:`BINNED_MAX_NODES`) are marked ``coarse``; fewer than 1 node per
    bandwidth is not scored here at all.
    """

    name = "binned"

    def __init__(
        self, sample: SortedSample, groups: _Groups, kernel: Kernel, degree: int, h_lo: float, h_hi: float
    ) -> None:
        self.sample, self.groups, self.kernel, self.degree = sample, groups, kernel, degree
        self.k0 = kernel.at_zero
        self.radius = kernel.support if math.isfinite(kernel.support) else GAUSSIAN_CUTOFF
        xs = sample.xs
        span = float(xs[-1] - xs[0])
        r = BINNED_NODES_PER_BANDWIDTH
        finest = min(max(h_lo / r, span / (BINNED_MAX_NODES - 1)), span / (BINNED_MIN_NODES - 1))
        coarsest = max(min(h_hi / r, span / (BINNED_MIN_NODES - 1)), finest)
        self.top = int(math.floor(math.log2(coarsest / finest)))
        per_top = max(2, int(math.ceil(span / (finest * 2**self.top))))
        nodes = per_top * 2**self.top + 1
        self.x0 = float(xs[0])
        self.levels = [_Level.bin(xs, sample.ws, sample.yc, nodes)]
        self.wyy = float(np.sum(sample.ws * sample.yc**2))
        self.group_pos = (groups.x - self.x0) / self.levels[0].step

    def level(self, h: float) -> tuple[int, _Level]:
        base = self.levels[0].step
        ell = int(math.floor(math.log2(max(h / (BINNED_NODES_PER_BANDWIDTH * base), 1.0))))
        ell = min(ell, self.top)
        while len(self.levels) <= ell:
            self.levels.append(self.levels[-1].coarsen())
        return ell, self.levels[ell]

    def nodes_per_bandwidth(self, h: float) -> float:
        return h / self.level(h)[1].step

    def evaluate(self, h: float) -> _Fit:
        ell, lev = self.level(h)
        p = self.degree
        m = lev.c.size
        reach = min(int(math.ceil(self.radius * h / lev.step)), m - 1)
        lags = np.arange(-reach, reach + 1) * (lev.step / h)
        kv = self.kernel(lags)
        filt = np.empty((2 * p + 1, lags.size))
        filt[0] = kv
        for k in range(1, 2 * p + 1):
            filt[k] = filt[k - 1] * lags
        # one transform length per grid (the widest window it serves), so the data spectra are reused;
        # a circular convolution of length >= m + reach leaves the outputs reach .. reach + m - 1 unaliased
        widest = m - 1 if ell == self.top else min(m - 1, int(math.ceil(self.radius * 2 * BINNED_NODES_PER_BANDWIDTH)) + 1)
        length = sfft.next_fast_len(m + max(widest, reach), real=True)
        spec_f = sfft.rfft(filt, length, axis=1)
        spec_d = lev.spectra(length)
        prods = np.concatenate([spec_d[0][None, :] * spec_f, spec_d[1][None, :] * spec_f[: p + 1]])
        conv = sfft.irfft(prods, length, axis=1)[:, reach : reach + m]
        # conv gives sum c K(-u) (-u)^k: flip the odd moments back
        sign = np.array([(-1.0) ** k for k in range(2 * p + 1)] + [(-1.0) ** k for k in range(p + 1)])
        conv *= sign[:, None]
        fitted, h00 = _grid_solve(conv[: 2 * p + 1], conv[2 * p + 1 :], p)
        # einsum, not BLAS: threaded BLAS dot products only add contention at these sizes
        rss_raw = (
            self.wyy
            - 2.0 * np.einsum("i,i->", lev.d, fitted)
            + np.einsum("i,i,i->", lev.a, fitted, fitted)
            + 2.0 * np.einsum("i,i,i->", lev.b, fitted[:-1], fitted[1:])
        )
        rss = max(float(rss_raw), 0.0) * self.groups.scale
        df = self.k0 * float(np.einsum("i,i->", lev.c, h00))
        pos = self.group_pos / 2**ell

        def at_groups(idx: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
            at = pos if idx is None else pos[idx]
            j = np.minimum(at.astype(np.int64), m - 2)
            th = at - j
            f = (1.0 - th) * fitted[j] + th * fitted[j + 1]
            hh = (1.0 - th) * h00[j] + th * h00[j + 1]
            return f, self.k0 * hh * (self.groups.W if idx is None else self.groups.W[idx])

        return _Fit(rss, df, at_groups, h / lev.step)


def _binnable(kernel: Kernel) -> bool:
    """Kernels smooth at ``u = 0`` (the uniform jumps there, the triangular has a kink)."""
    return kernel.name not in ("uniform", "triangular")


def _resolve_scoring(scoring: str, kernel: Kernel, sample: SortedSample, selector: str) -> str:
    """``auto``: binned from :data:`BINNED_SCORING_MIN_N` points, and for the gaussian kernel (whose
    exact sums are slow for small samples too) from the start; never for the uniform and
    triangular kernels. (``selector`` is accepted for symmetry; binned ``loocv`` guards itself
    against large leverages, see :func:`_score_candidates`.)
    """
    if scoring != "auto":
        if scoring == "binned" and not _binnable(kernel):
            raise ValueError(f"binned scoring is not accurate for the {kernel.name} kernel; use exact")
        return scoring
    if not _binnable(kernel):
        return "exact"
    if sample.n_used >= BINNED_SCORING_MIN_N or not math.isfinite(kernel.support):
        return "binned"
    return "exact"


# ---------------------------------------------------------------------------
# criteria
# ---------------------------------------------------------------------------


def _loocv_losses(fit: _Fit, groups: _Groups, probe: bool = False) -> np.ndarray:
    """Per-group leave-one-group-out losses (at the probe groups with ``probe``).

    For the group ``g`` of points sharing ``x_g`` the local design rows at
    ``x_g`` are identical (``u = 0``), so deleting the whole group is a rank-one
    update of the local moment matrix and the Sherman-Morrison formula gives
    the exact deleted fit
    ``yhat_{-g} = (yhat_g - sum_{j in g} L_gj y_j) / (1 - sum_{j in g} L_gj)``
    with ``L_gj = w_j K(0) [S(x_g)^-1]_00``. Hence
    ``ybar_g - yhat_{-g} = (ybar_g - yhat_g) / (1 - sum_j L_gj)``.
    Undefined (NaN) when ``1 - sum_j L_gj`` vanishes: the group's own points
    determine its fit, e.g. fewer than ``degree + 1`` other distinct x values
    in the window.
    """
    idx = groups.probe if probe else slice(None)
    fitted, lev = fit.at_groups(probe, groups.probe)
    denom = 1.0 - lev
    if not (np.all(np.isfinite(fitted)) and np.all(denom > 1e-9)):
        return np.full(fitted.size, np.nan)
    return groups.wss[idx] + groups.Wt[idx] * ((groups.ybar[idx] - fitted) / denom) ** 2


def _score(selector: str, fit: _Fit, groups: _Groups) -> float:
    n = groups.n
    if not (math.isfinite(fit.rss) and math.isfinite(fit.df)):
        return math.nan
    if selector == "gcv":
        return fit.rss / n / (1.0 - fit.df / n) ** 2 if fit.df < n else math.nan
    if selector == "aicc":
        if n - fit.df - 2.0 <= 0 or fit.rss <= 0:
            return math.nan
        return math.log(fit.rss / n) + 1.0 + 2.0 * (fit.df + 1.0) / (n - fit.df - 2.0)
    losses = _loocv_losses(fit, groups)
    return float(np.sum(losses)) / n if np.all(np.isfinite(losses)) else math.nan


def _unit_losses(selector: str, fit: _Fit, groups: _Groups) -> np.ndarray:
    """Per-unit contributions ``l_g`` with ``score ~ n^-1 sum_g l_g`` (up to a constant), at the probe groups.

    The units are the tie groups (distinct x values; single points when there
    are no ties), because points that share an x share their fitted value.
    ``loocv``: the leave-one-group-out losses. ``gcv``:
    ``(wss_g + Wt_g (ybar_g - yhat_g)^2) / (1 - tr L / n)^2``, the inflation
    factor treated as fixed. ``aicc``: the delta method on the logarithm,
    ``(wss_g + Wt_g (ybar_g - yhat_g)^2) / s2`` with ``s2 = RSS / n``, the
    penalty treated as fixed. With more than :data:`PROBE_GROUPS` groups only
    evenly spaced probe groups are used (enough for a standard error).
    """
    n = groups.n
    if selector == "loocv":
        return _loocv_losses(fit, groups, probe=True)
    idx = groups.probe
    fitted, _ = fit.at_groups(True, idx)
    losses = groups.wss[idx] + groups.Wt[idx] * (groups.ybar[idx] - fitted) ** 2
    if selector == "gcv":
        return losses / (1.0 - fit.df / n) ** 2
    s2 = fit.rss / n
    return losses / s2 if s2 > 0 else np.full(losses.size, np.nan)


def _se_of_sum(values: np.ndarray, groups: _Groups) -> float:
    """Standard error of ``n^-1 sum_g v_g`` over all ``G`` groups, the probe values a sample of them.

    ``sqrt(G) sd(v) / n``.
    """
    if values.size < 2 or not np.all(np.isfinite(values)):
        return math.nan
    return math.sqrt(groups.count) * float(np.std(values, ddof=1)) / groups.n


def _score_se(selector: str, fit: _Fit, groups: _Groups) -> float:
    """Standard error of a candidate's score from its per-unit losses (:func:`_unit_losses`)."""
    return _se_of_sum(_unit_losses(selector, fit, groups), groups)


def _paired_se(selector: str, fit: _Fit, best: _Fit, groups: _Groups) -> float:
    """Standard error of the score difference between a candidate and the best, from paired unit losses."""
    return _se_of_sum(_unit_losses(selector, fit, groups) - _unit_losses(selector, best, groups), groups)


def _indistinguishable_range(
    selector: str, grid: np.ndarray, scores: np.ndarray, fits: dict[int, _Fit], best: int, groups: _Groups
) -> tuple[int, int]:
    """Contiguous run of candidates around the best whose score exceeds the best by at most one paired SE."""

    def close(i: int) -> bool:
        if i not in fits or not np.isfinite(scores[i]):
            return False
        se = _paired_se(selector, fits[i], fits[best], groups)
        return math.isfinite(se) and scores[i] - scores[best] <= se

    lo = best
    while lo > 0 and close(lo - 1):
        lo -= 1
    hi = best
    while hi < grid.size - 1 and close(hi + 1):
        hi += 1
    return lo, hi


# ---------------------------------------------------------------------------
# plug-in
# ---------------------------------------------------------------------------


def _kernel_moment(kernel: Kernel, k: int, power: int = 1) -> float:
    return _kernel_moment_cached(kernel.name, k, power)


@lru_cache(maxsize=None)
def _kernel_moment_cached(name: str, k: int, power: int) -> float:
    kern = KERNELS[name]
    if k % 2 == 1:
        return 0.0
    lim = kern.support if math.isfinite(kern.support) else math.inf

    def f(u: float) -> float:
        return u**k * float(kern(np.array([u]))[0]) ** power

    val, _ = integrate.quad(f, 0.0, lim, limit=200, epsabs=0.0, epsrel=1e-12)
    return 2.0 * val


@lru_cache(maxsize=None)
def _equivalent_kernel(name: str, order: int, nu: int) -> tuple[float, float]:
    """``R(K*_nu)`` and ``B = int u^(order+1) K*_nu(u) du`` for a local polynomial of ``order``.

    ``K*_nu(u) = e_nu^T S^-1 (1, u, ..., u^order)^T K(u)`` with ``S_jl = mu_{j+l}(K)``
    (Fan & Gijbels 1996, Section 3.2.2).
    """
    kern = KERNELS[name]
    mom = np.array([_kernel_moment(kern, k) for k in range(2 * order + 2)])
    smat = np.array([[mom[j + l] for l in range(order + 1)] for j in range(order + 1)])
    coef = np.linalg.solve(smat, np.eye(order + 1)[nu])
    mom2 = np.array([_kernel_moment(kern, k, power=2) for k in range(2 * order + 1)])
    rough = float(sum(coef[j] * coef[l] * mom2[j + l] for j in range(order + 1) for l in range(order + 1)))
    bias = float(sum(coef[l] * mom[l + order + 1] for l in range(order + 1)))
    return rough, bias


def _blocked_polynomial(
    xs: np.ndarray, yc: np.ndarray, wt: np.ndarray, q: int, inside: np.ndarray
) -> tuple[float, float, int]:
    """Blocked polynomial pilot of degree ``q + 2`` (Ruppert, Sheather & Wand 1995, Section 4).

    The sorted data are cut into ``N`` blocks of equal size and a polynomial is
    fitted by weighted least squares in each; ``N`` is chosen by Mallows' Cp
    among :data:`PLUGIN_BLOCK_COUNTS` up to
    ``N_max = max(min(n // 20, PLUGIN_MAX_BLOCKS), 1)`` (RSW cap ``N_max`` at 5;
    the larger cap lets the pilot follow a curve whose roughness varies along
    x, and Cp still picks few blocks for a smooth one). Each block keeps at
    least twice as many distinct x values as the polynomial has coefficients.
    Returns ``sigma^2``, ``theta_{q,q+2} = n^-1 sum m^(q)(X_i) m^(q+2)(X_i)``
    over the points ``inside`` the weight region, and ``N``.
    """
    n = xs.size
    deg = q + 2
    npar = deg + 1
    if np.unique(xs).size < npar + 1:
        raise ValueError(f"plug-in selection needs at least {npar + 1} distinct x values; use gcv")
    nmax = max(min(n // 20, PLUGIN_MAX_BLOCKS), 1)
    while nmax > 1 and min(np.unique(b).size for b in np.array_split(xs, nmax)) < 2 * npar:
        nmax -= 1
    counts = sorted({c for c in PLUGIN_BLOCK_COUNTS if c < nmax} | {nmax})
    fits: dict[int, tuple[float, np.ndarray, np.ndarray]] = {}
    for nb in counts:
        rss = 0.0
        dq = np.empty(n)
        dq2 = np.empty(n)
        for idx in np.array_split(np.arange(n), nb):
            xb = xs[idx]
            mid = 0.5 * (xb[0] + xb[-1])
            half = max(0.5 * (xb[-1] - xb[0]), np.finfo(float).tiny)
            z = (xb - mid) / half
            coef = np.polynomial.polynomial.polyfit(z, yc[idx], deg, w=np.sqrt(wt[idx]))
            res = yc[idx] - np.polynomial.polynomial.polyval(z, coef)
            rss += float(np.sum(wt[idx] * res * res))
            dq[idx] = np.polynomial.polynomial.polyval(z, np.polynomial.polynomial.polyder(coef, q)) / half**q
            dq2[idx] = np.polynomial.polynomial.polyval(z, np.polynomial.polynomial.polyder(coef, q + 2)) / half ** (q + 2)
        fits[nb] = (rss, dq, dq2)
    dof_max = n - npar * nmax
    ref = fits[nmax][0] / dof_max if dof_max > 0 else math.nan
    if math.isfinite(ref) and ref > 0:
        best = min(fits, key=lambda nb: fits[nb][0] / ref - (n - 2 * npar * nb))
    else:
        best = 1
    rss, dq, dq2 = fits[best]
    sigma2 = rss / max(n - npar * best, 1)
    theta = float(np.sum((dq * dq2)[inside])) / n
    return sigma2, theta, best


def _difference_variance(xs: np.ndarray, yc: np.ndarray, wt: np.ndarray) -> float:
    """Noise variance from pseudo-residuals of neighbouring triples (Gasser, Sroka & Jennen-Steinmetz 1986).

    ``e_i = a_i y_{i-1} + b_i y_{i+1} - y_i`` with ``a_i = (x_{i+1} - x_i) / (x_{i+1} - x_{i-1})``,
    ``b_i = 1 - a_i`` (both 1/2 inside a tie); with precisions ``w``,
    ``Var(e_i) = sigma^2 (a_i^2 / w_{i-1} + b_i^2 / w_{i+1} + 1 / w_i)``.
    """
    if xs.size < 3:
        return math.nan
    x0, x1, x2 = xs[:-2], xs[1:-1], xs[2:]
    gap = x2 - x0
    with np.errstate(divide="ignore", invalid="ignore"):
        a = np.where(gap > 0, (x2 - x1) / gap, 0.5)
    b = 1.0 - a
    e = a * yc[:-2] + b * yc[2:] - yc[1:-1]
    v = a * a / wt[:-2] + b * b / wt[2:] + 1.0 / wt[1:-1]
    return float(np.mean(e * e / v))


def _local_derivatives(
    sample: SortedSample, points: np.ndarray, g: float, order: int, nus: tuple[int, ...]
) -> list[np.ndarray]:
    """``m^(nu)`` at ``points`` for each ``nu`` by one gaussian local polynomial of ``order``, bandwidth ``g``.

    Built on the core's moment sums; the local systems are solved after
    scaling to unit diagonal. NaN where the system is numerically singular.
    """
    pilot = Smoother(sample, KERNELS["gaussian"], 1, g)
    mom = pilot.moments(points, sample.values(), 2 * order)
    idx = np.arange(order + 1)
    smat = mom[:, 0, :][:, idx[:, None] + idx[None, :]]
    rhs = mom[:, 1, : order + 1]
    diag = np.einsum("mii->mi", smat)
    ok = np.all(diag > 0, axis=1)
    scale = np.sqrt(np.where(ok[:, None], diag, 1.0))
    unit = smat / (scale[:, :, None] * scale[:, None, :])
    ok &= np.abs(np.linalg.det(unit)) > 1e-12
    beta = np.full((points.size, order + 1), np.nan)
    if ok.any():
        beta[ok] = np.linalg.solve(unit[ok], (rhs[ok] / scale[ok])[..., None])[..., 0] / scale[ok]
    return [math.factorial(nu) * beta[:, nu] / g**nu for nu in nus]


def _pilot_bandwidth(q: int, theta_mix: float, sigma2: float, region: float, n: int, fallback: float) -> float:
    """AMSE bandwidth for ``theta_qq = n^-1 sum (m^(q)_g(X_i))^2`` with a gaussian local polynomial of order ``q + 1``.

    The leading bias ``2 q! / (q+2)! g^2 B theta_{q,q+2}`` and the variance
    term ``q!^2 R(K*_q) sigma^2 |I| / (n g^(2q+1))`` cancel at
    ``g^(2q+3) = q! (q+2)! R(K*_q) sigma^2 |I| / (2 B |theta_{q,q+2}| n)``
    (RSW 1995, Section 3, for ``q = 2``).
    """
    rough, bias = _equivalent_kernel("gaussian", q + 1, q)
    const = math.factorial(q) * math.factorial(q + 2) * rough / (2.0 * bias)
    if not (math.isfinite(theta_mix) and theta_mix != 0 and sigma2 > 0):
        return fallback
    return float((const * sigma2 * region / (abs(theta_mix) * n)) ** (1.0 / (2 * q + 3)))


def _plugin(sample: SortedSample, kernel: Kernel, degree: int) -> tuple[float, Callable[[np.ndarray], np.ndarray], dict[str, float]]:
    r"""Direct plug-in bandwidth (Ruppert, Sheather & Wand 1995), generalised by the equivalent kernel.

    For a local polynomial of odd order ``P`` the interior AMISE with weight
    function 1 on a region ``I`` is (Fan & Gijbels 1996, Thm 3.1)
    ``h^(2P+2) B^2 theta / ((P+1)!)^2 + R(K*) sigma^2 |I| / (n h)`` with
    ``theta = int_I (m^(P+1))^2 f``, minimised by
    ``h^(2P+3) = ((P+1)!)^2 R(K*) sigma^2 |I| / (2 (P+1) B^2 theta n)``; for
    ``P = 1`` this is RSW's ``[R(K) sigma^2 |I| / (mu2^2 theta22 n)]^(1/5)``.

    * degree 1: ``P = 1``, the published target.
    * degree 0 (Nadaraya-Watson): the degree-1 value. Nadaraya-Watson has the
      same interior variance, but its bias adds ``m' f' / f`` (design) and a
      boundary term that the formula ignores: treat it as a starting point.
    * degree 2: ``P = 3``. In the interior the local quadratic and local cubic
      fits share the equivalent kernel; the quadratic's extra design-bias term
      vanishes for a locally uniform design, which the formula assumes. Needs
      ``theta44``, the integral of the squared fourth derivative.

    Steps, with ``q = P + 1``:

    1. ``sigma^2`` by the difference estimator of Gasser, Sroka &
       Jennen-Steinmetz (1986), used in every step (RSW use blocked-polynomial
       and local linear estimates; the difference estimator does not depend on
       how well a polynomial describes the curve).
    2. ``theta_{q,q+2} = n^-1 sum m^(q) m^(q+2)``. Degree 0 and 1: a *second
       stage* (Wand & Jones 1995, Section 3.6): a blocked polynomial of degree
       6 (blocks by Mallows' Cp, as in RSW Section 4) gives ``theta_46``, which
       sets the pilot bandwidth (below, ``q = 4``) of a gaussian local quintic
       fit whose second and fourth derivatives give ``theta_24``. With RSW's
       single stage (``theta_24`` straight from a blocked quartic) the pilot
       fails on spatially varying curves (the Doppler function: plug-in
       bandwidth 4x too large); the extra stage damps the dependence on the
       polynomial pilot to the power ``1/11``. Degree 2: a single stage,
       ``theta_46`` from the blocked sextic.
    3. Pilot bandwidth ``g`` for ``theta_qq`` (:func:`_pilot_bandwidth`), and
       ``theta_qq = n^-1 sum_I (m^(q)_g(X_i))^2`` from a gaussian local
       polynomial of order ``q + 1`` at up to 10000 evenly ranked data points.
    4. The formula above.

    ``I`` is the central 90% of the x range (the weight function; it keeps the
    erratic boundary derivative estimates out). Weights are rescaled to mean 1
    and used as precisions; the variance term assumes they do not vary
    systematically with ``x``.
    """
    P = 1 if degree <= 1 else 3
    q = P + 1
    xs, yc = sample.xs, sample.yc
    n = sample.n_used
    wt = sample.ws * (n / float(np.sum(sample.ws)))
    span = float(xs[-1] - xs[0])
    a_reg, b_reg = xs[0] + PLUGIN_TRIM * span, xs[-1] - PLUGIN_TRIM * span
    region = b_reg - a_reg
    inside = (xs >= a_reg) & (xs <= b_reg)
    frac = float(np.count_nonzero(inside)) / n
    step = max(1, n // 10000)
    pts = xs[::step]
    pts = pts[(pts >= a_reg) & (pts <= b_reg)]
    distinct = np.unique(xs)

    def floor(order: int) -> float:
        """Pilot bandwidth below which a typical window has too few distinct x for a fit of ``order``.

        A gaussian window reaches about 2.5 bandwidths; points where the local
        system is still singular are left out of the averages.
        """
        k = min(order + 1, distinct.size)
        return float(np.median(_knn_distances(distinct, k))) / 2.5

    def mean_inside(values: np.ndarray) -> float:
        return float(np.nanmean(values)) * frac if np.isfinite(values).any() else math.nan

    sigma2 = _difference_variance(xs, yc, wt)
    _, theta46, blocks = _blocked_polynomial(xs, yc, wt, 4, inside)
    g4 = min(max(_pilot_bandwidth(4, theta46, sigma2, region, n, span / 4.0), floor(5)), span)
    pilot: dict[str, float] = {"noise_variance": sigma2, "pilot_blocks": float(blocks), "order_used": float(P)}
    if q == 2:
        d2, d4 = _local_derivatives(sample, pts, g4, 5, (2, 4))
        theta_mix = mean_inside(d2 * d4)
        pilot.update({"stage1_bandwidth": g4, "theta24": theta_mix})
        g = min(max(_pilot_bandwidth(2, theta_mix, sigma2, region, n, span / 4.0), floor(3)), span)
        (dq,) = _local_derivatives(sample, pts, g, 3, (2,))
    else:
        pilot["theta46"] = theta46
        g = g4
        (dq,) = _local_derivatives(sample, pts, g, 5, (4,))
    theta = mean_inside(dq * dq)
    pilot.update({"pilot_bandwidth": g, "curvature": theta})
    rough, bias = _equivalent_kernel(kernel.name, P, 0)
    fact = math.factorial(P + 1)
    if theta > 0 and sigma2 > 0 and math.isfinite(theta):
        h = (fact**2 * rough * sigma2 * region / (2.0 * (P + 1) * bias**2 * theta * n)) ** (1.0 / (2 * P + 3))
    else:
        h = math.inf

    def amise(hh: np.ndarray) -> np.ndarray:
        hh = np.asarray(hh, dtype=float)
        return (hh ** (2 * P + 2) * bias**2 * theta / fact**2) + rough * sigma2 / (n * hh)

    return float(h), amise, pilot


# ---------------------------------------------------------------------------
# rule of thumb
# ---------------------------------------------------------------------------


def _weighted_quantile(x_sorted: np.ndarray, w: np.ndarray, probs: np.ndarray) -> np.ndarray:
    """Quantiles of sorted ``x`` with weights; equal weights give numpy's default (linear) method."""
    cw = np.cumsum(w)
    total = cw[-1]
    pos = (cw - 0.5 * w - 0.5 * w[0]) / (total - 0.5 * w[0] - 0.5 * w[-1])
    return np.interp(probs, pos, x_sorted)


def _rule_of_thumb(sample: SortedSample, kernel: Kernel) -> tuple[float, dict[str, float]]:
    """``h = 0.9 min(s, IQR / 1.34) n^(-1/5)`` for the gaussian kernel (Silverman 1986, eq. 3.31),
    carried to ``kernel`` by canonical scaling, ``h_K = h_G delta_0(K) / delta_0(gaussian)``.

    ``s`` and ``IQR`` are the weighted standard deviation and interquartile
    range of ``x``; ``n`` is the number of points with positive weight.
    """
    xs, ws = sample.xs, sample.ws
    n = sample.n_used
    mean = float(np.sum(ws * xs) / np.sum(ws))
    var = float(np.sum(ws * (xs - mean) ** 2) / np.sum(ws)) * n / max(n - 1, 1)
    sd = math.sqrt(var)
    q1, q3 = _weighted_quantile(xs, ws, np.array([0.25, 0.75]))
    iqr = float(q3 - q1)
    spread = min(sd, iqr / 1.34) if iqr > 0 else sd
    h_gauss = 0.9 * spread * n ** (-0.2)
    return convert_bandwidth(h_gauss, "gaussian", kernel.name), {
        "sd": sd,
        "iqr": iqr,
        "spread": spread,
        "gaussian_bandwidth": h_gauss,
    }


# ---------------------------------------------------------------------------
# cautions
# ---------------------------------------------------------------------------


def _turns(fitted: np.ndarray, tol: float) -> int:
    """Number of sign changes of the slope of a curve given at increasing x; steps within ``tol`` are ignored."""
    step = np.diff(fitted)
    d = np.sign(step[np.abs(step) > tol])
    return int(np.count_nonzero(d[1:] != d[:-1]))


def _roughness_caution(fit: _Fit, groups: _Groups, h: float) -> Caution | None:
    """``implausibly_rough`` when the effective degrees of freedom exceed :data:`ROUGH_DF_FRACTION` of
    the distinct x values, or the fitted curve changes direction at more than
    :data:`ROUGH_TURN_FRACTION` of them (counted at the probe groups)."""
    gcount = groups.count
    if fit.df > ROUGH_DF_FRACTION * gcount:
        return Caution(
            "implausibly_rough",
            f"at the chosen bandwidth {h:.4g} the fit uses {fit.df:.1f} effective degrees of freedom for "
            f"{gcount} distinct x values (more than {ROUGH_DF_FRACTION:.0%}): it may follow the noise; "
            "look at the curve and consider a larger bandwidth",
        )
    fitted, _ = fit.at_groups(True, groups.probe)
    fitted = fitted[np.isfinite(fitted)]
    turns = _turns(fitted, TURN_TOLERANCE * groups.y_scale)
    if fitted.size > 2 and turns > ROUGH_TURN_FRACTION * (fitted.size - 2):
        return Caution(
            "implausibly_rough",
            f"at the chosen bandwidth {h:.4g} the curve changes direction {turns} times over {fitted.size} "
            f"distinct x values (more than {ROUGH_TURN_FRACTION:.0%}): it may follow the noise; consider a "
            "larger bandwidth",
        )
    return None


def _edge_caution(index: int, grid: np.ndarray, what: str, raised: bool) -> Caution | None:
    if index == 0:
        extra = (
            f" (by default the smallest candidate at this sample size is {grid[0]:.4g}, 16 nodes of the finest "
            "binned grid; smaller candidates are refitted exactly, one pass over the data each)"
            if raised
            else ""
        )
        return Caution(
            "selection_at_grid_edge",
            f"the {what} is the smallest candidate ({grid[0]:.4g}); the best bandwidth may be smaller: "
            f"lower bandwidth_min{extra}, and check the curve for roughness",
        )
    if index == grid.size - 1:
        return Caution(
            "selection_at_grid_edge",
            f"the {what} is the largest candidate ({grid[-1]:.4g}); the best bandwidth may be larger "
            "(the data may be close to a polynomial of the fitted degree): raise bandwidth_max",
        )
    return None


def _unscored_caution(selector: str, scores: np.ndarray) -> Caution | None:
    unscored = int(np.count_nonzero(~np.isfinite(scores)))
    if not unscored:
        return None
    return Caution(
        "unscored_candidates",
        f"{unscored} of {scores.size} candidates have no {selector} score: the fit or the score is undefined "
        "there, or the candidate lies far below the best and would need an exact refit",
    )


def _flat_caution(
    selector: str, grid: np.ndarray, scores: np.ndarray, fits: dict[int, _Fit], best: int, groups: _Groups
) -> Caution | None:
    """``flat_selection_score`` when the data cannot tell the bandwidths apart.

    Two tests, both against the standard error of the *difference* of two
    candidates' scores (paired per-unit losses, :func:`_paired_se`), which,
    unlike the SE of one score, does not include the uncertainty of the noise
    level that all candidates share:

    * the best score beats the largest candidate's (the smoothest fit, close to
      one global polynomial of the fitted degree) by at most one SE: no
      structure beyond that polynomial is detectable (pure noise);
    * the candidates around the best that score within one SE of it span a
      bandwidth ratio of :data:`FLAT_BANDWIDTH_RATIO` or more.
    """
    last = grid.size - 1
    while last > best and not (last in fits and np.isfinite(scores[last])):
        last -= 1
    if last == best or scores[last] - scores[best] <= _paired_se(selector, fits[last], fits[best], groups):
        return Caution(
            "flat_selection_score",
            f"the {selector} score is flat: the best candidate fits no better than the largest "
            f"({grid[last]:.4g}), within one standard error, so the data show no curve beyond a polynomial "
            "of the fitted degree and the bandwidth is not determined",
        )
    lo, hi = _indistinguishable_range(selector, grid, scores, fits, best, groups)
    if grid[hi] / grid[lo] >= FLAT_BANDWIDTH_RATIO:
        return Caution(
            "flat_selection_score",
            f"the {selector} score is flat: candidates from {grid[lo]:.4g} to {grid[hi]:.4g} differ from "
            "the best by less than one standard error of the difference, so the data do not pin the "
            "bandwidth down and the choice is unreliable",
        )
    return None


# ---------------------------------------------------------------------------
# selection
# ---------------------------------------------------------------------------


def _score_candidates(
    selector: str, grid: np.ndarray, scorer: Any, exact: _ExactScorer, groups: _Groups
) -> tuple[np.ndarray, dict[int, _Fit]]:
    """Score every candidate.

    With binned scoring two kinds of candidates are refitted exactly: for
    ``loocv``, those where some tie group has a leverage above
    :data:`LOOCV_BINNED_MAX_LEVERAGE` (the division by ``1 - L`` would magnify
    the binning error, e.g. windows of a few points); and *coarse* candidates
    (fewer than :data:`BINNED_NODES_PER_BANDWIDTH` nodes per bandwidth) next to
    the best or whose score, less its error bound, could beat the best. Coarse
    candidates below one node per bandwidth are not binned at all and stay
    unscored unless they are next to the best.
    """
    count = grid.size
    scores = np.full(count, np.nan)
    fits: dict[int, _Fit] = {}
    coarse: set[int] = set()
    for i, h in enumerate(grid):
        if isinstance(scorer, _BinnedScorer) and scorer.nodes_per_bandwidth(float(h)) < 1.0:
            coarse.add(i)  # too coarse to bin at all: scored exactly only if needed
            continue
        fit = scorer.evaluate(float(h))
        if selector == "loocv" and isinstance(scorer, _BinnedScorer):
            _, lev = fit.at_groups()
            if not np.all(lev <= LOOCV_BINNED_MAX_LEVERAGE):  # 1 / (1 - L) would magnify the binning error
                fit = exact.evaluate(float(h))
        fits[i] = fit
        scores[i] = _score(selector, fit, groups)
        if fit.coarse:
            coarse.add(i)
    exact_done: set[int] = set()
    while coarse - exact_done:
        if not np.isfinite(scores).any():
            todo = sorted(coarse - exact_done)[-1:]
        else:
            best = int(np.nanargmin(scores))
            near = {best - 1, best, best + 1}
            reach = scores[best] + fits[best].error_bound(selector, scores[best])
            todo = sorted(
                i for i in coarse - exact_done
                if i in near
                or (i in fits and np.isfinite(scores[i]) and scores[i] - fits[i].error_bound(selector, scores[i]) <= reach)
            )
        if not todo:
            break
        for i in todo:
            fit = exact.evaluate(float(grid[i]))
            fits[i] = fit
            scores[i] = _score(selector, fit, groups)
            exact_done.add(i)
    return scores, fits


def _binned_floor(sample: SortedSample) -> float:
    """Smallest default candidate that the binned grid resolves with full accuracy."""
    return BINNED_NODES_PER_BANDWIDTH * float(sample.xs[-1] - sample.xs[0]) / (BINNED_MAX_NODES - 1)


def _select_scored(
    selector: str, rule: str, sample: SortedSample, kernel: Kernel, degree: int, mode: str,
    candidates: int, bandwidth_min: float | None, bandwidth_max: float | None,
) -> Selection:
    floor = _binned_floor(sample) if mode == "binned" else 0.0
    grid, cautions = candidate_grid(
        sample, kernel, degree, candidates, bandwidth_min, bandwidth_max, leave_out=selector == "loocv", floor=floor
    )
    raised = bandwidth_min is None and grid[0] == floor
    groups = _Groups(sample)
    exact = _ExactScorer(sample, groups, kernel, degree)
    scorer: Any = exact if mode == "exact" else _BinnedScorer(sample, groups, kernel, degree, float(grid[0]), float(grid[-1]))
    scores, fits = _score_candidates(selector, grid, scorer, exact, groups)
    if not np.isfinite(scores).any():
        hint = " (y is constant: every bandwidth gives the same flat curve)" if np.ptp(sample.ys) == 0 else ""
        raise ValueError(
            f"no candidate bandwidth between {grid[0]:.4g} and {grid[-1]:.4g} could be scored with {selector}{hint}; "
            "widen the range or give a fixed bandwidth"
        )
    best = int(np.nanargmin(scores))
    # equal scores (constant y, or data every candidate fits exactly): the smoothest of them
    tied = np.flatnonzero(np.isfinite(scores) & (scores <= scores[best] + _TIE * abs(scores[best])))
    best = int(tied.max())
    se = _score_se(selector, fits[best], groups)
    thr = scores[best] + (se if math.isfinite(se) else 0.0)
    within = np.flatnonzero(np.isfinite(scores) & (scores <= thr))
    chosen_i = best if rule == "min" else int(within.max())
    chosen = float(grid[chosen_i])
    edge = _edge_caution(best, grid, "best-scoring bandwidth", raised)
    if edge is None and chosen_i != best:
        edge = _edge_caution(chosen_i, grid, "bandwidth chosen by one_se", raised)
    for caution in (
        edge,
        _flat_caution(selector, grid, scores, fits, best, groups),
        _unscored_caution(selector, scores),
        _roughness_caution(fits[chosen_i], groups, chosen),
    ):
        if caution is not None:
            cautions.append(caution)
    df = np.array([fits[i].df if i in fits else math.nan for i in range(grid.size)])
    return Selection(
        selector, rule, grid, scores, chosen, convert_bandwidth(chosen, kernel.name, "gaussian"),
        cautions, df, se, scorer.name,
    )


def _select_formula(
    selector: str, rule: str, sample: SortedSample, kernel: Kernel, degree: int, mode: str,
    candidates: int, bandwidth_min: float | None, bandwidth_max: float | None,
) -> Selection:
    grid, cautions = candidate_grid(sample, kernel, degree, candidates, bandwidth_min, bandwidth_max)
    if selector == "plugin":
        raw, amise, pilot = _plugin(sample, kernel, degree)
        scores = np.asarray(amise(grid), dtype=float)
        what = "plug-in bandwidth"
    else:
        raw, pilot = _rule_of_thumb(sample, kernel)
        scores = np.full(grid.size, np.nan)
        what = "rule-of-thumb bandwidth"
        cautions.append(
            Caution(
                "reference_rule",
                "the rule of thumb uses only the spread of x (normal reference), not the shape of the curve; "
                "compare it with a score-based selector such as gcv",
            )
        )
    chosen = float(min(max(raw, grid[0]), grid[-1]))
    pilot["formula_bandwidth"] = raw
    if raw < grid[0] or raw > grid[-1]:
        side = "smallest" if raw < grid[0] else "largest"
        cautions.append(
            Caution(
                "selection_at_grid_edge",
                f"the {what} ({raw:.4g}) lies outside the candidate range and was set to the {side} "
                f"candidate ({chosen:.4g})",
            )
        )
    groups = _Groups(sample)
    # one fit at the chosen value for the roughness check (a coarse binned fit is good enough for it)
    scorer: Any = (
        _ExactScorer(sample, groups, kernel, degree)
        if mode == "exact"
        else _BinnedScorer(sample, groups, kernel, degree, chosen, chosen)
    )
    rough = _roughness_caution(scorer.evaluate(chosen), groups, chosen)
    if rough is not None:
        cautions.append(rough)
    return Selection(
        selector, rule, grid, scores, chosen, convert_bandwidth(chosen, kernel.name, "gaussian"), cautions,
        np.full(grid.size, np.nan), math.nan, "formula", pilot,
    )


def select_for_sample(
    sample: SortedSample,
    kernel: Kernel,
    degree: int,
    *,
    selector: str = "gcv",
    rule: str = "min",
    candidates: int = 40,
    bandwidth_min: float | None = None,
    bandwidth_max: float | None = None,
    scoring: str = "auto",
) -> Selection:
    """Select a bandwidth for validated, sorted data; see :func:`select_bandwidth`."""
    selector = _check_choice("selector", selector, SELECTORS)
    rule = _check_choice("rule", rule, RULES)
    scoring = _check_choice("scoring", scoring, SCORINGS)
    degree = _check_degree(degree)
    if rule == "one_se" and selector not in SCORED_SELECTORS:
        raise ValueError(
            f"rule 'one_se' needs a selector that scores candidates with a standard error "
            f"({', '.join(SCORED_SELECTORS)}); {selector} computes its bandwidth from a formula"
        )
    mode = _resolve_scoring(scoring, kernel, sample, selector)
    select = _select_scored if selector in SCORED_SELECTORS else _select_formula
    return select(selector, rule, sample, kernel, degree, mode, candidates, bandwidth_min, bandwidth_max)


def select_bandwidth(
    x: Any,
    y: Any,
    *,
    kernel: str = "gaussian",
    degree: int = 1,
    selector: str = "gcv",
    rule: str = "min",
    weights: Any = None,
    candidates: int = 40,
    bandwidth_min: float | None = None,
    bandwidth_max: float | None = None,
    scoring: str = "auto",
) -> Selection:
    """Select a bandwidth and return the evidence.

    Parameters
    ----------
    x, y : array_like
        Data, any order; ties allowed.
    kernel : str
        One of :data:`estimators.KERNELS`.
    degree : {0, 1, 2}
    selector : {"gcv", "loocv", "aicc", "plugin", "rule_of_thumb"}
    rule : {"min", "one_se"}
        ``one_se`` needs a scoring selector (gcv, loocv, aicc).
    weights : array_like, optional
        Non-negative precisions.
    candidates : int
        Number of candidate bandwidths (2 to 1000), geometric between
        ``bandwidth_min`` (default: :func:`well_posed_minimum`) and
        ``bandwidth_max`` (default: half the x range).
    scoring : {"auto", "exact", "binned"}
        How gcv / loocv / aicc score candidates; ``auto`` bins from 1000
        points (gaussian: always) except for the uniform and triangular kernels.

    Returns
    -------
    Selection

    Raises
    ------
    ValueError
        Bad input, with a message for a person.
    """
    kern = get_kernel(kernel)
    deg = _check_degree(degree)
    sample = validate_sample(x, y, weights)
    return select_for_sample(
        sample, kern, deg, selector=selector, rule=rule, candidates=candidates,
        bandwidth_min=bandwidth_min, bandwidth_max=bandwidth_max, scoring=scoring,
    )
