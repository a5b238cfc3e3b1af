"""Local polynomial regression: Nadaraya-Watson (degree 0), local linear (1), local quadratic (2).

At a point ``t`` the estimate is the intercept of the weighted least-squares
fit of ``y`` on ``(x - t)`` up to ``degree`` with weights ``w_i K((x_i - t)/h)``.
Everything is computed from the windowed moment sums of
:mod:`estimators.sums`; no ``n`` by ``m`` weight matrix is ever formed.

References
----------
.. [1] Fan, J. and Gijbels, I. (1996). *Local Polynomial Modelling and Its
   Applications*. Chapman & Hall. Chapter 3.
.. [2] Wand, M. P. and Jones, M. C. (1995). *Kernel Smoothing*. Chapman &
   Hall. Chapter 5.
.. [3] Hastie, T. J. and Tibshirani, R. J. (1990). *Generalized Additive
   Models*. Chapman & Hall. Section 3.4 (residual variance with
   ``n - 2 tr(L) + tr(L^T L)`` degrees of freedom).
"""

from __future__ import annotations

import math
from functools import cached_property
from typing import TYPE_CHECKING, Any

import numpy as np

from .cautions import Caution
from .kernels import Kernel, get_kernel
from . import _compiled
from .sums import DATA_POINT_TERMS, N_TERMS, MomentPlan, binned_grid_allowed, binned_grid_size, compiled_shape, moment_sums, window_counts

if TYPE_CHECKING:  # pragma: no cover
    from .bandwidth import Selection
    from .uncertainty import Bands

__all__ = ["Smoother", "fit", "validate_sample", "SortedSample", "ENGINES"]

ENGINES = ("auto", "exact", "binned")
_SINGULAR = 1e-11  # relative determinant below which a local fit drops one degree
_BINNED_MIN_N = 20000
#: range for the largest weight: beyond about 1e70 (or below 1e-70) products of weighted sums in the
#: local solves and the bootstrap's fourth powers overflow (vanish) and fits silently change degree
_WEIGHT_SCALE = (1e-50, 1e50)
#: residual degrees of freedom per point at or below which the noise scale is not estimable (see ``residual_scale``)
_INTERPOLATING_DOF = 1e-9
_BLOCK = 65536  # query points per block: bounds the memory of the moment arrays


class SortedSample:
    """Validated data, sorted once by ``x``; only points with positive weight are sources.

    Attributes
    ----------
    x, y, w : ndarray
        The caller's arrays (original order).
    order : ndarray
        ``argsort(x)`` (stable).
    xs, ys, ws : ndarray
        Sorted sources (weight > 0).
    y_centre : float
        Weighted mean of ``y``; sums use ``y - y_centre`` so a large offset in
        ``y`` costs no digits.
    """

    def __init__(self, x: np.ndarray, y: np.ndarray, w: np.ndarray, unit_weights: bool = False) -> None:
        self.x, self.y, self.w = x, y, w
        self.order = np.argsort(x)
        n = x.size
        xs, ys = np.empty(n), np.empty(n)
        #: number of distinct x values among the first k sorted points (sources, once zero weights are dropped)
        self.distinct_prefix = np.empty(n + 1, dtype=np.int64)
        _compiled.gather_sorted(x, y, self.order, xs, ys, self.distinct_prefix)
        if unit_weights:
            ws = np.ones_like(xs)
        else:
            ws = w[self.order]
            keep = ws > 0
            if not keep.all():
                xs, ys, ws = xs[keep], ys[keep], ws[keep]
                new = np.empty(xs.size, dtype=np.int64)
                new[0] = 1
                new[1:] = xs[1:] != xs[:-1]
                self.distinct_prefix = np.concatenate(([0], np.cumsum(new)))
        self.xs, self.ys, self.ws = xs, ys, ws
        self.y_centre = float(ys.sum() / ys.size if unit_weights else (ws * ys).sum() / ws.sum())
        self.yc = ys - self.y_centre
        self._values: np.ndarray | None = None

    @property
    def n(self) -> int:
        return int(self.x.size)

    @property
    def n_used(self) -> int:
        return int(self.xs.size)

    def values(self) -> np.ndarray:
        """Value columns ``[w, w (y - y_centre)]`` for the moment sums (computed once)."""
        if self._values is None:
            vals = np.empty((self.xs.size, 2))
            vals[:, 0] = self.ws
            np.multiply(self.ws, self.yc, out=vals[:, 1])
            self._values = vals
        return self._values


def _as_float_array(name: str, value: Any) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be an array of numbers") from None
    if arr.ndim != 1:
        arr = arr.ravel() if arr.ndim == 0 else arr
        if arr.ndim != 1:
            raise ValueError(f"{name} must be one-dimensional, got shape {arr.shape}")
    if not np.isfinite(arr).all():
        bad = int(np.flatnonzero(~np.isfinite(arr))[0])
        raise ValueError(f"{name} must hold finite numbers only; {name}[{bad}] is {arr[bad]!r}")
    return arr


def validate_sample(x: Any, y: Any, weights: Any = None) -> SortedSample:
    """Check the data once at the boundary and sort it.

    Raises
    ------
    ValueError
        With a message a person can act on: lengths differ, non-finite values,
        negative, all-zero or extremely scaled weights, fewer than 2 points.
    """
    xa = _as_float_array("x", x)
    ya = _as_float_array("y", y)
    if xa.size != ya.size:
        raise ValueError(f"x and y must have the same length, got {xa.size} and {ya.size}")
    if weights is None:
        if xa.size < 2:
            raise ValueError(f"need at least 2 points, got {xa.size}")
        return _check_span(SortedSample(xa, ya, np.ones_like(xa), unit_weights=True))
    else:
        wa = _as_float_array("weights", weights)
        if wa.size != xa.size:
            raise ValueError(f"weights must have the same length as x ({xa.size}), got {wa.size}")
        if np.any(wa < 0):
            raise ValueError(f"weights must be >= 0; weights[{int(np.argmax(wa < 0))}] is negative")
    if xa.size < 2:
        raise ValueError(f"need at least 2 points, got {xa.size}")
    if not np.any(wa > 0):
        raise ValueError("weights are all zero: at least one point must carry weight")
    if np.count_nonzero(wa > 0) < 2:
        raise ValueError("need at least 2 points with positive weight")
    top = float(np.max(wa))
    if not _WEIGHT_SCALE[0] <= top <= _WEIGHT_SCALE[1]:
        raise ValueError(
            f"the largest weight is {top:g}; it must lie between {_WEIGHT_SCALE[0]:g} and {_WEIGHT_SCALE[1]:g} "
            "(products of the weighted sums would overflow or vanish); only the ratios of the weights matter "
            "for the curve, so divide them by the largest"
        )
    return _check_span(SortedSample(xa, ya, wa))


def _check_span(sample: SortedSample) -> SortedSample:
    # Python floats: a difference beyond the largest double is inf, without a warning
    span = float(sample.xs[-1]) - float(sample.xs[0])
    y_span = float(sample.ys.max()) - float(sample.ys.min())
    if not (math.isfinite(span) and math.isfinite(y_span)):
        raise ValueError("x or y spans more than the largest floating-point number; rescale the data")
    return sample


def _check_degree(degree: Any) -> int:
    if isinstance(degree, bool) or not isinstance(degree, (int, np.integer)) or degree not in (0, 1, 2):
        raise ValueError(f"degree must be 0, 1 or 2, got {degree!r}")
    return int(degree)


def _check_bandwidth(bandwidth: Any) -> float:
    try:
        h = float(bandwidth)
    except (TypeError, ValueError):
        raise ValueError(f"bandwidth must be a positive number or 'auto', got {bandwidth!r}") from None
    if not math.isfinite(h) or h <= 0:
        raise ValueError(f"bandwidth must be a positive finite number, got {bandwidth!r}")
    return h


def choose_engine(engine: str, kernel: Kernel, sample: SortedSample, bandwidth: float, m: int) -> str:
    """Resolve ``engine`` for ``m`` query points.

    ``"auto"``: compact kernels always use the exact fast sums (they are as
    fast as binning and have no binning error). The gaussian uses the binned
    path when there are at least ``20000`` points and its grid is smaller than
    a quarter of ``max(n, m)``; at ``h / 256`` spacing its measured error stays
    below ``1e-6`` of the range of ``y``. Otherwise the exact fast Gauss transform.

    ``"binned"`` is honoured unless its grid would exceed ``max(n, m)`` by more
    than :data:`estimators.sums.BINNED_GRID_SLACK` nodes (a bandwidth tiny
    against the x range); the exact path, faster there, is used instead.
    """
    if engine not in ENGINES:
        raise ValueError(f"unknown engine {engine!r}; choose one of {', '.join(ENGINES)}")
    if engine == "exact":
        return engine
    size = binned_grid_size(float(sample.xs[0]), float(sample.xs[-1]), kernel, bandwidth)
    if engine == "binned":
        return "binned" if binned_grid_allowed(size, sample.n_used, m) else "exact"
    if kernel.shape is not None:
        return "exact"
    if sample.n_used >= _BINNED_MIN_N and size * 4 <= max(sample.n_used, m):
        return "binned"
    return "exact"


class LocalSolution:
    """Local fits at a set of points: coefficients, inverse moment matrices, degree used."""

    def __init__(self, beta: np.ndarray, inv: np.ndarray, degree_used: np.ndarray, counts: np.ndarray) -> None:
        self.beta = beta  # (m, degree + 1), NaN-padded where a lower degree was used
        self.inv = inv  # (m, degree + 1, degree + 1), zero-padded
        self.degree_used = degree_used  # (m,) int, -1 where undefined
        self.counts = counts

    def unsorted(self, perm: np.ndarray) -> "LocalSolution":
        """Undo a sort of the points: row ``perm[i]`` of the result is row ``i`` of ``self``."""
        out = LocalSolution.__new__(LocalSolution)
        for name in ("beta", "inv", "degree_used", "counts"):
            arr = getattr(self, name)
            back = np.empty_like(arr)
            back[perm] = arr
            setattr(out, name, back)
        return out


class Smoother:
    """A fitted kernel smoother; see :func:`fit`.

    The object is cheap to create: sums are evaluated when a method asks for
    them, and the data-point quantities (fitted values, leverages, effective
    degrees of freedom, residual scale) are computed once and cached.
    """

    def __init__(
        self,
        sample: SortedSample,
        kernel: Kernel,
        degree: int,
        bandwidth: float,
        engine: str = "auto",
        selection: "Selection | None" = None,
    ) -> None:
        self.sample = sample
        self.kernel_spec = kernel
        self.degree = degree
        self.bandwidth = float(bandwidth)
        self.engine_request = engine
        self.engine = choose_engine(engine, kernel, sample, self.bandwidth, sample.n)
        self.selection = selection
        self._cautions: list[Caution] = []
        self._plans: dict[str, MomentPlan] = {}
        self._engines: dict[int, str] = {}

    # -- basic facts -------------------------------------------------------
    @property
    def kernel(self) -> str:
        return self.kernel_spec.name

    @property
    def n(self) -> int:
        return self.sample.n

    @property
    def n_used(self) -> int:
        return self.sample.n_used

    @property
    def x_min(self) -> float:
        return float(self.sample.xs[0])

    @property
    def x_max(self) -> float:
        return float(self.sample.xs[-1])

    # -- core local solve --------------------------------------------------
    def _engine_for(self, m: int) -> str:
        if self.engine_request == "exact":
            return "exact"
        engine = self._engines.get(m)
        if engine is None:
            engine = self._engines[m] = choose_engine(self.engine_request, self.kernel_spec, self.sample, self.bandwidth, m)
        return engine

    def moments(self, points: np.ndarray, values: np.ndarray, order: int, power: int = 1) -> np.ndarray:
        """Windowed sums ``sum_i q_i K(u_i)^power u_i^k`` over the sorted sources (see :mod:`sums`)."""
        return moment_sums(
            self.sample.xs,
            values,
            points,
            self.kernel_spec,
            self.bandwidth,
            order,
            power=power,
            engine=self._engine_for(np.size(points)),
        )

    def solve(self, points: Any) -> LocalSolution:
        """Local polynomial coefficients at ``points`` (any order, any length)."""
        t = np.asarray(points, dtype=float).ravel()
        if t.size > 1 and not np.all(t[1:] >= t[:-1]):
            perm = np.argsort(t)
            return self._solve_sorted(t[perm]).unsorted(perm)
        return self._solve_sorted(t)

    def _solve_sorted(self, t: np.ndarray) -> LocalSolution:
        p = self.degree
        xs = self.sample.xs
        values = self.sample.values()
        engine = self._engine_for(t.size)
        beta = np.empty((t.size, p + 1))
        inv = np.empty((t.size, p + 1, p + 1))
        deg = np.empty(t.size, dtype=np.int64)
        counts = np.empty(t.size, dtype=np.int64)
        shape = self.kernel_spec.shape
        if engine == "exact" and shape is not None:
            # compact kernel: moments and solves in one compiled sweep, no moment array
            _compiled.window_fit(
                xs, values, t, self.bandwidth, *compiled_shape(shape), (0,) * (p + 1),
                not self.kernel_spec.vanishes_at_edge,
                self.sample.distinct_prefix, _SINGULAR, beta, inv, deg, counts,
            )
            return LocalSolution(beta, inv, deg, counts)
        plan = self._fit_plan(engine)
        for start in range(0, t.size, _BLOCK):
            sl = slice(start, min(start + _BLOCK, t.size))
            mom, lo, hi = plan(t[sl])
            counts[sl] = np.maximum(hi - lo, 0)
            _compiled.solve_local(mom, lo, hi, self.sample.distinct_prefix, p, _SINGULAR, beta[sl], inv[sl], deg[sl])
        return LocalSolution(beta, inv, deg, counts)

    def _fit_plan(self, engine: str) -> MomentPlan:
        """The source-side work for local fits with ``engine``, done once per smoother.

        Curve points, prediction points and the data points then share it (and,
        for the gaussian, its translated local expansions).
        """
        plan = self._plans.get(engine)
        if plan is None:
            p = self.degree
            plan = MomentPlan(self.sample.xs, self.sample.values(), self.kernel_spec, self.bandwidth, 2 * p, engine=engine, column_orders=(2 * p, p))
            self._plans[engine] = plan
        return plan

    # -- public API --------------------------------------------------------
    def predict(self, points: Any) -> np.ndarray:
        """Curve estimate at ``points``; NaN where the window holds no data."""
        sol = self.solve(points)
        return sol.beta[:, 0] + self.sample.y_centre

    def slope(self, points: Any) -> np.ndarray:
        """First-derivative estimate (degree >= 1); NaN where undefined or fitted at degree 0."""
        if self.degree < 1:
            raise ValueError("slope needs degree >= 1 (a local linear or quadratic fit)")
        sol = self.solve(points)
        out = sol.beta[:, 1] / self.bandwidth
        out[sol.degree_used < 1] = np.nan
        return out

    def window_counts(self, points: Any) -> np.ndarray:
        """Number of data points carrying weight in each point's window."""
        t = np.asarray(points, dtype=float).ravel()
        return window_counts(self.sample.xs, t, self.kernel_spec, self.bandwidth)

    def extrapolated(self, points: Any) -> np.ndarray:
        """True for points outside the data range ``[x_min, x_max]``."""
        t = np.asarray(points, dtype=float).ravel()
        return (t < self.x_min) | (t > self.x_max)

    @property
    def _data_sorted(self) -> np.ndarray:
        """All data locations in sorted order (zero weights included)."""
        return self.sample.xs if self.sample.n_used == self.sample.n else self.sample.x[self.sample.order]

    @cached_property
    def _at_data_sorted(self) -> LocalSolution:
        """Local fits at the data points in sorted order (all points, zero weights included)."""
        return self._solve_sorted(self._data_sorted)

    def _unsort(self, values: np.ndarray) -> np.ndarray:
        out = np.empty_like(values)
        out[self.sample.order] = values
        return out

    @cached_property
    def _at_data(self) -> LocalSolution:
        return self._at_data_sorted.unsorted(self.sample.order)

    @cached_property
    def _fitted(self) -> np.ndarray:
        return self._unsort(self._at_data_sorted.beta[:, 0] + self.sample.y_centre)

    def fitted(self) -> np.ndarray:
        """Fitted values at the data points, in the caller's order."""
        return self._fitted.copy()

    def residuals(self) -> np.ndarray:
        """``y - fitted`` in the caller's order (NaN where the fit is undefined)."""
        return self.sample.y - self.fitted()

    def leverages(self) -> np.ndarray:
        """Diagonal of the smoother matrix, ``L_ii = w_i K(0) [S(x_i)^{-1}]_00``, caller's order."""
        return self.sample.w * self.kernel_spec.at_zero * self._unsort(self._at_data_sorted.inv[:, 0, 0])

    @cached_property
    def effective_df(self) -> float:
        """Trace of the smoother (hat) matrix."""
        lev = self.leverages()
        return float(np.where(np.isnan(lev), 0.0, lev).sum())  # NaN (empty window) counts 0, as in nansum

    @cached_property
    def variance_df(self) -> float:
        """``tr(L^T W L W^{-1})``, the second degrees-of-freedom term for the residual variance."""
        # in sorted order: the sum does not depend on the order of the points
        sol = self._at_data_sorted
        p = self.degree
        points = self._data_sorted
        plan = MomentPlan(
            self.sample.xs, self.sample.ws, self.kernel_spec, self.bandwidth, 2 * p, power=2,
            engine=self._engine_for(points.size), gauss_terms=DATA_POINT_TERMS.get(p, N_TERMS), data_points=True,
        )
        q2 = plan.sums(points)[:, 0, :]
        return _compiled.hankel_quadratic_sum(sol.inv[:, 0, :], q2, self.sample.w[self.sample.order])

    @cached_property
    def residual_scale(self) -> float:
        """Estimate of the noise standard deviation.

        ``sigma^2 = sum_i w_i r_i^2 / (n - 2 tr(L) + tr(L^T W L W^{-1}))`` over
        points with positive weight (Hastie & Tibshirani 1990, Section 3.4;
        weights act as precisions, ``Var(e_i) = sigma^2 / w_i``).  NaN when the
        residual degrees of freedom are not above ``1e-9 n``: the fit then
        interpolates the data (the exact value is 0, what is left is the rounding
        of the two trace terms), and the residuals say nothing about the noise.
        """
        r = self.residuals()
        ok = (self.sample.w > 0) & np.isfinite(r)
        rss = float(np.sum(self.sample.w[ok] * r[ok] ** 2))
        used = float(np.count_nonzero(ok))
        dof = used - 2.0 * self.effective_df + self.variance_df
        if dof <= _INTERPOLATING_DOF * used:
            return float("nan")
        return math.sqrt(rss / dof)

    @property
    def warnings(self) -> list[Caution]:
        """Fit-level cautions (few points, degree reduced at the data, selection cautions)."""
        out = list(self._cautions)
        if self.selection is not None:
            out.extend(self.selection.warnings)
        return out

    # -- uncertainty (see estimators.uncertainty) --------------------------
    def standard_error(self, points: Any, *, robust: bool = False) -> np.ndarray:
        """Pointwise standard error of the curve estimate (see :mod:`estimators.uncertainty`)."""
        from .uncertainty import standard_error

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
    ) -> "Bands":
        """Confidence bands for the curve; pointwise unless ``simultaneous``.

        Further keyword options (``multiplier``, ``bias_correction``, ``engine``)
        pass through to :func:`estimators.uncertainty.bands`.
        """
        from .uncertainty import bands

        return bands(
            self, points, level=level, method=method, replicates=replicates, seed=seed, simultaneous=simultaneous,
            **options,
        )

    def prediction_interval(self, points: Any, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
        """Interval for a new observation at ``points`` (curve uncertainty plus noise)."""
        from .uncertainty import prediction_interval

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
        See :func:`choose_engine`.

    Returns
    -------
    Smoother

    Notes
    -----
    Where a window holds no data the estimate is NaN. Where it holds fewer
    distinct ``x`` values than ``degree + 1`` (or the local system is
    numerically singular) the fit at that point drops to the highest degree the
    data support; :meth:`Smoother.solve` reports the degree used.
    """
    kern = get_kernel(kernel)
    deg = _check_degree(degree)
    if engine not in ENGINES:
        raise ValueError(f"unknown engine {engine!r}; choose one of {', '.join(ENGINES)}")
    sample = validate_sample(x, y, weights)
    selection = None
    if isinstance(bandwidth, str):
        if bandwidth != "auto":
            raise ValueError(f"bandwidth must be a positive number or 'auto', got {bandwidth!r}")
        from .bandwidth import select_for_sample

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
    smoother = Smoother(sample, kern, deg, h, engine, selection)
    if sample.n_used < 2 * (deg + 2):
        smoother._cautions.append(
            Caution("few_points", f"only {sample.n_used} points carry weight; the curve is poorly determined")
        )
    return smoother
