"""Outlier-resistant weights: Cleveland's robustness iterations, then a reweighting step.

The robust fit of :func:`estimators.fit` (``robust=True``) is a local polynomial fit with the
weights ``w_i v_i``, where ``v_i`` are robustness weights found here:

1. A Huber M-step from the plain fit's residuals (see :func:`huber_weights`), then
   Cleveland's (1979) robustness iterations. From the fit's residuals ``r_i`` and
   ``s = median |r_i|``, every reading gets the bisquare weight ``B(r_i / (6 s))`` with
   ``B(u) = (1 - u^2)^2`` for ``|u| < 1`` and 0 otherwise, and the curve is fitted again with
   those weights; two iterations, as recommended there.
2. A reweighting step in the manner of reweighted least squares (Rousseeuw & Leroy 1987,
   Section 1.2; Gervini & Yohai 2002): the readings the last bisquare step gives no weight
   (``|r_i| >= 6 s``) are left out, every other reading keeps its full weight.

The final fit is then an ordinary linear smoother of the readings that are kept, so its
standard errors, bands and prediction intervals are those of a weighted fit with known weights,
and on data without outliers (no residual beyond ``6 s``, about 4 noise standard deviations
for normal noise) it is the plain fit exactly: the price of robustness is nil there
(Gervini & Yohai 2002 show the reweighted estimator keeps the efficiency of least squares at
the normal).

References
----------
Cleveland, W. S. (1979). Robust locally weighted regression and smoothing scatterplots.
    Journal of the American Statistical Association 74, 829-836.
Rousseeuw, P. J. & Leroy, A. M. (1987). Robust Regression and Outlier Detection. Wiley.
Gervini, D. & Yohai, V. J. (2002). A class of robust and fully efficient regression estimators.
    The Annals of Statistics 30, 583-616.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .kernels import Kernel
from .local_poly import LocalPolynomial
from .sample import SortedSample

__all__ = ["ROBUSTNESS_ITERATIONS", "SCALE_MULTIPLE", "ResistantFit", "RobustWeights", "bisquare", "bisquare_weights", "resistant_weights"]

#: residuals are scaled by this multiple of their median absolute value (Cleveland 1979, Section 2)
SCALE_MULTIPLE = 6.0
#: number of robustness iterations (Cleveland 1979 finds two adequate)
ROBUSTNESS_ITERATIONS = 2


def bisquare(u: np.ndarray) -> np.ndarray:
    """Tukey's bisquare weight function ``B(u) = (1 - u^2)^2`` for ``|u| < 1``, else 0 (Cleveland 1979, eq. 2.2)."""
    a = np.asarray(u, dtype=float)
    inside = np.abs(a) < 1.0
    out: np.ndarray = np.where(inside, (1.0 - np.where(inside, a, 0.0) ** 2) ** 2, 0.0)
    return out


def bisquare_weights(residuals: np.ndarray, counted: np.ndarray) -> tuple[np.ndarray, float]:
    """Robustness weights ``B(r_i / (6 s))`` with ``s`` the median of ``|r_i|`` over ``counted`` readings.

    Readings whose residual is undefined (NaN, no data in the window) keep weight 1. When ``s`` is 0
    (more than half the readings fitted exactly) the mean absolute residual takes its place; when
    that is 0 too, every weight is 1.

    Returns
    -------
    weights : ndarray
    scale : float
        ``6 s``, the residual size at and beyond which the weight is 0.
    """
    r = np.asarray(residuals, dtype=float)
    finite = np.isfinite(r)
    use = finite & counted
    if not use.any():
        return np.ones(r.size), float("nan")
    a = np.abs(r[use])
    s = float(np.median(a))
    if s <= 0.0:
        s = float(np.mean(a))
    if s <= 0.0:
        return np.ones(r.size), 0.0
    cut = SCALE_MULTIPLE * s
    out = np.ones(r.size)
    out[finite] = bisquare(r[finite] / cut)
    return out, cut


def huber_weights(residuals: np.ndarray, counted: np.ndarray) -> np.ndarray:
    """Huber's weights ``min(1, c / |r_i / sigma|)``, ``c = 1.345``, ``sigma = 1.4826 median |r_i|``.

    A monotone M-step gives no reading zero weight, so a gross outlier cannot empty the windows of
    its neighbours before the redescending (bisquare) steps; the usual start for a redescending
    M-estimator (Maronna, Martin & Yohai 2006, Section 4.4.2). ``1.4826`` makes the median
    absolute residual consistent for the normal standard deviation, and ``c = 1.345`` gives 95 %
    efficiency at the normal (Huber 1981, Section 4.6).

    References
    ----------
    Huber, P. J. (1981). Robust Statistics. Wiley.
    Maronna, R. A., Martin, R. D. & Yohai, V. J. (2006). Robust Statistics: Theory and Methods. Wiley.
    """
    r = np.asarray(residuals, dtype=float)
    finite = np.isfinite(r)
    use = finite & counted
    out = np.ones(r.size)
    if not use.any():
        return out
    sigma = _MAD_TO_SD * float(np.median(np.abs(r[use])))
    if sigma <= 0.0:
        return out
    a = np.abs(r[finite]) / sigma
    out[finite] = np.where(a > _HUBER_C, _HUBER_C / np.maximum(a, _HUBER_C), 1.0)
    return out


_MAD_TO_SD = 1.4826
_HUBER_C = 1.345


@dataclass
class RobustWeights:
    """Robustness weights of a resistant fit, in the caller's order.

    Attributes
    ----------
    weights : ndarray
        ``v_i`` in {0, 1}: 0 for a reading left out as an outlier.
    bisquare : ndarray
        The bisquare weights of the last robustness iteration, in [0, 1].
    cutoff : float
        ``6 s``: residuals at least this large are left out.
    """

    weights: np.ndarray
    bisquare: np.ndarray
    cutoff: float

    @property
    def n_rejected(self) -> int:
        return int(np.count_nonzero(self.weights == 0.0))


class ResistantFit:
    """What a fitted smoother says of its robustness weights (mixed into the gaussian and the count smoothers)."""

    #: robustness weights of a resistant fit (``robust=True``), else None
    robustness: RobustWeights | None = None

    @property
    def robust(self) -> bool:
        """True for a resistant fit (``robust=True``)."""
        return self.robustness is not None

    @property
    def robustness_weights(self) -> np.ndarray | None:
        """Robustness weights in the caller's order (0 for a reading left out as an outlier), or None."""
        return None if self.robustness is None else self.robustness.weights.copy()


def resistant_weights(
    sample: SortedSample,
    kernel: Kernel,
    degree: int,
    bandwidth: float,
    engine: str = "auto",
    start: np.ndarray | None = None,
    iterations: int = ROBUSTNESS_ITERATIONS,
    residuals: Callable[[SortedSample], np.ndarray] | None = None,
) -> RobustWeights:
    """Robustness weights at a fixed bandwidth (see the module notes).

    Parameters
    ----------
    sample : SortedSample
        The readings with the caller's weights.
    start : ndarray, optional
        Robustness weights (caller's order) to start from instead of a Huber step from the
        unweighted fit.
    iterations : int
        Number of bisquare reweightings.
    residuals : callable, optional
        ``residuals(weighted_sample)``: the (standardised) residuals, caller's order, of the fit
        to a reweighted sample; default the local polynomial fit's ``y - fitted``.
    """
    counted = sample.w > 0

    def resid(smp: SortedSample) -> np.ndarray:
        if residuals is not None:
            return residuals(smp)
        out: np.ndarray = LocalPolynomial(smp, kernel, degree, bandwidth, engine).residuals()
        return out

    if start is None:
        v = huber_weights(resid(sample), counted)
    else:
        v = np.asarray(start, dtype=float)
    b, cut = v, float("nan")
    for _ in range(max(int(iterations), 1)):
        b, cut = bisquare_weights(resid(sample.reweighted(v) if np.any(v != 1.0) else sample), counted)
        if not np.any(counted & (b > 0)):
            break  # every reading would drop out: keep the previous weights
        v = b
    hard = np.where(b > 0.0, 1.0, 0.0)
    if np.count_nonzero(counted & (hard > 0)) < degree + 2:
        hard = np.ones(sample.n)  # too few readings would remain: no reading is left out
    return RobustWeights(hard, b, cut)
