"""Local polynomial fits (degree 0 Nadaraya-Watson, 1 local linear, 2 local quadratic) on a sorted sample.

The core smoother: local solves from the windowed moment sums of :mod:`estimators.sums`, the
data-point quantities, and a small cache that the modules above use. Method notes: ``docs/methods.md``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from functools import cached_property
from typing import Any, TypeVar, cast

import numpy as np

from . import _compiled
from .cautions import Caution
from .kernels import Kernel
from .names import ENGINES
from .sample import SortedSample
from .sums import DATA_POINT_TERMS, N_TERMS, MomentPlan, binned_grid_allowed, binned_grid_size, compiled_shape, moment_sums, window_counts

__all__ = ["ENGINES", "LocalPolynomial", "LocalSolution", "choose_engine"]

_SINGULAR = 1e-11  # relative determinant below which a local fit drops one degree
_BINNED_MIN_N = 20000
#: residual degrees of freedom per point at or below which the noise scale is not estimable (see ``residual_scale``)
_INTERPOLATING_DOF = 1e-9
_BLOCK = 65536  # query points per block: bounds the memory of the moment arrays

_T = TypeVar("_T")


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

    def unsorted(self, perm: np.ndarray) -> LocalSolution:
        """Undo a sort of the points: row ``perm[i]`` of the result is row ``i`` of ``self``."""
        out = LocalSolution.__new__(LocalSolution)
        for name in ("beta", "inv", "degree_used", "counts"):
            arr = getattr(self, name)
            back = np.empty_like(arr)
            back[perm] = arr
            setattr(out, name, back)
        return out


class LocalPolynomial:
    """A local polynomial kernel smoother at a fixed bandwidth (the core of :class:`estimators.Smoother`).

    The object is cheap to create: sums are evaluated when a method asks for
    them, and the data-point quantities (fitted values, leverages, effective
    degrees of freedom, residual scale) are computed once and cached.
    ``cautions`` are fit-level warnings found by the caller (e.g. few points).
    """

    def __init__(
        self,
        sample: SortedSample,
        kernel: Kernel,
        degree: int,
        bandwidth: float,
        engine: str = "auto",
        cautions: Sequence[Caution] = (),
    ) -> None:
        self.sample = sample
        self.kernel_spec = kernel
        self.degree = degree
        self.bandwidth = float(bandwidth)
        self.engine_request = engine
        self.engine = choose_engine(engine, kernel, sample, self.bandwidth, sample.n)
        self.cautions: list[Caution] = list(cautions)
        self._plans: dict[str, MomentPlan] = {}
        self._engines: dict[int, str] = {}
        self._memo: dict[str, object] = {}

    # -- cache for the layers above -----------------------------------------
    def memo(self, key: str, build: Callable[[], _T]) -> _T:
        """``build()`` once per smoother and ``key`` (a smoother never changes after fitting).

        Modules above the core (uncertainty) keep their data-point quantities
        here, e.g. leverage-adjusted residuals and the noise scale.
        """
        if key not in self._memo:
            self._memo[key] = build()
        return cast(_T, self._memo[key])

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
        """Curve estimate at ``points``; NaN where the window holds no data.

        Unsorted points are sorted once and only the estimate column is put back
        in the caller's order (not the whole local solution).
        """
        t = np.asarray(points, dtype=float).ravel()
        if t.size > 1 and not np.all(t[1:] >= t[:-1]):
            perm = np.argsort(t)
            out = np.empty(t.size)
            out[perm] = self._solve_sorted(t[perm]).beta[:, 0]
            out += self.sample.y_centre
            return out
        sol = self._solve_sorted(t)
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
    def fits_at_data(self) -> LocalSolution:
        """Local fits at the data points in sorted order (all points, zero weights included); computed once."""
        return self._solve_sorted(self._data_sorted)

    def _unsort(self, values: np.ndarray) -> np.ndarray:
        out = np.empty_like(values)
        out[self.sample.order] = values
        return out

    @cached_property
    def _fitted(self) -> np.ndarray:
        return self._unsort(self.fits_at_data.beta[:, 0] + self.sample.y_centre)

    def fitted(self) -> np.ndarray:
        """Fitted values at the data points, in the caller's order."""
        return self._fitted.copy()

    def residuals(self) -> np.ndarray:
        """``y - fitted`` in the caller's order (NaN where the fit is undefined)."""
        out: np.ndarray = self.sample.y - self.fitted()
        return out

    def leverages(self) -> np.ndarray:
        """Diagonal of the smoother matrix, ``L_ii = w_i K(0) [S(x_i)^{-1}]_00``, caller's order."""
        out: np.ndarray = self.sample.w * self.kernel_spec.at_zero * self._unsort(self.fits_at_data.inv[:, 0, 0])
        return out

    @cached_property
    def effective_df(self) -> float:
        """Trace of the smoother (hat) matrix."""
        lev = self.leverages()
        return float(np.where(np.isnan(lev), 0.0, lev).sum())  # NaN (empty window) counts 0, as in nansum

    @cached_property
    def variance_df(self) -> float:
        """``tr(L^T W L W^{-1})``, the second degrees-of-freedom term for the residual variance."""
        # in sorted order: the sum does not depend on the order of the points
        sol = self.fits_at_data
        p = self.degree
        points = self._data_sorted
        plan = MomentPlan(
            self.sample.xs, self.sample.ws, self.kernel_spec, self.bandwidth, 2 * p, power=2,
            engine=self._engine_for(points.size), gauss_terms=DATA_POINT_TERMS.get(p, N_TERMS), data_points=True,
        )
        q2 = plan.sums(points)[:, 0, :]
        total: float = _compiled.hankel_quadratic_sum(sol.inv[:, 0, :], q2, self.sample.w[self.sample.order])
        return total

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
        """Fit-level cautions (few points, degree reduced at the data)."""
        return list(self.cautions)
