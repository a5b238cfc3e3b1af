"""The public entry point: :func:`fit` and the :class:`Smoother` it returns.

Composes the layers below: the core local fits (:mod:`estimators.local_poly`), automatic bandwidth
selection (:mod:`estimators.bandwidth`) and uncertainty (:mod:`estimators.uncertainty`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import replace
from typing import Any, cast

import numpy as np

from .bandwidth import Selection, select_for_sample
from .bandwidth.choices import check_degree
from .bandwidth.rule_of_thumb import rule_of_thumb_bandwidth
from .cautions import Caution
from .kernels import Kernel, get_kernel
from .local_poly import ENGINES, LocalPolynomial
from .names import FAMILIES
from .poisson import check_counts, poisson_fit, resistant_poisson_fit
from .robust import RobustWeights, resistant_weights
from .sample import SortedSample, validate_sample
from .uncertainty import Bands, bands, prediction_interval, standard_error

__all__ = ["Smoother", "fit"]


class Smoother(LocalPolynomial):
    """A fitted kernel smoother; see :func:`fit`.

    The local fits come from :class:`estimators.local_poly.LocalPolynomial`;
    this class adds the selection record and the uncertainty methods.
    """

    def __init__(
        self,
        sample: SortedSample,
        kernel: Kernel,
        degree: int,
        bandwidth: float,
        engine: str = "auto",
        selection: Selection | None = None,
        cautions: Sequence[Caution] = (),
        robustness: RobustWeights | None = None,
    ) -> None:
        super().__init__(sample, kernel, degree, bandwidth, engine, cautions)
        self.selection = selection
        #: robustness weights of a resistant fit (``robust=True``), else None
        self.robustness = robustness

    @property
    def robust(self) -> bool:
        """True for a resistant fit (``robust=True``)."""
        return self.robustness is not None

    @property
    def robustness_weights(self) -> np.ndarray | None:
        """Robustness weights in the caller's order (0 for a reading left out as an outlier), or None."""
        return None if self.robustness is None else self.robustness.weights.copy()

    @property
    def warnings(self) -> list[Caution]:
        """Fit-level cautions (few points, degree reduced at the data, selection cautions)."""
        out = list(self.cautions)
        if self.selection is not None:
            out.extend(self.selection.warnings)
        return out

    # -- uncertainty (see estimators.uncertainty) --------------------------
    def standard_error(self, points: Any, *, robust: bool = False) -> np.ndarray:
        """Pointwise standard error of the curve estimate (see :func:`estimators.uncertainty.standard_error`)."""
        return standard_error(self, points, robust=robust)

    def bands(
        self,
        points: Any,
        level: float = 0.95,
        method: str = "wild_bootstrap",
        replicates: int = 500,
        seed: int | None = 0,
        simultaneous: bool = False,
        **options: Any,
    ) -> Bands:
        """Confidence bands for the curve; pointwise unless ``simultaneous``.

        Further keyword options (``multiplier``, ``bias_correction``, ``engine``)
        pass through to :func:`estimators.uncertainty.bands`.
        """
        return bands(
            self, points, level=level, method=method, replicates=replicates, seed=seed, simultaneous=simultaneous,
            **options,
        )

    def prediction_interval(self, points: Any, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
        """Interval for a new observation at ``points`` (curve uncertainty plus noise)."""
        return prediction_interval(self, points, level=level)


def fit(
    x: Any,
    y: Any,
    *,
    kernel: str = "gaussian",
    degree: int = 1,
    bandwidth: float | str = "auto",
    weights: Any = None,
    selector: str = "gcv",
    rule: str = "min",
    engine: str = "auto",
    candidates: int = 40,
    bandwidth_min: float | None = None,
    bandwidth_max: float | None = None,
    robust: bool = False,
    family: str = "gaussian",
) -> Smoother:
    """Fit a local polynomial kernel smoother.

    Parameters
    ----------
    x, y : array_like, shape (n,)
        Data, any order; ties allowed.
    kernel : str
        One of :data:`estimators.KERNELS`.
    degree : {0, 1, 2}
        0 Nadaraya-Watson, 1 local linear (default), 2 local quadratic.
    bandwidth : float or "auto"
        In ``x`` units, on the kernel's own scale; ``"auto"`` selects it with
        ``selector`` and ``rule`` (see :func:`estimators.select_bandwidth`).
    weights : array_like, optional
        Non-negative case weights (precisions); a point with weight 2 counts as
        two identical points.
    engine : {"auto", "exact", "binned"}
        See :func:`estimators.local_poly.choose_engine`.
    robust : bool
        Outlier-resistant fit: Cleveland's (1979) bisquare robustness iterations, then the readings
        they give no weight are left out (see :mod:`estimators.robust`). With ``bandwidth="auto"``
        the criterion is computed on the readings that are kept (see :func:`_robust_fit`);
        ``selection.selector`` is then prefixed ``robust_``.
    family : {"gaussian", "poisson"}
        ``"poisson"``: counts or rates (``y >= 0``), a local log-linear likelihood fit with
        positive estimates and bands (see :mod:`estimators.poisson`; gaussian kernel, degree 0
        or 1; ``bandwidth="auto"`` minimises the local likelihood AIC, selector
        ``likelihood_aic``). With ``robust`` the resistant scheme runs on Pearson residuals
        (:func:`estimators.poisson.resistant_poisson_fit`).

    Returns
    -------
    Smoother

    Notes
    -----
    Where a window holds no data the estimate is NaN. Where it holds fewer
    distinct ``x`` values than ``degree + 1`` (or the local system is
    numerically singular) the fit at that point drops to the highest degree the
    data support; :meth:`LocalPolynomial.solve` reports the degree used.
    """
    kern = get_kernel(kernel)
    deg = check_degree(degree)
    if engine not in ENGINES:
        raise ValueError(f"unknown engine {engine!r}; choose one of {', '.join(ENGINES)}")
    if family not in FAMILIES:
        raise ValueError(f"unknown family {family!r}; choose one of {', '.join(FAMILIES)}")
    if family == "poisson":
        check_counts(y)
    sample = validate_sample(x, y, weights)
    if family == "poisson":
        if isinstance(bandwidth, str) and bandwidth != "auto":
            raise ValueError(f"bandwidth must be a positive number or 'auto', got {bandwidth!r}")
        bw = bandwidth if isinstance(bandwidth, str) else _check_bandwidth(bandwidth)
        count_fit = resistant_poisson_fit if robust else poisson_fit
        return cast(Smoother, count_fit(sample, kern, deg, bw, engine, candidates, bandwidth_min, bandwidth_max))
    if robust and isinstance(bandwidth, str):
        return _robust_fit(
            sample, kern, deg, bandwidth, engine,
            dict(selector=selector, rule=rule, candidates=candidates, bandwidth_min=bandwidth_min, bandwidth_max=bandwidth_max),
        )
    selection = None
    if isinstance(bandwidth, str):
        if bandwidth != "auto":
            raise ValueError(f"bandwidth must be a positive number or 'auto', got {bandwidth!r}")
        selection = select_for_sample(
            sample,
            kern,
            deg,
            selector=selector,
            rule=rule,
            candidates=candidates,
            bandwidth_min=bandwidth_min,
            bandwidth_max=bandwidth_max,
        )
        h = selection.chosen
    else:
        h = _check_bandwidth(bandwidth)
        with np.errstate(over="ignore", divide="ignore"):
            reach = (sample.xs[-1] - sample.xs[0]) / h
        if not math.isfinite(float(reach)) or h > 1e300:
            raise ValueError(f"bandwidth {h!r} is out of proportion to the x range; choose one nearer the data spacing")
    cautions = []
    if sample.n_used < 2 * (deg + 2):
        cautions.append(Caution("few_points", f"only {sample.n_used} points carry weight; the curve is poorly determined"))
    if robust:
        rob = resistant_weights(sample, kern, deg, h, engine)
        return Smoother(sample.reweighted(rob.weights), kern, deg, h, engine, selection, cautions, rob)
    return Smoother(sample, kern, deg, h, engine, selection, cautions)


def _robust_fit(
    sample: SortedSample, kern: Kernel, deg: int, bandwidth: str, engine: str, options: dict[str, Any]
) -> Smoother:
    """The resistant fit of :func:`fit` with ``robust=True`` and ``bandwidth="auto"``.

    A pilot bandwidth by the chosen criterion on all readings; the
    robustness weights at the pilot; the criterion again on the readings those weights keep (a
    robustness-weighted cross-validation: outlying readings enter neither the fit nor the score,
    in the spirit of the robust criteria of Leung, Marriott & Wu 1993 and Cantoni & Ronchetti
    2001); and the robustness weights at that bandwidth, starting from the first ones. The first
    weights are found at the larger of the pilot and the rule-of-thumb bandwidth, so that a
    cluster of outliers the criterion follows is still seen as one. When they leave no reading out
    the second selection would score the very same data, so the pilot's choice stands.

    References
    ----------
    Leung, D. H.-Y., Marriott, F. H. C. & Wu, E. K. H. (1993). Bandwidth selection in robust
        smoothing. Journal of Nonparametric Statistics 2, 333-339.
    Cantoni, E. & Ronchetti, E. (2001). Resistant selection of the smoothing parameter for
        smoothing splines. Statistics and Computing 11, 141-146.
    """
    if bandwidth != "auto":
        raise ValueError(f"bandwidth must be a positive number or 'auto', got {bandwidth!r}")
    pilot = select_for_sample(sample, kern, deg, **options)
    # a cluster of outliers can draw the criterion to a bandwidth that follows it: the robustness
    # weights start at the larger of that choice and the rule of thumb (a global fit, never that small)
    start_h = max(pilot.chosen, _rule_of_thumb(sample, kern, pilot))
    rob = resistant_weights(sample, kern, deg, start_h, engine)
    selection = pilot
    if rob.n_rejected:
        selection = select_for_sample(sample.reweighted(rob.weights), kern, deg, **options)
        rob = resistant_weights(sample, kern, deg, selection.chosen, engine, start=rob.weights)
    selection = replace(selection, selector=f"robust_{selection.selector}")
    kept = sample.reweighted(rob.weights)
    cautions = []
    if kept.n_used < 2 * (deg + 2):
        cautions.append(Caution("few_points", f"only {kept.n_used} points carry weight; the curve is poorly determined"))
    return Smoother(kept, kern, deg, selection.chosen, engine, selection, cautions, rob)


def _rule_of_thumb(sample: SortedSample, kern: Kernel, pilot: Selection) -> float:
    h, _ = rule_of_thumb_bandwidth(sample, kern)
    lo, hi = float(pilot.candidates[0]), float(pilot.candidates[-1])
    return float(np.clip(h, lo, hi)) if math.isfinite(h) else pilot.chosen


def _check_bandwidth(bandwidth: Any) -> float:
    try:
        h = float(bandwidth)
    except (TypeError, ValueError):
        raise ValueError(f"bandwidth must be a positive number or 'auto', got {bandwidth!r}") from None
    if not math.isfinite(h) or h <= 0:
        raise ValueError(f"bandwidth must be a positive finite number, got {bandwidth!r}")
    return h
