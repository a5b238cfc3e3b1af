"""Serially correlated noise: diagnosis, long-run variance, a bandwidth criterion, band scaling.

Readings in time order (``x`` is time) often carry noise whose neighbours are
positively correlated. Criteria built for independent noise (GCV, leave-one-out)
then take the correlated part of the noise for signal and choose a bandwidth
that follows it, and standard errors computed from the marginal noise variance
are too small. This module holds the numerics for that case; everything is
``O(n)`` or ``O(n L)`` with ``L`` the number of correlated neighbours kept.

Noise model
-----------
The noise ``e_i`` of the readings in ``x`` order is taken as stationary with
autocovariance ``gamma(k)``; the working model is a first-order autoregression,
``gamma(k) = gamma(0) phi^|k|`` (Box & Jenkins 1976, Section 3.2.4). Readings
sharing one ``x`` are averaged first (their order is arbitrary), so the series
is the tie-group means in ascending ``x``.

Diagnosis (:func:`diagnose_noise`)
    Difference-based, no pilot fit: for a smooth mean curve sampled densely,
    first differences ``d_i = y_{i+1} - y_i`` are differences of the noise up to
    ``O(1/n)`` (Hall & Van Keilegom 2003). With ``D_k`` the mean squared lag-``k``
    difference, ``E D_k = 2 gamma(0) (1 - rho(k))``, so under AR(1)
    ``phi = D_2 / D_1 - 1`` and ``gamma(0) = D_1 / (2 (1 - phi))``. The test
    statistic is the lag-1 autocorrelation ``r`` of the differences, which is
    ``-1/2`` for independent noise; by Bartlett's formula (Box & Jenkins 1976,
    eq. 2.1.13, for the MA(1) with ``rho_1 = -1/2``) ``Var r = 1 / (2 N)``
    under independence, and ``z = (r + 1/2) sqrt(2 N)`` is referred to the
    standard normal, two-sided. The estimate ``phi = 1 + 2 r`` (the same
    quantity: ``D_2 / D_1 - 1``). The trend enters ``D_k`` as ``(k m' dx)^2``;
    when that is not small against the noise, pass ``trend`` (fitted values of
    any pilot) and the differences are taken of ``y - trend``.

Long-run variance
    ``sigma^2_LR = sum_k gamma(k)``, the variance factor of a mean over many
    correlated readings; for AR(1) ``gamma(0) (1 + phi) / (1 - phi)``
    (:func:`ar1_long_run_variance`). :func:`newey_west_variance` is the
    nonparametric estimate from a residual series (Newey & West 1987, Bartlett
    weights, lag by Andrews 1991's AR(1) plug-in rule); it needs a residual series
    free of trend, which under correlation a pilot fit does not deliver (it
    follows the noise), so the service uses the difference-based AR(1) value.

Bandwidth criterion (:func:`correlated_scores`)
    ``risk``: Mallows-type estimate of the prediction risk with the noise
    autocovariance (Altman 1990, eq. 8),
    ``R(h) = n^-1 RSS(h) + 2 n^-1 sum_i sum_j L_ij gamma(|i - j|) - gamma(0)``,
    whose expectation is the average squared error of the fit for any linear
    smoother ``L``. Only the hat entries within ``L`` readings of the diagonal
    are needed (``gamma`` is cut where ``|phi|^k < 1e-3``), each from the local
    system already solved for the fit, so a candidate costs ``O(n L)`` after the
    moment sums.
    ``leave_out``: modified (leave-(2l+1)-out) cross-validation (Chu & Marron
    1991; Hart 1991): each reading is predicted without the ``l`` readings on
    either side (and any reading sharing their ``x``). Computed exactly by
    removing those ``2l+1`` readings' terms from the windowed moment sums at
    the data points and solving the local normal equations again, ``O(n l)``.
    ``l`` is the smallest lag with ``phi^l < 0.05``.
    Long series (more than :data:`AGGREGATE_READINGS` readings) are scored on
    the means of ``b`` consecutive readings (:func:`aggregate_readings`), with
    the exclusion ``ceil(l / b) + 1`` means and the autocovariance of the means
    (exact for the AR(1) model); a local fit whose window spans many such means
    differs from the fit to the readings by ``O((b / (n h))^2)``, and at
    ``n = 10^6`` the smallest default candidate already spans about 60
    readings. The criterion is averaged over at most :data:`PROBE_READINGS`
    evenly spaced readings (the fit always uses all).

Standard errors and bands
    For a linear estimate ``sum_i l_i y_i`` with weights spread over many
    more readings than the correlation length,
    ``Var = sum_i sum_j l_i l_j gamma(|i-j|) ~ sigma^2_LR sum_i l_i^2``
    (exact for constant weights; otherwise conservative, since
    ``sum_i l_i l_{i+k} <= sum_i l_i^2``). The independent-noise standard error
    ``sigma sqrt(sum l_i^2)`` is therefore scaled by
    ``sqrt(sigma^2_LR) / sigma`` (:func:`correlated_se_factor`). A prediction
    interval for a new reading adds the reading's own marginal variance
    ``gamma(0)``, not the long-run variance.

Caution
-------
No method can tell slow real variation apart from strongly correlated noise at
every bandwidth: a wandering that lasts many readings is, in a single series,
equally well explained as signal or as noise. The difference-based estimates
look only at neighbouring readings; they treat as noise what changes from one
reading to the next and as signal what persists.

References
----------
.. [1] Altman, N. S. (1990). Kernel smoothing of data with correlated errors.
   *J. Amer. Statist. Assoc.* 85, 749-759.
.. [2] Chu, C.-K. and Marron, J. S. (1991). Comparison of two bandwidth
   selectors with dependent errors. *Ann. Statist.* 19, 1906-1918.
.. [3] Hart, J. D. (1991). Kernel regression estimation with time series
   errors. *J. R. Statist. Soc. B* 53, 173-187.
.. [4] Hall, P. and Van Keilegom, I. (2003). Using difference-based methods
   for inference in nonparametric regression with time series errors.
   *J. R. Statist. Soc. B* 65, 443-456.
.. [5] Box, G. E. P. and Jenkins, G. M. (1976). *Time Series Analysis:
   Forecasting and Control*, revised ed. Holden-Day.
.. [6] Newey, W. K. and West, K. D. (1987). A simple, positive semi-definite,
   heteroskedasticity and autocorrelation consistent covariance matrix.
   *Econometrica* 55, 703-708.
.. [7] Andrews, D. W. K. (1991). Heteroskedasticity and autocorrelation
   consistent covariance matrix estimation. *Econometrica* 59, 817-858.
.. [8] Opsomer, J., Wang, Y. and Yang, Y. (2001). Nonparametric regression
   with correlated errors. *Statist. Sci.* 16, 134-153.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import ndtr

from ._compiled_serial import difference_sums
from .cautions import Caution
from .kernels import Kernel
from .sums import moment_sums

__all__ = [
    "NoiseDiagnosis",
    "SerialScores",
    "CRITERIA",
    "DIAGNOSIS_LEVEL",
    "series_in_x_order",
    "diagnose_noise",
    "ar1_long_run_variance",
    "newey_west_variance",
    "correlated_scores",
    "correlated_se_factor",
    "exclusion_lag",
    "aggregate_readings",
]

CRITERIA = ("risk", "leave_out")
#: default size of the diagnosis test (two-sided)
DIAGNOSIS_LEVEL = 0.01
#: the AR(1) estimate is kept inside this range (a unit root is not a stationary noise)
PHI_LIMIT = 0.98
#: autocovariances are cut at the lag where |phi|^k falls below this
GAMMA_CUT = 1e-3
#: most lags kept
MAX_LAG = 200
#: leave-out: the readings within the lag where phi^l falls below this are left out
EXCLUSION_CUT = 0.05
#: criteria are averaged over at most this many evenly spaced readings
PROBE_READINGS = 20000
#: longer series are scored on means of consecutive readings (see :func:`aggregate_readings`)
AGGREGATE_READINGS = 50000
#: leave-out: a prediction from less than this share of the window's kernel weight is not scored
REMAINING_CUT = 1e-10
_SINGULAR = 1e-10


# ---------------------------------------------------------------------------
# the series and the diagnosis
# ---------------------------------------------------------------------------


def series_in_x_order(x: np.ndarray, y: np.ndarray, weights: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The readings as a series in ascending ``x``: tie groups averaged (weighted), stable order.

    Returns
    -------
    xg, yg, count : ndarray
        Distinct ``x``, weighted mean ``y`` of each, and the summed weight of each.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    w = np.ones_like(x) if weights is None else np.asarray(weights, dtype=float)
    if x.size > 1 and not np.all(x[1:] >= x[:-1]):
        order = np.argsort(x, kind="stable")
        x, y, w = x[order], y[order], w[order]
    keep = w > 0
    if not keep.all():
        x, y, w = x[keep], y[keep], w[keep]
    if x.size == 0:
        return x, y, w
    new = np.empty(x.size, dtype=bool)
    new[0] = True
    new[1:] = x[1:] != x[:-1]
    if new.all():
        return x, y, w
    starts = np.flatnonzero(new)
    wsum = np.add.reduceat(w, starts)
    return x[starts], np.add.reduceat(w * y, starts) / wsum, wsum


@dataclass(frozen=True)
class NoiseDiagnosis:
    """Serial correlation of the noise in ``x`` order (see the module notes).

    Attributes
    ----------
    autocorrelation : float
        Lag-1 autocorrelation ``phi`` of the noise (AR(1) estimate, clipped to
        ``+-PHI_LIMIT``).
    statistic : float
        ``z``, standard normal under independent noise.
    p_value : float
        Two-sided.
    correlated : bool
        ``p_value < level``.
    level : float
    marginal_variance : float
        ``gamma(0)``, the variance of one reading about the curve.
    long_run_variance : float
        ``gamma(0) (1 + phi) / (1 - phi)``.
    length : int
        Length of the series (distinct ``x`` values).
    """

    autocorrelation: float
    statistic: float
    p_value: float
    correlated: bool
    level: float
    marginal_variance: float
    long_run_variance: float
    length: int

    def autocovariance(self, max_lag: int | None = None) -> np.ndarray:
        """``gamma(0), gamma(1), ...`` of the AR(1) model, up to the cut-off lag (:func:`model_lags`)."""
        lags = model_lags(self.autocorrelation) if max_lag is None else int(max_lag)
        return self.marginal_variance * self.autocorrelation ** np.arange(lags + 1)

    def caution(self) -> Caution:
        """The ``correlated_noise`` caution with the estimate in its sentence."""
        return Caution(
            "correlated_noise",
            f"the noise of neighbouring readings is correlated (lag-1 autocorrelation {self.autocorrelation:.2f}, "
            f"p = {self.p_value:.2g}); bandwidth and bands allow for it. Slow real variation and strongly "
            "correlated noise cannot be told apart: if the wiggles are real, set noise to independent",
        )


def model_lags(phi: float) -> int:
    """Number of lags kept: smallest ``k`` with ``|phi|^k < GAMMA_CUT`` (at most :data:`MAX_LAG`)."""
    a = abs(phi)
    if a < GAMMA_CUT:
        return 0
    return int(min(MAX_LAG, math.ceil(math.log(GAMMA_CUT) / math.log(a))))


def exclusion_lag(phi: float) -> int:
    """``l`` for leave-(2l+1)-out: smallest ``l >= 1`` with ``phi^l < EXCLUSION_CUT`` (at most :data:`MAX_LAG`)."""
    if phi <= EXCLUSION_CUT:
        return 1
    return int(min(MAX_LAG, max(1, math.ceil(math.log(EXCLUSION_CUT) / math.log(phi)))))


def ar1_long_run_variance(variance: float, phi: float) -> float:
    """Long-run variance ``sum_k gamma(k) = gamma(0) (1 + phi) / (1 - phi)`` of a stationary AR(1).

    References
    ----------
    .. [1] Box, G. E. P. and Jenkins, G. M. (1976). *Time Series Analysis:
       Forecasting and Control*. Holden-Day. Section 3.2.4 (AR(1)
       autocorrelations ``phi^k``).
    """
    return float(variance) * (1.0 + phi) / (1.0 - phi)


def diagnose_noise(
    x: np.ndarray,
    y: np.ndarray,
    weights: np.ndarray | None = None,
    *,
    trend: np.ndarray | None = None,
    level: float = DIAGNOSIS_LEVEL,
) -> NoiseDiagnosis:
    """Test the noise for serial correlation in ``x`` order and estimate its AR(1) parameters.

    Parameters
    ----------
    x, y : ndarray, shape (n,)
        Readings (any order; ties are averaged).
    weights : ndarray, optional
        Zero weights leave readings out; tie groups are averaged with them.
    trend : ndarray, optional
        Fitted values of a pilot, subtracted before differencing (for curves
        that change much between neighbouring readings).
    level : float
        Size of the two-sided test.

    Returns
    -------
    NoiseDiagnosis

    Notes
    -----
    ``O(n)`` after sorting. With fewer than 8 distinct ``x`` values nothing is
    decided (``correlated`` false, NaN estimates).

    References
    ----------
    .. [1] Hall, P. and Van Keilegom, I. (2003). Using difference-based methods
       for inference in nonparametric regression with time series errors.
       *J. R. Statist. Soc. B* 65, 443-456.
    .. [2] Box, G. E. P. and Jenkins, G. M. (1976). *Time Series Analysis:
       Forecasting and Control*. Holden-Day. Eq. 2.1.13 (Bartlett's formula).
    """
    xs = np.ascontiguousarray(x, dtype=float)
    values = np.ascontiguousarray(y, dtype=float)
    if trend is not None:
        values = values - np.asarray(trend, dtype=float)
    w = np.ones_like(xs) if weights is None else np.ascontiguousarray(weights, dtype=float)
    if xs.size > 1 and not np.all(xs[1:] >= xs[:-1]):
        order = np.argsort(xs, kind="stable")
        xs, values, w = xs[order], values[order], w[order]
    # one pass over the sorted readings: the series of tie-group means and its lag-1 difference sums
    m, d1, cross = difference_sums(xs, values, w)
    if m < 8:
        nan = math.nan
        return NoiseDiagnosis(nan, nan, nan, False, level, nan, nan, m)
    if d1 <= 0.0:
        return NoiseDiagnosis(0.0, 0.0, 1.0, False, level, 0.0, 0.0, m)
    r = cross / d1
    count = m - 1
    z = (r + 0.5) * math.sqrt(2.0 * count)
    p = float(2.0 * ndtr(-abs(z)))
    phi = min(max(1.0 + 2.0 * r, -PHI_LIMIT), PHI_LIMIT)
    gamma0 = d1 / count / (2.0 * (1.0 - phi))
    return NoiseDiagnosis(phi, z, p, p < level, level, gamma0, ar1_long_run_variance(gamma0, phi), m)


def newey_west_variance(series: np.ndarray, lag: int | None = None) -> tuple[float, int]:
    """Long-run variance of a (mean-removed) series with Bartlett weights.

    ``sigma^2_LR = gamma(0) + 2 sum_{k=1}^{L} (1 - k/(L+1)) gamma(k)`` (Newey &
    West 1987). Default lag: Andrews (1991, eq. 6.4) with an AR(1) plug-in,
    ``L = floor(1.1447 (a n)^(1/3))``, ``a = 4 rho^2 / (1 - rho^2)^2``.

    Returns
    -------
    (variance, lag)

    References
    ----------
    .. [1] Newey, W. K. and West, K. D. (1987). A simple, positive
       semi-definite, heteroskedasticity and autocorrelation consistent
       covariance matrix. *Econometrica* 55, 703-708.
    .. [2] Andrews, D. W. K. (1991). Heteroskedasticity and autocorrelation
       consistent covariance matrix estimation. *Econometrica* 59, 817-858.
    """
    e = np.asarray(series, dtype=float)
    e = e - e.mean()
    n = e.size
    g0 = float(np.dot(e, e)) / n
    if g0 <= 0.0:
        return 0.0, 0
    if lag is None:
        rho = min(max(float(np.dot(e[1:], e[:-1])) / n / g0, -PHI_LIMIT), PHI_LIMIT)
        a = 4.0 * rho * rho / (1.0 - rho * rho) ** 2
        lag = int(math.floor(1.1447 * (a * n) ** (1.0 / 3.0)))
    lag = int(min(max(lag, 0), n - 1))
    total = g0
    for k in range(1, lag + 1):
        total += 2.0 * (1.0 - k / (lag + 1.0)) * float(np.dot(e[k:], e[:-k])) / n
    return total, lag


def correlated_se_factor(diagnosis: NoiseDiagnosis, residual_scale: float) -> float:
    """Factor on an independent-noise standard error ``sigma sqrt(sum l_i^2)``: ``sqrt(sigma^2_LR) / sigma``.

    ``residual_scale`` is the ``sigma`` the independent-noise standard error used.
    See the module notes (valid when the fit's weights spread over many more
    readings than the correlation length; conservative otherwise).
    """
    if not (residual_scale > 0 and math.isfinite(diagnosis.long_run_variance)):
        return math.nan
    return math.sqrt(max(diagnosis.long_run_variance, 0.0)) / residual_scale


# ---------------------------------------------------------------------------
# the bandwidth criterion
# ---------------------------------------------------------------------------


@dataclass
class SerialScores:
    """Scores of the candidates under correlated noise.

    Attributes
    ----------
    criterion : str
        ``"risk"`` or ``"leave_out"``.
    candidates, scores, score_se, effective_df : ndarray
        Per candidate (NaN where undefined). ``score_se`` from block sums of the
        per-reading contributions (blocks longer than the correlation length).
    best : int
        Index of the lowest score (the largest of equal ones).
    chosen : float
        By ``rule``: the best, or (``one_se``) the largest candidate within one
        standard error of it.
    exclusion : int
        ``l`` of leave-(2l+1)-out (0 for ``risk``).
    """

    criterion: str
    rule: str
    candidates: np.ndarray
    scores: np.ndarray
    score_se: np.ndarray
    effective_df: np.ndarray
    best: int
    chosen: float
    exclusion: int


def _local_inverse_rows(mom_s: np.ndarray, degree: int) -> np.ndarray:
    """First rows of ``S^-1`` for local systems ``S_ab = s_{a+b}`` given moments ``s_0..s_2p`` (rows). NaN where singular."""
    n = mom_s.shape[0]
    p = degree
    idx = np.arange(p + 1)
    smat = mom_s[:, idx[:, None] + idx[None, :]]
    diag = np.einsum("mii->mi", smat)
    ok = np.all(diag > 0, axis=1)
    scale = np.sqrt(np.where(ok[:, None], diag, 1.0))
    unit = smat / (scale[:, :, None] * scale[:, None, :])
    if p > 0:
        ok &= np.abs(np.linalg.det(unit)) > _SINGULAR
    rows = np.full((n, p + 1), np.nan)
    if ok.any():
        e0 = np.zeros((int(ok.sum()), p + 1, 1))
        e0[:, 0, 0] = 1.0
        sol = np.linalg.solve(unit[ok], e0 / scale[ok][:, :, None])[..., 0]
        rows[ok] = sol / scale[ok]
    return rows


def _powers(u: np.ndarray, order: int) -> np.ndarray:
    out = np.empty((order + 1,) + u.shape)
    out[0] = 1.0
    for k in range(1, order + 1):
        out[k] = out[k - 1] * u
    return out


def _probe_index(n: int) -> np.ndarray:
    if n <= PROBE_READINGS:
        return np.arange(n)
    return np.unique(np.linspace(0, n - 1, PROBE_READINGS).astype(np.int64))


def _risk_terms(
    xs: np.ndarray, yc: np.ndarray, ws: np.ndarray, kernel: Kernel, degree: int, h: float,
    gamma: np.ndarray, probe: np.ndarray,
) -> tuple[np.ndarray, float]:
    """Per-reading contributions ``(y_i - yhat_i)^2 + 2 sum_k gamma(|k|) L_{i,i+k} - gamma(0)`` at ``probe``, and ``tr L``."""
    p = degree
    n = xs.size
    q = np.stack([ws, ws * yc], axis=1)
    pts = xs[probe]
    mom = moment_sums(xs, q, pts, kernel, h, 2 * p)
    rows = _local_inverse_rows(mom[:, 0, :], p)
    fitted = np.einsum("mk,mk->m", rows, mom[:, 1, : p + 1])
    k0 = kernel.at_zero
    diag = ws[probe] * k0 * rows[:, 0]
    pen = gamma[0] * diag
    for k in range(1, gamma.size):
        for sgn in (1, -1):
            j = probe + sgn * k
            ok = (j >= 0) & (j < n)
            jj = np.where(ok, j, 0)
            u = (xs[jj] - pts) / h
            hat = ws[jj] * kernel(u) * np.einsum("km,mk->m", _powers(u, p), rows)
            pen += gamma[k] * np.where(ok, hat, 0.0)
    contrib = (yc[probe] - fitted) ** 2 + 2.0 * pen - gamma[0]
    trace = float(np.sum(diag)) * n / probe.size
    return contrib, trace


def _leave_out_terms(
    xs: np.ndarray, yc: np.ndarray, ws: np.ndarray, kernel: Kernel, degree: int, h: float,
    lag: int, probe: np.ndarray,
) -> tuple[np.ndarray, float]:
    """Per-reading leave-(2l+1)-out losses at ``probe``, and ``tr L`` (see the module notes)."""
    p = degree
    n = xs.size
    q = np.stack([ws, ws * yc], axis=1)
    pts = xs[probe]
    mom = moment_sums(xs, q, pts, kernel, h, 2 * p)
    full_rows = _local_inverse_rows(mom[:, 0, :], p)
    trace = float(np.sum(ws[probe] * kernel.at_zero * full_rows[:, 0])) * n / probe.size
    # left-out range: readings whose x lies between x_{i-l} and x_{i+l} (whole tie groups)
    lo = np.searchsorted(xs, xs[np.maximum(probe - lag, 0)], side="left")
    hi = np.searchsorted(xs, xs[np.minimum(probe + lag, n - 1)], side="right")
    s = mom[:, 0, :].copy()
    t = mom[:, 1, : p + 1].copy()
    left = int(np.max(probe - lo))
    right = int(np.max(hi - probe))
    for off in range(-left, right):
        j = probe + off
        ok = (j >= lo) & (j < hi)
        jj = np.where(ok, j, 0)
        u = (xs[jj] - pts) / h
        kw = np.where(ok, ws[jj] * kernel(u), 0.0)
        pw = _powers(u, 2 * p)
        s -= (kw * pw).T
        t -= (kw * yc[jj] * pw[: p + 1]).T
    # numerical residue of the subtraction: when the readings kept carry less than REMAINING_CUT of the
    # window's kernel weight, the subtraction has lost the digits of the prediction (undefined, NaN)
    kept = s[:, 0] > REMAINING_CUT * np.maximum(mom[:, 0, 0], 0.0)
    s[~kept] = np.nan
    rows = _local_inverse_rows(s, p)
    pred = np.einsum("mk,mk->m", rows, t)
    return (yc[probe] - pred) ** 2, trace


def aggregate_readings(x: np.ndarray, y: np.ndarray, w: np.ndarray, size: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Weighted means of ``x`` and ``y`` over consecutive runs of ``size`` readings, and the summed weights."""
    n = x.size
    starts = np.arange(0, n, size)
    wsum = np.add.reduceat(w, starts)
    return np.add.reduceat(w * x, starts) / wsum, np.add.reduceat(w * y, starts) / wsum, wsum


def _aggregated_autocovariance(gamma: np.ndarray, size: int) -> np.ndarray:
    """Autocovariance of means of ``size`` consecutive readings: ``b^-2 sum_d (b - |d|) gamma(|k b + d|)``."""
    b = size
    d = np.arange(-(b - 1), b)
    wts = (b - np.abs(d)) / float(b * b)
    lags = int(math.ceil((gamma.size - 1) / b)) + 1
    ext = np.zeros(lags * b + b + 1)
    ext[: gamma.size] = gamma
    return np.array([float(np.sum(wts * ext[np.abs(k * b + d)])) for k in range(lags + 1)])


def _block_se(contrib: np.ndarray, block: int, n: int) -> float:
    """SE of ``n^-1 sum_i c_i`` (probe readings standing for all ``n``) from sums over blocks of ``block`` readings."""
    m = contrib.size
    nb = m // block
    if nb < 2 or not np.all(np.isfinite(contrib)):
        return math.nan
    sums = contrib[: nb * block].reshape(nb, block).sum(axis=1)
    # the sum over all m probe readings has variance ~ (m / block) var(block sum); scale m to n
    return math.sqrt(m / block) * float(np.std(sums, ddof=1)) / m


def correlated_scores(
    x: np.ndarray,
    y: np.ndarray,
    candidates: np.ndarray,
    diagnosis: NoiseDiagnosis,
    *,
    kernel: Kernel,
    degree: int = 1,
    weights: np.ndarray | None = None,
    criterion: str = "risk",
    rule: str = "min",
    fallback_largest: bool = False,
) -> SerialScores:
    """Score candidate bandwidths for noise with the diagnosed serial correlation.

    Parameters
    ----------
    x, y : ndarray, shape (n,)
        Readings, ``x`` ascending (sorted once by the caller; ties allowed).
    candidates : ndarray
        Candidate bandwidths, ascending.
    diagnosis : NoiseDiagnosis
        Supplies ``phi`` and ``gamma(0)`` (see :func:`diagnose_noise`).
    kernel : Kernel
    degree : {0, 1, 2}
    weights : ndarray, optional
        Fit weights (the noise model ignores them).
    criterion : {"risk", "leave_out"}
        See the module notes.
    rule : {"min", "one_se"}
    fallback_largest : bool
        When no candidate can be scored (the readings left out cover every
        window), choose the largest candidate instead of raising.

    Returns
    -------
    SerialScores

    References
    ----------
    .. [1] Altman, N. S. (1990). Kernel smoothing of data with correlated
       errors. *J. Amer. Statist. Assoc.* 85, 749-759.
    .. [2] Chu, C.-K. and Marron, J. S. (1991). Comparison of two bandwidth
       selectors with dependent errors. *Ann. Statist.* 19, 1906-1918.
    .. [3] Hart, J. D. (1991). Kernel regression estimation with time series
       errors. *J. R. Statist. Soc. B* 53, 173-187.
    """
    if criterion not in CRITERIA:
        raise ValueError(f"unknown criterion {criterion!r}; choose one of {', '.join(CRITERIA)}")
    if rule not in ("min", "one_se"):
        raise ValueError(f"unknown rule {rule!r}; choose min or one_se")
    xs = np.asarray(x, dtype=float)
    ys = np.asarray(y, dtype=float)
    ws = np.ones_like(xs) if weights is None else np.asarray(weights, dtype=float)
    if xs.size > 1 and not np.all(xs[1:] >= xs[:-1]):
        raise ValueError("x must be ascending (sort the readings once before scoring)")
    grid = np.asarray(candidates, dtype=float)
    phi = diagnosis.autocorrelation if math.isfinite(diagnosis.autocorrelation) else 0.0
    gamma = diagnosis.autocovariance() if math.isfinite(diagnosis.marginal_variance) else np.zeros(1)
    lag = exclusion_lag(phi) if criterion == "leave_out" else 0
    reported_lag = lag
    if xs.size > AGGREGATE_READINGS:
        size = int(math.ceil(xs.size / AGGREGATE_READINGS))
        xs, ys, ws = aggregate_readings(xs, ys, ws, size)
        gamma = _aggregated_autocovariance(gamma, size)
        lag = int(math.ceil(lag / size)) + 1 if lag else 0
    yc = ys - float(np.sum(ws * ys) / np.sum(ws))
    n = xs.size
    probe = _probe_index(n)
    # blocks for the SE: several correlation lengths of readings, at least 2 probe readings
    spacing = max(n / probe.size, 1.0)
    block = max(2, int(math.ceil(4 * max(gamma.size - 1, lag, 1) / spacing)))
    scores = np.full(grid.size, np.nan)
    ses = np.full(grid.size, np.nan)
    dfs = np.full(grid.size, np.nan)
    for i, h in enumerate(grid):
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            if criterion == "risk":
                contrib, trace = _risk_terms(xs, yc, ws, kernel, degree, float(h), gamma, probe)
            else:
                contrib, trace = _leave_out_terms(xs, yc, ws, kernel, degree, float(h), lag, probe)
        dfs[i] = trace
        if np.all(np.isfinite(contrib)):
            scores[i] = float(np.mean(contrib))
            ses[i] = _block_se(contrib, block, n)
    if not np.isfinite(scores).any():
        if fallback_largest:
            last = grid.size - 1
            return SerialScores(criterion, rule, grid, scores, ses, dfs, last, float(grid[last]), reported_lag)
        raise ValueError("no candidate bandwidth could be scored for correlated noise; widen the range")
    best = int(np.nanargmin(scores))
    tied = np.flatnonzero(np.isfinite(scores) & (scores <= scores[best] + 1e-12 * abs(scores[best])))
    best = int(tied.max())
    chosen_i = best
    if rule == "one_se" and math.isfinite(ses[best]):
        within = np.flatnonzero(np.isfinite(scores) & (scores <= scores[best] + ses[best]))
        chosen_i = int(within.max())
    return SerialScores(criterion, rule, grid, scores, ses, dfs, best, float(grid[chosen_i]), reported_lag)
