"""Uncertainty of a kernel smoother: standard errors, confidence bands, prediction intervals, slopes.

Every local polynomial estimate is linear in the data, ``mhat(t) = sum_j l_j(t) y_j``
with equivalent-kernel weights ``l_j(t) = w_j K(u_j) sum_k [S(t)^-1]_{0k} u_j^k``.
Variances are therefore sums ``sum_j l_j(t)^2 c_j`` that reduce to windowed
moment sums of the *squared* kernel (``a^T Q a`` with ``a = S^-1[0, :]`` and
``Q_kl = sum_j w_j^2 c_j K(u_j)^2 u_j^(k+l)``); no ``n`` by ``m`` matrix is formed.

Noise model
    ``y_j = m(x_j) + e_j`` with independent errors, ``Var(e_j) = sigma^2(x_j) / w_j``
    (weights are precisions). Residuals ``r_j`` are *leverage adjusted*,
    ``ra_j = r_j / sqrt(d_j)`` with ``d_j = 1 - 2 L_jj + w_j sum_k L_jk^2 / w_k``,
    the exact factor in ``Var(r_j) = d_j sigma^2 / w_j`` under locally constant
    noise. For a projection (``L`` idempotent) ``d_j = 1 - L_jj``, the HC2
    correction of MacKinnon & White (1985); without it the squared residuals of a
    smoother understate the noise by about ``2 L_jj``.

Standard errors (:func:`standard_error`)
    Of the plotted curve ``s.predict(points)``. ``robust=False``: homoscedastic,
    ``s.residual_scale^2 sum_j l_j^2 / w_j``. ``robust=True``:
    heteroscedasticity-consistent, ``sum_j l_j^2 ra_j^2`` (Eicker-White form
    with the adjustment above).

Bias: robust bias-corrected bands
    A bandwidth chosen for a good curve (GCV, plug-in, ...) balances squared
    bias against variance, so the bias is of the same order as the standard
    error and a band ``mhat +- z se`` is centred in the wrong place: on a sine at
    a GCV bandwidth it covers about 89% at a nominal 95%. Bands here are
    *robust bias-corrected* (Calonico, Cattaneo & Farrell 2018): the leading
    bias is estimated and subtracted, and the variance of the corrected
    estimate (not of the original one) is used. With the pilot bandwidth equal
    to the main one, the corrected degree-``p`` estimate is *exactly* the
    intercept of the degree-``q`` local fit at the same bandwidth (the normal
    equations of the larger fit, solved by blocks, give
    ``beta_0..p = beta_hat_p - S_p^-1 Lambda beta_(p+1..q)``), so the band is
    ``mhat_q(t) +- crit * se_q(t)`` with ``q = p + 1`` for odd ``p`` and
    ``q = p + 2`` for even ``p`` (the first degree whose interior bias is of
    higher order: local linear and Nadaraya-Watson both correct to a local
    quadratic, a local quadratic to a local quartic). Why this choice over an
    oversmoothed pilot (Hardle & Marron 1991) or undersmoothing: it needs no
    second bandwidth to tune, has a closed form, keeps the user's bandwidth,
    and CCF show that it stays valid at MSE-optimal bandwidths (those that
    GCV and plug-in rules aim at) with a better coverage-error rate than
    undersmoothing or conventional bias correction. The price is a wider band
    (about 30% for the gaussian kernel, measured). ``Bands.estimate`` is the
    band's centre ``mhat_q``, which differs slightly from ``s.predict``;
    ``bias_correction=False`` gives the plain band around ``s.predict`` (for
    comparison only: it under-covers).

Methods (:func:`bands`)
    ``analytic``: normal approximation with the variance from the local noise
    scale (below), ``crit = z_(1 - alpha/2)``.

    ``wild_bootstrap`` (Wu 1986; Hardle & Mammen 1993): ``e*_j = ra_j eta_j``,
    valid under unequal noise without a noise model. Weights: Rademacher
    (default for pointwise bands; Davidson & Flachaire 2008), Mammen's (1993)
    two-point weights, or standard normal (default for simultaneous bands).
    The bootstrap variance is exactly the heteroscedasticity-consistent one,
    which rests on a few squared residuals per window; its noise, which
    two-point weights cannot reproduce (their fourth moment is 1 or 2), is
    allowed for by widening the quantiles by ``t_nu / z`` with Satterthwaite
    degrees of freedom ``nu`` (Bell & McCaffrey 2002; Imbens & Kolesar 2016).

    ``residual_bootstrap`` (Hardle & Bowman 1988): residuals standardised by
    the local noise scale, resampled with replacement and scaled back,
    ``e*_j = sigma(x_j) z*_j / sqrt(w_j)``; with equal noise (the scale is
    then a constant) this is exactly their residual bootstrap, with unequal
    noise it keeps each region's noise level.

    Because the smoother is linear, a replicate's deviation is
    ``D*(t) = m*(t) - mhat(t) = sum_j l_j(t) e*_j``: no refits. Pointwise
    bootstrap intervals are basic (reflected percentile) intervals of ``D*``
    (Davison & Hinkley 1997, 5.2).

Simultaneous bands
    ``centre +- crit * se(t)`` with ``se`` the analytic standard error under
    the local noise scale and ``crit`` the ``level`` quantile of the sup-t
    statistic ``max_t |D*(t)| / sd*(t)`` over the requested points (Montiel
    Olea & Plagborg-Moller 2019). ``D*`` are draws of the Gaussian process
    with the smoother's covariance (``analytic``), or the bootstrap
    deviations. Suprema live in the far tails, where sums of two-point
    weights over a small window are too light-tailed, hence Gaussian
    multipliers by default (as in Chernozhukov, Chetverikov & Kato 2014); and
    the width follows the smooth scale because a per-point bootstrap scale
    carries the noise of single squared residuals, which a maximum over many
    points turns into under-coverage. Where a pointwise interval of the same
    method is wider, the simultaneous band includes it.

Local noise scale
    ``sigma^2(x)`` is a local linear fit of ``w_j ra_j^2`` on ``x_j`` whose
    bandwidth is chosen by GCV from a grid from twice the curve's bandwidth
    to the data range, with the constant (equal noise) as one more
    candidate; where the local linear fit dips below a quarter of the local
    constant fit, the latter is used. It serves the analytic and simultaneous
    bands, the residual bootstrap and the prediction interval (Fan & Yao 1998
    smooth squared residuals the same way). Residual quantities and the noise
    scale are computed once per smoother and reused.

Prediction intervals (:func:`prediction_interval`)
    ``s.predict(t) +- z sqrt(se(t)^2 + sigma^2(t))`` for a new observation of
    unit weight; assumes roughly normal noise (heavier tails make it too narrow).

Cautions
    * Bands are **pointwise** unless ``simultaneous=True``: a 95% pointwise band
      covers the curve at each point separately 95% of the time, not the whole
      curve at once.
    * Bands and intervals describe **sampling variability** under the model
      (independent errors, a smooth curve); they do not cover errors in the
      data, dependence between neighbouring observations, or a bandwidth so
      large that real features are smoothed away.
    * **Extrapolation is not supported by the data**: outside ``[x_min, x_max]``
      the estimate continues the local polynomial of the edge and the noise
      scale of the nearest end is used; intervals there are defined but
      flagged ``extrapolation`` and should not be trusted.

Large data
    Bootstrap deviations are accumulated block by block (replicates x nodes
    and point blocks x nodes), so memory is bounded by a fixed budget and
    never grows with ``replicates * n``. When ``n * replicates`` is large the
    errors are linearly binned onto a grid (Fan & Marron 1994) of ``h / 16``
    spacing for the gaussian and ``h / 128`` for compact kernels that fall
    continuously to zero (the uniform kernel, with its jump, stays exact);
    the measured change of bootstrap variances is below 0.3%, against a Monte
    Carlo error of about 2% for 1000 replicates. Gaussian weights are dropped
    beyond ``7 h`` from the nearest data point (relative size ``2e-11``). Multipliers
    stay exact per observation: Rademacher signs are raw random bits summed
    through per-group lookup tables, and the normal multipliers meeting one
    grid node are drawn as their exact bivariate normal sum.

References
----------
.. [1] Calonico, S., Cattaneo, M. D. and Farrell, M. H. (2018). On the effect
   of bias estimation on coverage accuracy in nonparametric inference.
   *J. Amer. Statist. Assoc.* 113, 767-779.
.. [2] Hardle, W. and Bowman, A. W. (1988). Bootstrapping in nonparametric
   regression: local adaptive smoothing and confidence bands. *J. Amer.
   Statist. Assoc.* 83, 102-110.
.. [3] Hardle, W. and Mammen, E. (1993). Comparing nonparametric versus
   parametric regression fits. *Ann. Statist.* 21, 1926-1947.
.. [4] Mammen, E. (1993). Bootstrap and wild bootstrap for high dimensional
   linear models. *Ann. Statist.* 21, 255-285.
.. [5] Wu, C. F. J. (1986). Jackknife, bootstrap and other resampling methods
   in regression analysis. *Ann. Statist.* 14, 1261-1295.
.. [6] Davidson, R. and Flachaire, E. (2008). The wild bootstrap, tamed at
   last. *J. Econometrics* 146, 162-169.
.. [7] MacKinnon, J. G. and White, H. (1985). Some heteroskedasticity-
   consistent covariance matrix estimators with improved finite sample
   properties. *J. Econometrics* 29, 305-325.
.. [8] Montiel Olea, J. L. and Plagborg-Moller, M. (2019). Simultaneous
   confidence bands: theory, implementation, and an application to SVARs.
   *J. Appl. Econometrics* 34, 1-17.
.. [9] Davison, A. C. and Hinkley, D. V. (1997). *Bootstrap Methods and their
   Application*. Cambridge University Press.
.. [10] Fan, J. and Yao, Q. (1998). Efficient estimation of conditional
   variance functions in stochastic regression. *Biometrika* 85, 645-660.
.. [11] Fan, J. and Marron, J. S. (1994). Fast implementations of
   nonparametric curve estimators. *J. Comput. Graph. Statist.* 3, 35-56.
.. [12] Hardle, W. and Marron, J. S. (1991). Bootstrap simultaneous error bars
   for nonparametric regression. *Ann. Statist.* 19, 778-796.
.. [13] Bell, R. M. and McCaffrey, D. F. (2002). Bias reduction in standard
   errors for linear regression with multi-stage samples. *Survey
   Methodology* 28, 169-181.
.. [14] Imbens, G. W. and Kolesar, M. (2016). Robust standard errors in small
   samples: some practical advice. *Rev. Econ. Statist.* 98, 701-712.
.. [15] Chernozhukov, V., Chetverikov, D. and Kato, K. (2014).
   Anti-concentration and honest, adaptive confidence bands. *Ann. Statist.*
   42, 1787-1818.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
from numba import njit
from scipy.special import ndtri
from scipy.stats import t as student_t

from .cautions import Caution
from .sums import binned_grid_allowed, effective_radius, window_bounds

if TYPE_CHECKING:  # pragma: no cover
    from .local_poly import Smoother

__all__ = [
    "Bands",
    "SlopeSummary",
    "METHODS",
    "MULTIPLIERS",
    "bands",
    "prediction_interval",
    "slope_standard_error",
    "slope_summary",
    "standard_error",
]

METHODS = ("analytic", "wild_bootstrap", "residual_bootstrap")
MULTIPLIERS = ("rademacher", "mammen", "gaussian")

_SINGULAR = 1e-11  # relative determinant below which a local fit drops one degree (as in local_poly)
_MEMORY = 1 << 21  # float64 elements per working array (16 MiB)
_POINT_BLOCK = 32
_EXACT_MAX = 1 << 22  # sources x replicates up to which bootstrap weights are exact
_VARIANCE_CANDIDATES = 12
#: ``d_j`` at or below which point ``j`` alone determines its fit and its residual carries no noise information
_SELF_DETERMINED = 1e-8
_GAUSS_GRID = 16.0
_GAUSS_REACH = 7.0  # bandwidths beyond the nearest data point at which gaussian weights are dropped
_SQRT5 = math.sqrt(5.0)
_MAMMEN = ((1.0 - _SQRT5) / 2.0, (1.0 + _SQRT5) / 2.0, (_SQRT5 + 1.0) / (2.0 * _SQRT5))


# ---------------------------------------------------------------------------
# results
# ---------------------------------------------------------------------------


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
        The band's centre: the bias-corrected estimate (see the module notes),
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


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------


def _points(points: Any) -> np.ndarray:
    try:
        t = np.asarray(points, dtype=float).ravel()
    except (TypeError, ValueError):
        raise ValueError("points must be an array of numbers") from None
    if not np.all(np.isfinite(t)):
        raise ValueError("points must hold finite numbers only")
    return t


def _level(level: Any) -> float:
    try:
        lev = float(level)
    except (TypeError, ValueError):
        raise ValueError(f"level must be a number between 0 and 1, got {level!r}") from None
    if not (0.0 < lev < 1.0):
        raise ValueError(f"level must be strictly between 0 and 1, got {level!r}")
    return lev


def _replicates(replicates: Any, level: float) -> int:
    if isinstance(replicates, bool) or not isinstance(replicates, (int, np.integer)):
        raise ValueError(f"replicates must be a whole number, got {replicates!r}")
    need = int(math.ceil(2.0 / (1.0 - level) - 1e-9))
    if replicates < need:
        raise ValueError(f"replicates must be at least {need} for a level-{level:g} band, got {replicates}")
    return int(replicates)


def _seed(seed: Any) -> int | None:
    if seed is None:
        return None
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise ValueError(f"seed must be a non-negative whole number or None, got {seed!r}")
    return int(seed)


# ---------------------------------------------------------------------------
# local fits of any degree and their equivalent kernels
# ---------------------------------------------------------------------------


@dataclass
class _LocalFit:
    """Degree-``degree`` local fits at sorted points: coefficients, ``S^-1`` and degree used."""

    t: np.ndarray
    beta: np.ndarray  # (m, degree + 1), bandwidth units, NaN-padded
    inv: np.ndarray  # (m, degree + 1, degree + 1), zero-padded
    degree_used: np.ndarray  # (m,), -1 where the window is empty
    degree: int


def _hankel(mom: np.ndarray, d: int) -> np.ndarray:
    idx = np.arange(d + 1)
    return mom[:, idx[:, None] + idx[None, :]]


def _local_fit(s: "Smoother", t: np.ndarray, degree: int) -> _LocalFit:
    """Local polynomial fits of ``degree`` (any, not only the smoother's) at sorted ``t``.

    Follows the degree rule of :func:`estimators.fit`: at most (distinct x in
    the window - 1), lowered while the relative determinant of the local system
    is below ``1e-11``.
    """
    if degree == s.degree:
        sol = s.solve(t)
        return _LocalFit(t, sol.beta, sol.inv, sol.degree_used, degree)
    sample = s.sample
    mom = s.moments(t, sample.values(), 2 * degree)
    smom, tmom = mom[:, 0, :], mom[:, 1, : degree + 1]
    lo, hi = window_bounds(sample.xs, t, s.kernel_spec, s.bandwidth)
    m = t.size
    deg = np.full(m, -1, dtype=np.int64)
    has = (hi > lo) & (smom[:, 0] > 0)
    prefix = sample.distinct_prefix
    deg[has] = np.minimum(prefix[hi[has]] - prefix[lo[has] + 1], degree)
    beta = np.full((m, degree + 1), np.nan)
    inv = np.zeros((m, degree + 1, degree + 1))
    for d in range(degree, -1, -1):
        at = np.flatnonzero(deg == d)
        if at.size == 0:
            continue
        mat = _hankel(smom[at], d)
        if d > 0:
            diag = np.prod(np.diagonal(mat, axis1=1, axis2=2), axis=1)
            with np.errstate(divide="ignore", invalid="ignore"):
                rel = np.linalg.det(mat) / diag
            weak = ~(np.abs(rel) > _SINGULAR)
            if weak.any():
                deg[at[weak]] = d - 1
                at, mat = at[~weak], mat[~weak]
        if at.size == 0:
            continue
        iv = np.linalg.inv(mat)
        inv[np.ix_(at, np.arange(d + 1), np.arange(d + 1))] = iv
        beta[np.ix_(at, np.arange(d + 1))] = np.einsum("mij,mj->mi", iv, tmom[at, : d + 1])
    return _LocalFit(t, beta, inv, deg, degree)


def _coefficient_row(fit: _LocalFit, nu: int, h: float) -> np.ndarray:
    """``a = S^-1[nu, :] / h^nu``: ``l_j(t) = w_j K(u_j) sum_k a_k u_j^k`` estimates the ``nu``-th derivative."""
    a = fit.inv[:, nu, :] / h**nu
    a[fit.degree_used < nu] = np.nan
    return a


def _variance(s: "Smoother", t: np.ndarray, a: np.ndarray, column: np.ndarray) -> np.ndarray:
    """``sum_j l_j(t)^2 c_j`` for ``column = w_j^2 c_j`` (sorted sources) via squared-kernel moments."""
    d = a.shape[1] - 1
    q = s.moments(t, column, 2 * d, power=2)[:, 0, :]
    out = np.einsum("mi,mij,mj->m", a, _hankel(q, d), a)
    return np.maximum(out, 0.0)


def _centre_degree(p: int) -> int:
    """Degree of the bias-corrected fit: ``p + 1`` for odd ``p``, ``p + 2`` for even ``p``."""
    return p + 1 if p % 2 == 1 else p + 2


# ---------------------------------------------------------------------------
# residual quantities (sorted sources)
# ---------------------------------------------------------------------------


@dataclass
class _Residuals:
    """Leverage-adjusted residuals at the sorted sources (points with weight > 0)."""

    ra: np.ndarray  # r_j / sqrt(d_j)
    factor: np.ndarray  # d_j = 1 - 2 L_jj + w_j sum_k L_jk^2 / w_k

    @property
    def informative(self) -> np.ndarray:
        """Points whose residual says something about the noise (``d_j`` above rounding)."""
        return self.factor > _SELF_DETERMINED


def _memo(s: "Smoother", key: str, build: Any) -> Any:
    """Compute a data-point quantity once per smoother (a smoother never changes after fitting)."""
    store = s.__dict__.setdefault("_uncertainty_memo", {})
    if key not in store:
        store[key] = build()
    return store[key]


def _residuals(s: "Smoother") -> _Residuals:
    return _memo(s, "residuals", lambda: _build_residuals(s))  # type: ignore[no-any-return]


def _build_residuals(s: "Smoother") -> _Residuals:
    sample = s.sample
    keep = sample.w[sample.order] > 0
    resid = s.residuals()[sample.order][keep]
    lev = s.leverages()[sample.order][keep]
    # the local fits at the data are cached by the smoother when it computes fitted values
    cached = getattr(s, "_at_data_sorted", None)
    if cached is not None and cached.inv.shape[0] == sample.order.size:
        a = cached.inv[keep, 0, :]
    else:  # pragma: no cover - only if the smoother stops caching its data-point fits
        a = s.solve(sample.xs).inv[:, 0, :]
    cross = _variance(s, sample.xs, a, sample.ws)  # sum_k L_jk^2 / w_k
    factor = 1.0 - 2.0 * lev + sample.ws * cross
    # a point that alone determines its fit (d_j ~ 0) carries no noise information
    ra = np.where(factor > _SELF_DETERMINED, resid / np.sqrt(np.maximum(factor, _SELF_DETERMINED)), 0.0)
    return _Residuals(ra, factor)


# ---------------------------------------------------------------------------
# local noise scale
# ---------------------------------------------------------------------------


@dataclass
class _NoiseScale:
    """``sigma^2(x)`` for a unit-weight observation; constant or a local linear fit."""

    kind: str  # "constant" | "local"
    constant: float
    fit: Any = None  # Smoother of w ra^2 on x (local)
    floor_fit: Any = None  # its degree-0 counterpart, a positive lower guard
    x_min: float = 0.0
    x_max: float = 0.0
    bandwidth: float = math.nan

    def at(self, points: np.ndarray) -> np.ndarray:
        if self.kind == "constant":
            return np.full(points.shape, self.constant)
        tc = np.clip(points, self.x_min, self.x_max)
        ll = self.fit.predict(tc)
        nw = self.floor_fit.predict(tc)
        out = np.where(np.isfinite(ll), np.maximum(ll, 0.25 * nw), nw)
        return np.where(np.isfinite(out), out, self.constant)


def _noise_scale(s: "Smoother") -> _NoiseScale:
    """Choose between a constant and a local linear noise variance by GCV (see module notes)."""
    return _memo(s, "noise", lambda: _build_noise_scale(s, _residuals(s)))  # type: ignore[no-any-return]


def _build_noise_scale(s: "Smoother", res: _Residuals) -> _NoiseScale:
    from .local_poly import Smoother as _Smoother
    from .local_poly import validate_sample

    sample = s.sample
    # points that alone determine their fit have residual 0 whatever the noise: leave them out
    keep = res.informative
    if not keep.any():
        return _NoiseScale("constant", math.nan)
    xs = sample.xs[keep]
    z = sample.ws[keep] * res.ra[keep] ** 2
    n = z.size
    mean = float(np.mean(z))
    best_score = n * float(np.sum((z - mean) ** 2)) / (n - 1.0) ** 2 if n > 1 else math.inf
    best: _NoiseScale = _NoiseScale("constant", mean)
    span = float(xs[-1] - xs[0])
    lo_h = 2.0 * s.bandwidth
    hi_h = max(span, lo_h)
    if n < 10 or span <= 0 or not math.isfinite(best_score):
        return best
    vsample = validate_sample(xs, z)
    for hv in np.geomspace(lo_h, hi_h, _VARIANCE_CANDIDATES):
        vs = _Smoother(vsample, s.kernel_spec, 1, float(hv), s.engine_request)
        r = vs.residuals()
        if not np.all(np.isfinite(r)):
            continue
        df = vs.effective_df
        if not df < n:
            continue
        score = n * float(np.sum(r * r)) / (n - df) ** 2
        if score < best_score:
            best_score = score
            floor_fit = _Smoother(vsample, s.kernel_spec, 0, float(hv), s.engine_request)
            best = _NoiseScale("local", mean, vs, floor_fit, s.x_min, s.x_max, float(hv))
    return best


def _noise_column(s: "Smoother", noise: _NoiseScale) -> np.ndarray:
    """``w_j sigma^2(x_j)`` at the sorted sources: ``w_j^2 Var(e_j)`` for :func:`_variance`."""
    return s.sample.ws * noise.at(s.sample.xs)


# ---------------------------------------------------------------------------
# public: standard errors
# ---------------------------------------------------------------------------


def _sorted(t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    perm = np.argsort(t, kind="stable")
    return t[perm], perm


def _unsort(values: np.ndarray, perm: np.ndarray) -> np.ndarray:
    out = np.empty_like(values)
    out[perm] = values
    return out


def _se_of(s: "Smoother", t: np.ndarray, degree: int, nu: int, robust: bool) -> tuple[np.ndarray, _LocalFit]:
    ts, perm = _sorted(t)
    fit = _local_fit(s, ts, degree)
    a = _coefficient_row(fit, nu, s.bandwidth)
    if robust:
        res = _residuals(s)
        column = s.sample.ws**2 * res.ra**2 if res.informative.any() else np.full(s.sample.ws.shape, np.nan)
    else:
        column = s.sample.ws * s.residual_scale**2
    var = _variance(s, ts, np.nan_to_num(a), column)
    var[np.isnan(a[:, 0])] = np.nan
    return _unsort(np.sqrt(var), perm), fit


def standard_error(smoother: "Smoother", points: Any, robust: bool = False) -> np.ndarray:
    """Pointwise standard error of the curve estimate ``smoother.predict(points)``.

    Parameters
    ----------
    smoother : Smoother
    points : array_like
        Any order; the result follows it.
    robust : bool
        False: homoscedastic, ``sigma^2 sum_j l_j(t)^2 / w_j`` with
        ``sigma = smoother.residual_scale``. True: heteroscedasticity-consistent,
        ``sum_j l_j(t)^2 ra_j^2`` with leverage-adjusted residuals (see the
        module notes).

    Returns
    -------
    ndarray
        NaN where the estimate is undefined.

    Notes
    -----
    This is the standard error of the plotted curve, which carries a smoothing
    bias of the same order; :func:`bands` uses the bias-corrected centre and
    its (larger) standard error. Extrapolated points get a value, but it
    describes the local polynomial's extrapolation, not the unknown curve.
    """
    t = _points(points)
    se, _ = _se_of(smoother, t, smoother.degree, 0, bool(robust))
    return se


def slope_standard_error(smoother: "Smoother", points: Any, robust: bool = False) -> np.ndarray:
    """Pointwise standard error of ``smoother.slope(points)`` (degree >= 1); see :func:`standard_error`."""
    if smoother.degree < 1:
        raise ValueError("slope needs degree >= 1 (a local linear or quadratic fit)")
    t = _points(points)
    se, _ = _se_of(smoother, t, smoother.degree, 1, bool(robust))
    return se


# ---------------------------------------------------------------------------
# bootstrap machinery: deviations D*(t) = sum_j l_j(t) e*_j, block by block
# ---------------------------------------------------------------------------


@njit(cache=True, nogil=True)
def _accumulate_signs(rbytes, g_start, g_len, g_node, vals_l, vals_r, two_sided, eta_one, eta_zero, out):  # pragma: no cover
    """``out[node, b] += sum_{i in group} v_i eta_ib`` with ``eta`` encoded as bits of ``rbytes[g, b]``.

    Each group (at most 8 consecutive sources sharing a node) gets a lookup
    table of all ``2**len`` sign patterns, so a replicate costs one look-up
    per group instead of one multiply-add per source.
    """
    ngroups, nrep = rbytes.shape
    tl = np.empty(256)
    tr = np.empty(256)
    step = eta_one - eta_zero
    for g in range(ngroups):
        s = g_start[g]
        length = g_len[g]
        node = g_node[g]
        sl = 0.0
        sr = 0.0
        for i in range(length):
            sl += vals_l[s + i]
            sr += vals_r[s + i]
        tl[0] = eta_zero * sl
        tr[0] = eta_zero * sr
        for i in range(length):
            bit = 1 << i
            dl = step * vals_l[s + i]
            dr = step * vals_r[s + i]
            for k in range(bit):
                tl[k | bit] = tl[k] + dl
                tr[k | bit] = tr[k] + dr
        mask = (1 << length) - 1
        for b in range(nrep):
            code = rbytes[g, b] & mask
            out[node, b] += tl[code]
            if two_sided:
                out[node + 1, b] += tr[code]


@njit(cache=True, nogil=True)
def _accumulate_resampled(idx, pool, vals_l, vals_r, nodes, two_sided, out):  # pragma: no cover
    """``out[node_j, b] += v_j pool[idx[j, b]]`` (and the right-hand share)."""
    npts, nrep = idx.shape
    for j in range(npts):
        a = vals_l[j]
        r = vals_r[j]
        c = nodes[j]
        for b in range(nrep):
            e = pool[idx[j, b]]
            out[c, b] += a * e
            if two_sided:
                out[c + 1, b] += r * e


@njit(cache=True, nogil=True, fastmath=True)
def _banded_product(rows, g, lo, out):  # pragma: no cover
    """``out = rows @ g[lo : lo + rows.shape[1]]``, four rows at a time.

    A compiled loop rather than BLAS: multi-threaded BLAS on small products
    is erratic on busy machines (measured 0.8 ms single-threaded vs 60 ms
    median with two threads for a 32 x 448 x 1000 product), and this runs in
    a predictable ~3 ms.
    """
    mb, w = rows.shape
    nb = g.shape[1]
    for i in range(mb):
        for b in range(nb):
            out[i, b] = 0.0
    i = 0
    while i < mb:
        i4 = min(i + 4, mb)
        for c in range(w):
            gc = g[lo + c]
            for ii in range(i, i4):
                r = rows[ii, c]
                if r != 0.0:
                    o = out[ii]
                    for b in range(nb):
                        o[b] += r * gc[b]
        i = i4


@njit(cache=True, nogil=True)
def _alias_bytes(raw, prob, alias, out):  # pragma: no cover
    """One byte of 8 independent Mammen choices per 64-bit word (Walker's alias method)."""
    rows, cols = raw.shape
    scale = 1.0 / 72057594037927936.0  # 2**-56
    for i in range(rows):
        for j in range(cols):
            word = raw[i, j]
            col = word >> np.uint64(56)
            frac = float(word & np.uint64(72057594037927935)) * scale
            out[i, j] = col if frac < prob[col] else alias[col]


def _mammen_alias() -> tuple[np.ndarray, np.ndarray]:
    """Alias table (Vose 1991) for the 256 patterns of 8 bits, bit = 1 with Mammen's ``p_low``."""
    p_low = _MAMMEN[2]
    ones = np.array([bin(k).count("1") for k in range(256)])
    pmf = p_low**ones * (1.0 - p_low) ** (8 - ones)
    scaled = pmf * 256.0
    prob = np.zeros(256)
    alias = np.arange(256, dtype=np.uint8)
    small = [k for k in range(256) if scaled[k] < 1.0]
    large = [k for k in range(256) if scaled[k] >= 1.0]
    while small and large:
        lo, hi = small.pop(), large.pop()
        prob[lo], alias[lo] = scaled[lo], hi
        scaled[hi] -= 1.0 - scaled[lo]
        (small if scaled[hi] < 1.0 else large).append(hi)
    for k in small + large:
        prob[k] = 1.0
    return prob, alias


@njit(cache=True, nogil=True)
def _bidiagonal_cholesky(diag, sub, out_diag, out_sub):  # pragma: no cover
    """Cholesky factor of the PSD tridiagonal matrix (``diag``, ``sub``): ``L_cc``, ``L_(c+1)c``."""
    n = diag.size
    prev = 0.0
    for c in range(n):
        v = diag[c] - prev * prev
        d = math.sqrt(v) if v > 0.0 else 0.0
        out_diag[c] = d
        if c + 1 < n:
            prev = sub[c] / d if d > 1e-150 else 0.0
            out_sub[c] = prev
        else:
            out_sub[c] = 0.0


@dataclass
class _Nodes:
    """Where the random errors meet the weights: the sources themselves, or a regular grid."""

    x: np.ndarray  # node locations (ascending)
    src: slice  # reachable sources
    node: np.ndarray  # node index of each reachable source
    frac: np.ndarray  # share going to node + 1 (0 on the exact path)
    binned: bool


def _grid_step(s: "Smoother") -> float | None:
    """Grid spacing for binned errors, or None where binning is not accurate enough.

    Linear binning replaces each weight by its linear interpolation between
    grid nodes; the measured change of bootstrap variances is below 3e-3
    relative at ``h / 16`` for the gaussian and 1.5e-3 at ``h / 128`` for compact
    kernels that fall continuously to zero at the window edge. A kernel that
    jumps at the edge (uniform) is always exact.
    """
    k = s.kernel_spec
    if not math.isfinite(k.support):
        return s.bandwidth / _GAUSS_GRID
    edge = float(k(np.array([1.0]))[0])
    if edge > 1e-12 * k.at_zero:
        return None
    return s.bandwidth / 128.0


def _reach(s: "Smoother", t: np.ndarray) -> np.ndarray:
    """Distance from each point beyond which weights are ignored.

    Compact kernels: the support. Gaussian: ``7 h`` beyond the nearest data
    point (the weights there are ``exp(-24.5) ~ 2e-11`` of the largest), at most
    the ``10 h`` cut-off of the fit itself.
    """
    h = s.bandwidth
    full = effective_radius(s.kernel_spec) * h
    if math.isfinite(s.kernel_spec.support):
        return np.full(t.size, full)
    xs = s.sample.xs
    i = np.clip(np.searchsorted(xs, t), 1, xs.size - 1) if xs.size > 1 else np.zeros(t.size, dtype=np.int64)
    near = np.minimum(np.abs(xs[i] - t), np.abs(xs[i - 1] - t)) if xs.size > 1 else np.abs(xs[0] - t)
    return np.minimum(full, _GAUSS_REACH * h + near)


def _make_nodes(s: "Smoother", t: np.ndarray, replicates: int, engine: str) -> _Nodes:
    xs = s.sample.xs
    radius = _reach(s, t)
    a = int(np.searchsorted(xs, t[0] - radius[0], side="left"))
    b = int(np.searchsorted(xs, t[-1] + radius[-1], side="right"))
    src = slice(a, b)
    xr = xs[src]
    step = _grid_step(s)
    span = float(xr[-1] - xr[0]) if xr.size else 0.0
    grid_size = int(math.ceil(span / step)) + 2 if (xr.size and step is not None) else 0
    use_grid = step is not None and (
        (engine == "binned" and binned_grid_allowed(grid_size, xr.size, t.size))
        or (engine == "auto" and xr.size * replicates > _EXACT_MAX and grid_size * 4 <= xr.size)
    )
    if not use_grid or xr.size == 0:
        return _Nodes(xr, src, np.arange(xr.size, dtype=np.int64), np.zeros(xr.size), False)
    origin = float(xr[0])
    pos = (xr - origin) / step  # type: ignore[operator]
    node = np.minimum(np.floor(pos).astype(np.int64), grid_size - 2)
    frac = pos - node
    grid = origin + step * np.arange(grid_size)  # type: ignore[operator]
    return _Nodes(grid, src, node, frac, True)


def _kernel_rows(s: "Smoother", t: np.ndarray, a: np.ndarray, xn: np.ndarray) -> np.ndarray:
    """``K(u) sum_k a_k u^k`` with ``u = (xn - t) / h``: the weights without ``w_j``, shape (len(t), len(xn))."""
    h = s.bandwidth
    u = (xn[None, :] - t[:, None]) / h
    k = s.kernel_spec(u)
    if not math.isfinite(s.kernel_spec.support):
        k = np.where(np.abs(u) <= effective_radius(s.kernel_spec), k, 0.0)
    poly = np.zeros_like(u)
    for j in range(a.shape[1] - 1, -1, -1):
        poly = poly * u + a[:, j, None]
    return k * poly


class _WeightBlocks:
    """Equivalent-kernel weights at the nodes, for blocks of consecutive (sorted) points."""

    def __init__(self, s: "Smoother", t: np.ndarray, a: np.ndarray, nodes: _Nodes) -> None:
        self.s, self.t, self.a, self.nodes = s, t, a, nodes
        radius = _reach(s, t)
        pad = (nodes.x[1] - nodes.x[0]) if nodes.binned and nodes.x.size > 1 else 0.0
        self.spans = []
        for i0 in range(0, t.size, _POINT_BLOCK):
            i1 = min(i0 + _POINT_BLOCK, t.size)
            lo = int(np.searchsorted(nodes.x, t[i0] - radius[i0] - pad, side="left"))
            hi = int(np.searchsorted(nodes.x, t[i1 - 1] + radius[i1 - 1] + pad, side="right"))
            self.spans.append((i0, i1, lo, hi))
        size = sum((i1 - i0) * (hi - lo) for i0, i1, lo, hi in self.spans)
        self._cache: list[np.ndarray] | None = None
        if size <= 4 * _MEMORY:
            self._cache = [self._rows(*sp) for sp in self.spans]

    def _rows(self, i0: int, i1: int, lo: int, hi: int) -> np.ndarray:
        return _kernel_rows(self.s, self.t[i0:i1], self.a[i0:i1], self.nodes.x[lo:hi])

    def apply(self, g: np.ndarray, out: np.ndarray) -> None:
        """``out[i, :] = sum_c rows[i, c] g[c, :]`` for every point block."""
        for k, (i0, i1, lo, hi) in enumerate(self.spans):
            rows = self._cache[k] if self._cache is not None else self._rows(i0, i1, lo, hi)
            block = np.empty((i1 - i0, g.shape[1]))
            _banded_product(np.ascontiguousarray(rows), g, lo, block)
            out[i0:i1] = block

    def power_sums(self, c2: np.ndarray, c4: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``sum_c rows^2 c2_c`` and ``sum_c rows^4 c4_c`` for every point."""
        s2 = np.empty(self.t.size)
        s4 = np.empty(self.t.size)
        for k, (i0, i1, lo, hi) in enumerate(self.spans):
            rows = self._cache[k] if self._cache is not None else self._rows(i0, i1, lo, hi)
            sq = rows * rows
            s2[i0:i1] = (sq * c2[lo:hi]).sum(axis=1)
            s4[i0:i1] = (sq * sq * c4[lo:hi]).sum(axis=1)
        return s2, s4


def _small_sample_factor(blocks: "_WeightBlocks", ws: np.ndarray, level: float) -> np.ndarray:
    """``t_(nu, 1 - alpha/2) / z_(1 - alpha/2)`` with Satterthwaite degrees of freedom of the HC variance.

    ``nu = (sum_j l_j^2 / w_j)^2 / sum_j (l_j^2 / w_j)^2``, the degrees of
    freedom of ``sum_j l_j^2 ra_j^2`` when the errors are normal with equal
    variance (Bell & McCaffrey 2002; Imbens & Kolesar 2016 recommend this
    adjustment for heteroscedasticity-consistent standard errors in small
    samples). Rademacher weights cannot reproduce the variability of a
    variance built from a few squared residuals (their fourth moment is 1), so
    the bootstrap quantiles are widened by this factor; it tends to 1 as the
    windows fill up.
    """
    nodes = blocks.nodes
    w = ws[nodes.src]
    ncol = nodes.x.size + 1
    w1 = np.bincount(nodes.node, w * (1.0 - nodes.frac), ncol) + np.bincount(nodes.node + 1, w * nodes.frac, ncol)
    w2 = np.bincount(nodes.node, (w * w) * (1.0 - nodes.frac), ncol) + np.bincount(
        nodes.node + 1, (w * w) * nodes.frac, ncol
    )
    s2, s4 = blocks.power_sums(w1[:-1], w2[:-1])
    with np.errstate(divide="ignore", invalid="ignore"):
        nu = s2 * s2 / s4
    alpha = 1.0 - level
    z = float(ndtri(1.0 - alpha / 2.0))
    nu = np.where(np.isfinite(nu) & (nu > 1.0), nu, 1.0)
    return np.asarray(student_t.ppf(1.0 - alpha / 2.0, nu) / z)


def _groups(nodes: _Nodes) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Split the reachable sources into runs of at most 8 that share a node."""
    node = nodes.node
    n = node.size
    if n == 0:
        return (np.zeros(0, dtype=np.int64),) * 3  # type: ignore[return-value]
    new_run = np.empty(n, dtype=bool)
    new_run[0] = True
    new_run[1:] = node[1:] != node[:-1]
    run_id = np.cumsum(new_run) - 1
    run_start = np.flatnonzero(new_run)
    pos_in_run = np.arange(n) - run_start[run_id]
    starts = np.flatnonzero(new_run | (pos_in_run % 8 == 0))
    lengths = np.diff(np.append(starts, n))
    return starts.astype(np.int64), lengths.astype(np.int64), node[starts].astype(np.int64)


def _deviations(
    s: "Smoother",
    blocks: "_WeightBlocks",
    method: str,
    replicates: int,
    rng: np.random.Generator,
    res: _Residuals,
    noise: _NoiseScale | None,
    multiplier: str,
) -> np.ndarray:
    """Bootstrap deviations ``D*[i, b] = sum_j l_j(t_i) e*_jb`` for sorted ``t``; shape (m, replicates)."""
    nodes, t = blocks.nodes, blocks.t
    ws = s.sample.ws[nodes.src]
    if method == "wild_bootstrap":
        base = ws * res.ra[nodes.src]
    elif method == "analytic":  # gaussian draws with the local noise scale
        base = ws * np.sqrt(noise.at(s.sample.xs[nodes.src]) / ws)  # type: ignore[union-attr]
    else:
        xs = s.sample.xs
        scale_all = np.sqrt(noise.at(xs) / s.sample.ws)  # type: ignore[union-attr]
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.where(scale_all > 0, res.ra / scale_all, 0.0)
        pool = z - z.mean()
        base = ws * scale_all[nodes.src]
    vals_l = np.ascontiguousarray(base * (1.0 - nodes.frac))
    vals_r = np.ascontiguousarray(base * nodes.frac)
    two_sided = nodes.binned
    nrow = nodes.x.size + 1
    block = int(max(1, min(replicates, _MEMORY // max(nrow, 1))))
    out = np.empty((t.size, replicates))
    g_start, g_len, g_node = _groups(nodes)
    if multiplier == "gaussian":
        # node sums of normal errors are jointly normal with a tridiagonal covariance (each source
        # meets one node and its right neighbour): draw them as L z with its bidiagonal Cholesky factor
        var_l = np.bincount(nodes.node, vals_l * vals_l, nrow)
        var_r = np.bincount(nodes.node + 1, vals_r * vals_r, nrow)
        cov_lr = np.bincount(nodes.node, vals_l * vals_r, nrow)
        chol_diag = np.empty(nrow)
        chol_sub = np.empty(nrow)
        _bidiagonal_cholesky(var_l + var_r, cov_lr, chol_diag, chol_sub)
    for r0 in range(0, replicates, block):
        nb = min(block, replicates - r0)
        g = np.zeros((nrow, nb))
        if method != "residual_bootstrap" and multiplier == "gaussian":
            z = rng.standard_normal((nrow, nb))
            g += chol_diag[:, None] * z
            g[1:] += chol_sub[:-1, None] * z[:-1]
        elif method == "wild_bootstrap":
            chunk = max(1, _MEMORY // (8 * nb))
            for c0 in range(0, g_start.size, chunk):
                c1 = min(c0 + chunk, g_start.size)
                count = (c1 - c0) * nb
                if multiplier == "rademacher":
                    raw = rng.bit_generator.random_raw((count + 7) // 8)
                    rbytes = raw.view(np.uint8)[:count].reshape(c1 - c0, nb)
                    one, zero = 1.0, -1.0
                else:
                    low, high, _ = _MAMMEN
                    rbytes = np.empty((c1 - c0, nb), dtype=np.uint8)
                    prob, alias = _mammen_alias()
                    _alias_bytes(rng.bit_generator.random_raw(count).reshape(c1 - c0, nb), prob, alias, rbytes)
                    one, zero = low, high
                _accumulate_signs(
                    rbytes, g_start[c0:c1], g_len[c0:c1], g_node[c0:c1], vals_l, vals_r, two_sided, one, zero, g
                )
        else:
            chunk = max(1, _MEMORY // nb)
            for c0 in range(0, vals_l.size, chunk):
                c1 = min(c0 + chunk, vals_l.size)
                idx = rng.integers(0, pool.size, size=(c1 - c0, nb))
                _accumulate_resampled(
                    idx, pool, vals_l[c0:c1], vals_r[c0:c1], nodes.node[c0:c1], two_sided, g
                )
        blocks.apply(g, out[:, r0 : r0 + nb])
    return out


def _propagate(s: "Smoother", t: np.ndarray, a: np.ndarray, errors: np.ndarray, engine: str) -> np.ndarray:
    """``sum_j l_j(t) errors[j, :]`` through the same node machinery as the bootstrap (for tests).

    ``t`` sorted; ``errors`` has one row per sorted source.
    """
    nodes = _make_nodes(s, t, errors.shape[1], engine)
    blocks = _WeightBlocks(s, t, a, nodes)
    ws = s.sample.ws[nodes.src]
    e = np.ascontiguousarray(errors[nodes.src])
    k = e.shape[1]
    pool = e.ravel()
    idx = np.arange(e.shape[0])[:, None] * k + np.arange(k)[None, :]
    g = np.zeros((nodes.x.size + 1, k))
    _accumulate_resampled(
        idx, pool, np.ascontiguousarray(ws * (1.0 - nodes.frac)), np.ascontiguousarray(ws * nodes.frac),
        nodes.node, nodes.binned, g,
    )
    out = np.empty((t.size, k))
    blocks.apply(g, out)
    return out


# ---------------------------------------------------------------------------
# public: bands
# ---------------------------------------------------------------------------


NOISE_NOT_ESTIMABLE = (
    "the fit passes through every data point (each point alone determines its local fit), so the residuals "
    "carry no information about the noise: no band, standard error or prediction interval can be given; "
    "use a larger bandwidth"
)


def _cautions(s: "Smoother", t: np.ndarray, centre: np.ndarray, fit: _LocalFit, simultaneous: bool, noise_known: bool = True) -> list[Caution]:
    out: list[Caution] = []
    if not noise_known:
        out.append(Caution("noise_not_estimable", NOISE_NOT_ESTIMABLE))
    if not simultaneous:
        out.append(
            Caution(
                "pointwise_bands",
                "the band is pointwise: it covers the curve at each point separately, not the whole curve at once",
            )
        )
    bad = ~np.isfinite(centre)
    if bad.any():
        out.append(Caution("empty_window", f"{int(bad.sum())} points have no data in their window; no band there"))
    ext = s.extrapolated(t)
    if ext.any():
        out.append(
            Caution(
                "extrapolation",
                f"{int(ext.sum())} points lie outside the data range [{s.x_min:g}, {s.x_max:g}]; the band there "
                "extends the edge fit and is not supported by the data",
            )
        )
    reduced = (fit.degree_used >= 0) & (fit.degree_used < fit.degree)
    if reduced.any():
        out.append(
            Caution(
                "degree_reduced",
                f"{int(reduced.sum())} points have too few distinct x values in their window for the "
                f"degree-{fit.degree} centre; the band there is less bias-corrected",
            )
        )
    return out


def bands(
    smoother: "Smoother",
    points: Any,
    level: float = 0.95,
    method: str = "wild_bootstrap",
    replicates: int = 500,
    seed: int | None = 0,
    simultaneous: bool = False,
    *,
    multiplier: str | None = None,
    bias_correction: bool = True,
    engine: str = "auto",
) -> Bands:
    """Confidence band for the curve at ``points``.

    Parameters
    ----------
    smoother : Smoother
    points : array_like
        Any order; results follow it.
    level : float
        Nominal coverage, in (0, 1).
    method : {"wild_bootstrap", "residual_bootstrap", "analytic"}
        See the module notes.
    replicates : int
        Bootstrap replicates (for ``analytic``: draws of the sup-t statistic
        when ``simultaneous``); at least ``2 / (1 - level)``.
    seed : int or None
        The same seed gives identical bands; None draws fresh entropy.
    simultaneous : bool
        Cover all requested points at once (sup-t band) instead of each point
        separately.
    multiplier : {"rademacher", "mammen", "gaussian"}, optional
        Wild bootstrap weights; default ``"rademacher"`` for pointwise and
        ``"gaussian"`` for simultaneous bands (see the module notes).
    bias_correction : bool
        Robust bias correction (default). False gives the plain band around
        ``smoother.predict``, which under-covers at data-driven bandwidths.
    engine : {"auto", "exact", "binned"}
        Where bootstrap errors meet the weights; ``auto`` bins when
        ``n * replicates`` is large (see the module notes).

    Returns
    -------
    Bands

    Notes
    -----
    Bands are pointwise unless ``simultaneous``; they describe sampling
    variability only; outside the data range they are flagged
    ``extrapolation`` and are not supported by the data.
    """
    if method not in METHODS:
        raise ValueError(f"unknown method {method!r}; choose one of {', '.join(METHODS)}")
    if multiplier is None:
        multiplier = "gaussian" if simultaneous else "rademacher"
    if multiplier not in MULTIPLIERS:
        raise ValueError(f"unknown multiplier {multiplier!r}; choose one of {', '.join(MULTIPLIERS)}")
    if engine not in ("auto", "exact", "binned"):
        raise ValueError(f"unknown engine {engine!r}; choose one of auto, exact, binned")
    s = smoother
    t = _points(points)
    lev = _level(level)
    simultaneous = bool(simultaneous)
    needs_draws = method != "analytic" or simultaneous
    reps = _replicates(replicates, lev) if needs_draws else None
    seed_used = _seed(seed) if needs_draws else None

    ts, perm = _sorted(t)
    degree = _centre_degree(s.degree) if bias_correction else s.degree
    fit = _local_fit(s, ts, degree)
    centre = fit.beta[:, 0] + s.sample.y_centre
    a = _coefficient_row(fit, 0, s.bandwidth)
    ok = np.isfinite(centre) & np.isfinite(a[:, 0])
    m = ts.size
    lower = np.full(m, np.nan)
    upper = np.full(m, np.nan)
    se = np.full(m, np.nan)
    crit = math.nan
    alpha = 1.0 - lev
    res = _residuals(s)
    noise_known = bool(res.informative.any())
    ok &= noise_known  # no residual carries noise information: no band anywhere
    # the wild bootstrap's pointwise band needs no noise model; everything else uses the local scale
    noise = None if (method == "wild_bootstrap" and not simultaneous) else _noise_scale(s)
    t_ok, a_ok = ts[ok], a[ok]
    rng = np.random.default_rng(seed_used)
    if ok.any():
        scale = None if noise is None else np.sqrt(_variance(s, t_ok, a_ok, _noise_column(s, noise)))
        if method == "analytic":
            se_ok = scale
            if simultaneous:
                # draws of the Gaussian process with the smoother's covariance under the local noise
                # scale, through the same blocked machinery as the bootstrap (no m x m matrix)
                nodes = _make_nodes(s, t_ok, reps, engine)  # type: ignore[arg-type]
                blocks = _WeightBlocks(s, t_ok, a_ok, nodes)
                dev = _deviations(s, blocks, "analytic", reps, rng, res, noise, "gaussian")  # type: ignore[arg-type]
                with np.errstate(divide="ignore", invalid="ignore"):
                    stat = np.abs(dev) / se_ok[:, None]  # type: ignore[index]
                stat = np.where(np.isfinite(stat), stat, 0.0)
                crit = float(np.quantile(stat.max(axis=0), lev))
            else:
                crit = float(ndtri(1.0 - alpha / 2.0))
            lower[ok] = centre[ok] - crit * se_ok
            upper[ok] = centre[ok] + crit * se_ok
            se[ok] = se_ok
        else:
            nodes = _make_nodes(s, t_ok, reps, engine)  # type: ignore[arg-type]
            blocks = _WeightBlocks(s, t_ok, a_ok, nodes)
            dev = _deviations(s, blocks, method, reps, rng, res, noise, multiplier)  # type: ignore[arg-type]
            boot_se = np.sqrt(np.mean(dev * dev, axis=1))
            if simultaneous:
                # sup-t: the critical value comes from the bootstrap process standardised by its own
                # scale (it depends on the correlations only); the band's width follows the smooth
                # analytic scale, because a wild-bootstrap scale inherits the noise of single squared
                # residuals, which a maximum over many points turns into under-coverage
                with np.errstate(divide="ignore", invalid="ignore"):
                    stat = np.abs(dev) / boot_se[:, None]
                stat = np.where(np.isfinite(stat), stat, 0.0)
                crit = float(np.quantile(stat.max(axis=0), lev))
                lower[ok] = centre[ok] - crit * scale
                upper[ok] = centre[ok] + crit * scale
                se[ok] = scale
            # pointwise basic intervals; a simultaneous band never lies inside them
            factor = _small_sample_factor(blocks, s.sample.ws, lev) if method == "wild_bootstrap" else 1.0
            q_lo, q_hi = np.quantile(dev, [alpha / 2.0, 1.0 - alpha / 2.0], axis=1)
            pw_lower = centre[ok] - factor * q_hi
            pw_upper = centre[ok] - factor * q_lo
            if simultaneous:
                lower[ok] = np.minimum(lower[ok], pw_lower)
                upper[ok] = np.maximum(upper[ok], pw_upper)
            else:
                lower[ok], upper[ok] = pw_lower, pw_upper
                se[ok] = boot_se
    noise_kind = "residuals" if noise is None else noise.kind
    return Bands(
        lower=_unsort(lower, perm),
        upper=_unsort(upper, perm),
        se=_unsort(se, perm),
        estimate=_unsort(np.where(ok, centre, np.nan), perm),
        method=method,
        level=lev,
        simultaneous=simultaneous,
        replicates=reps,
        seed=seed_used,
        critical_value=crit,
        bias_corrected=bool(bias_correction),
        centre_degree=degree,
        noise=noise_kind,
        warnings=_cautions(s, t, centre, fit, simultaneous, noise_known=noise_known),
    )


# ---------------------------------------------------------------------------
# public: prediction intervals and slopes
# ---------------------------------------------------------------------------


def prediction_interval(smoother: "Smoother", points: Any, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Interval that holds a new observation (unit weight) at each point with probability ``level``.

    ``m(t) +- z sqrt(se(t)^2 + sigma^2(t))``: the curve's sampling variance
    plus the local noise variance (constant when the data show no unequal
    noise; see the module notes). ``m`` and ``se`` are those of the
    bias-corrected centre the bands use, so the interval for a new observation
    always contains the band for the curve (outside the data, where the
    corrected fit's variance grows fastest, a plain-fit interval would not).

    Notes
    -----
    Pointwise; assumes roughly normal noise. Outside the data range the
    interval is still given (noise scale of the nearest end) but it is an
    extrapolation the data do not support: check ``smoother.extrapolated``.
    """
    s = smoother
    t = _points(points)
    lev = _level(level)
    ts, perm = _sorted(t)
    fit = _local_fit(s, ts, _centre_degree(s.degree))
    centre = fit.beta[:, 0] + s.sample.y_centre
    a = _coefficient_row(fit, 0, s.bandwidth)
    noise = _noise_scale(s)
    var_curve = _variance(s, ts, np.nan_to_num(a), _noise_column(s, noise))
    half = float(ndtri(0.5 + lev / 2.0)) * np.sqrt(var_curve + noise.at(ts))
    lower = np.where(np.isfinite(centre), centre - half, np.nan)
    upper = np.where(np.isfinite(centre), centre + half, np.nan)
    return _unsort(lower, perm), _unsort(upper, perm)


def slope_summary(
    smoother: "Smoother", level: float = 0.95, at: float | None = None, *, bias_correction: bool = False
) -> SlopeSummary:
    """Is the fitted trend rising, falling or flat at the last data point (or at ``at``)?

    The slope is ``smoother.slope`` at the point: at the edge of the data it is
    the trend of the local fit over the last window (about one bandwidth), not
    an instantaneous derivative. Its interval is ``slope +- z se`` with the
    analytic standard error from the local noise scale.

    Parameters
    ----------
    smoother : Smoother
        Degree >= 1.
    level : float
    at : float, optional
        Defaults to the largest ``x``.
    bias_correction : bool
        Centre and scale from the fit one degree higher (robust bias
        correction for the derivative). Off by default: at the edge of the
        data it multiplies the standard error by about 3.5, so the summary
        would say ``"flat"`` for all but the steepest trends.

    Returns
    -------
    SlopeSummary
        ``direction`` is ``"up"`` / ``"down"`` when the whole interval is
        above / below zero, else ``"flat"``. Pointwise: one point, one level.
    """
    s = smoother
    if s.degree < 1:
        raise ValueError("slope needs degree >= 1 (a local linear or quadratic fit)")
    lev = _level(level)
    x0 = s.x_max if at is None else float(_points([at])[0])
    t = np.array([x0])
    slope = float(s.slope(t)[0])
    fit = _local_fit(s, t, s.degree + 1 if bias_correction else s.degree)
    a = _coefficient_row(fit, 1, s.bandwidth)
    centre = float(fit.beta[0, 1] / s.bandwidth) if fit.degree_used[0] >= 1 else math.nan
    se = math.nan
    if math.isfinite(centre):
        se = float(np.sqrt(_variance(s, t, a, _noise_column(s, _noise_scale(s))))[0])
    z = float(ndtri(0.5 + lev / 2.0))
    lower, upper = centre - z * se, centre + z * se
    if lower > 0:
        direction = "up"
    elif upper < 0:
        direction = "down"
    else:
        direction = "flat"
    warnings = _cautions(s, t, np.array([centre]), fit, True)
    return SlopeSummary(x0, slope, lower, upper, se, lev, direction, bool(s.extrapolated(t)[0]), warnings)
