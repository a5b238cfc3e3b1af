"""The public entry point: :func:`fit` and the :class:`Smoother` it returns.

Composes the layers below: the core local fits (:mod:`estimators.local_poly`), automatic bandwidth
selection (:mod:`estimators.bandwidth`) and uncertainty (:mod:`estimators.uncertainty`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from .bandwidth import Selection, select_for_sample
from .bandwidth.choices import check_degree
from .cautions import Caution
from .kernels import Kernel, get_kernel
from .local_poly import ENGINES, LocalPolynomial
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
    ) -> None:
        super().__init__(sample, kernel, degree, bandwidth, engine, cautions)
        self.selection = selection

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
    sample = validate_sample(x, y, weights)
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
    return Smoother(sample, kern, deg, h, engine, selection, cautions)


def _check_bandwidth(bandwidth: Any) -> float:
    try:
        h = float(bandwidth)
    except (TypeError, ValueError):
        raise ValueError(f"bandwidth must be a positive number or 'auto', got {bandwidth!r}") from None
    if not math.isfinite(h) or h <= 0:
        raise ValueError(f"bandwidth must be a positive finite number, got {bandwidth!r}")
    return h
