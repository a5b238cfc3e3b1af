"""The public entry point: :func:`fit` and the :class:`Smoother` it returns.

Composes the layers below: the core local fits (:mod:`estimators.local_poly`), automatic bandwidth
selection (:mod:`estimators.bandwidth`) and uncertainty (:mod:`estimators.uncertainty`).
"""

from __future__ import annotations

import dataclasses
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
from .noise_choice import NoiseChoice, check_noise, choose_noise
from .poisson import check_counts, poisson_fit, resistant_poisson_fit
from .robust import ResistantFit, RobustWeights, resistant_weights
from .sample import SortedSample, validate_sample
from .uncertainty import Bands, bands, prediction_interval, standard_error

__all__ = ["Smoother", "fit"]


class Smoother(ResistantFit, LocalPolynomial):
    """A fitted kernel smoother; see :func:`fit`.

    The local fits come from :class:`estimators.local_poly.LocalPolynomial`;
    this class adds the selection record, the noise model and the uncertainty
    methods.

    Under serially correlated noise (``noise == "correlated"``) standard errors
    and band half-widths are those of independent noise times
    :attr:`se_factor` (the bias-corrected centre is kept), and a prediction
    interval adds the marginal variance ``gamma(0)`` of one reading; see
    ``docs/correlated-noise.md``.
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
        noise_choice: NoiseChoice | None = None,
        robustness: RobustWeights | None = None,
    ) -> None:
        super().__init__(sample, kernel, degree, bandwidth, engine, cautions)
        self.selection = selection
        self.noise_choice = noise_choice
        #: robustness weights of a resistant fit (``robust=True``), else None
        self.robustness = robustness

    # -- the noise model (see estimators.noise_choice) ---------------------
    @property
    def noise(self) -> str:
        """``"independent"`` or ``"correlated"``: the noise model behind bandwidth, standard errors and bands."""
        return "independent" if self.noise_choice is None else self.noise_choice.used

    @property
    def noise_autocorrelation(self) -> float:
        """Lag-1 autocorrelation estimate of the noise in ``x`` order (NaN when not estimable)."""
        return math.nan if self.noise_choice is None else self.noise_choice.autocorrelation

    @property
    def se_factor(self) -> float:
        """Factor on the independent-noise standard errors: 1, or ``sqrt(long-run variance) / sigma`` under correlation.

        ``sigma`` is the noise sd of a typical reading, ``residual_scale * sqrt(mean(1 / w))`` (``residual_scale``
        itself for unit weights); see :func:`estimators.serial.correlated_se_factor`.
        """
        choice = self.noise_choice
        if choice is None or not choice.correlated:
            return 1.0
        # the diagnosis measures readings as given; residual_scale is the sd of a unit-weight reading, so it is
        # carried to a typical reading (variance sigma^2 mean(1 / w)): a common factor on the weights cancels
        ws = self.sample.ws
        reading_scale = self.residual_scale * math.sqrt(float(np.mean(1.0 / ws))) if ws.size else math.nan
        return self.memo("se_factor", lambda: choice.se_factor(reading_scale))

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
        return standard_error(self, points, robust=robust) * self.se_factor

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
        out = bands(
            self, points, level=level, method=method, replicates=replicates, seed=seed, simultaneous=simultaneous,
            **options,
        )
        factor = self.se_factor
        if factor == 1.0:
            return out
        centre = out.estimate
        return dataclasses.replace(
            out,
            lower=centre - factor * (centre - out.lower),
            upper=centre + factor * (out.upper - centre),
            se=out.se * factor,
        )

    def prediction_interval(self, points: Any, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
        """Interval for a new observation at ``points`` (curve uncertainty plus noise).

        Under correlated noise the curve's variance is scaled by ``se_factor**2``
        and the noise term is the marginal variance ``gamma(0)`` of one reading.
        """
        if self.noise != "correlated" or self.noise_choice is None:
            return prediction_interval(self, points, level=level)
        return prediction_interval(
            self, points, level=level, curve_factor=self.se_factor,
            noise_variance=self.noise_choice.diagnosis.marginal_variance,
        )


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
    noise: str = "auto",
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
    noise : {"auto", "independent", "correlated"}
        Serial correlation of the noise in ``x`` order. ``auto`` (default)
        tests for it (:func:`estimators.serial.diagnose_noise`, two-sided level
        0.01); when it is found, or always with ``correlated``, an automatic
        bandwidth comes from modified (leave-(2l+1)-out) cross-validation,
        standard errors and bands are scaled to the long-run variance, and
        prediction intervals use the marginal noise variance; a
        ``correlated_noise`` caution says so. ``independent`` keeps the
        independent-noise path. A fixed bandwidth is kept as given.
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

    No method can tell slow real variation apart from strongly correlated
    noise at every bandwidth; if the wiggles are real, pass
    ``noise="independent"``.

    References
    ----------
    .. [1] Chu, C.-K. and Marron, J. S. (1991). Comparison of two bandwidth
       selectors with dependent errors. *Ann. Statist.* 19, 1906-1918.
    .. [2] Hart, J. D. (1991). Kernel regression estimation with time series
       errors. *J. R. Statist. Soc. B* 53, 173-187.
    """
    kern = get_kernel(kernel)
    deg = check_degree(degree)
    if engine not in ENGINES:
        raise ValueError(f"unknown engine {engine!r}; choose one of {', '.join(ENGINES)}")
    requested = check_noise(noise)
    if family not in FAMILIES:
        raise ValueError(f"unknown family {family!r}; choose one of {', '.join(FAMILIES)}")
    if family == "poisson":
        if requested == "correlated":
            raise ValueError("noise 'correlated' is not available with family 'poisson' (counts are taken as independent); send noise 'auto' or 'independent'")
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
            sample, kern, deg, bandwidth, engine, requested,
            dict(selector=selector, rule=rule, candidates=candidates, bandwidth_min=bandwidth_min, bandwidth_max=bandwidth_max),
        )
    selection = None
    if isinstance(bandwidth, str):
        if bandwidth != "auto":
            raise ValueError(f"bandwidth must be a positive number or 'auto', got {bandwidth!r}")
        choice = choose_noise(sample, requested)
        selection = select_for_sample(
            sample,
            kern,
            deg,
            selector=selector,
            rule=rule,
            candidates=candidates,
            bandwidth_min=bandwidth_min,
            bandwidth_max=bandwidth_max,
            noise=choice,
        )
        h = selection.chosen
    else:
        h = _check_bandwidth(bandwidth)
        with np.errstate(over="ignore", divide="ignore"):
            reach = (sample.xs[-1] - sample.xs[0]) / h
        if not math.isfinite(float(reach)) or h > 1e300:
            raise ValueError(f"bandwidth {h!r} is out of proportion to the x range; choose one nearer the data spacing")
    rob = None
    if robust:
        # the noise is diagnosed on the readings the resistant fit keeps: spikes are not noise of the curve
        rob = resistant_weights(sample, kern, deg, h, engine)
        sample = sample.reweighted(rob.weights)
    if selection is None:
        choice = choose_noise(sample, requested)
    cautions = []
    if sample.n_used < 2 * (deg + 2):
        cautions.append(Caution("few_points", f"only {sample.n_used} points carry weight; the curve is poorly determined"))
    if selection is None:
        cautions.extend(choice.cautions())  # an automatic bandwidth's record carries them
    return Smoother(sample, kern, deg, h, engine, selection, cautions, choice, robustness=rob)


def _robust_fit(
    sample: SortedSample, kern: Kernel, deg: int, bandwidth: str, engine: str, noise: str, options: dict[str, Any]
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
    choice = choose_noise(sample, noise)
    pilot = select_for_sample(sample, kern, deg, noise=choice, **options)
    # a cluster of outliers can draw the criterion to a bandwidth that follows it: the robustness
    # weights start at the larger of that choice and the rule of thumb (a global fit, never that small)
    start_h = max(pilot.chosen, _rule_of_thumb(sample, kern, pilot))
    rob = resistant_weights(sample, kern, deg, start_h, engine)
    selection = pilot
    if rob.n_rejected:
        # the noise is diagnosed again on the readings kept: spikes are not noise of the curve
        first_kept = sample.reweighted(rob.weights)
        choice = choose_noise(first_kept, noise)
        selection = select_for_sample(first_kept, kern, deg, noise=choice, **options)
        rob = resistant_weights(sample, kern, deg, selection.chosen, engine, start=rob.weights)
    selection = replace(selection, selector=f"robust_{selection.selector}")
    kept = sample.reweighted(rob.weights)
    cautions = []
    if kept.n_used < 2 * (deg + 2):
        cautions.append(Caution("few_points", f"only {kept.n_used} points carry weight; the curve is poorly determined"))
    return Smoother(kept, kern, deg, selection.chosen, engine, selection, cautions, choice, robustness=rob)


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
