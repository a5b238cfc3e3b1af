"""Local likelihood for counts: a local log-linear Poisson fit (``family="poisson"``).

At each point ``t`` the intensity is ``exp(a + b u)``, ``u = (x - t) / h``, with ``(a, b)``
maximising the kernel-weighted Poisson log-likelihood

    ``sum_i w_i K(u_i) [y_i (a + b u_i) - exp(a + b u_i)]``

(Fan, Heckman & Wand 1995; Loader 1999, Chapter 4); the estimate is ``exp(a)``, positive by
construction. Degree 0 (``b = 0``) has the closed form ``a = log(sum K w y / sum K w)``.

Fast exact sums. For the gaussian kernel ``K(u) exp(b u) = exp(b^2 / 2) K(u - b)``: the sums of
the Newton steps, ``sum_i w_i K(u_i) exp(b u_i) u_i^k``, are ordinary windowed kernel sums of the
weights at the shifted point ``t + b h`` (moments re-expanded by the binomial theorem). Each
Newton step is one pass of :mod:`estimators.sums` over all points at once: O(n + m) work and
memory, no matrix of pairs; the likelihood is maximised exactly, not through a linearised
working response. Likewise ``K(u)^2 exp(b u) = exp(b^2 / 4) K^2(u - b / 2)`` gives the variance.

Variance: the sandwich ``A^-1 B A^-1`` with ``A = sum w K exp(a + b u) X X'`` (observed
information) and ``B = sum w K^2 exp(a + b u) X X'`` (Poisson variance of the local score),
for ``eta(t) = a``; bands are ``exp(eta +- z se)`` around a bias-corrected centre (link scale
mapped back, so they stay positive; see :meth:`PoissonSmoother.bands`). A prediction interval for a new count joins Poisson quantiles to the band.

Automatic bandwidth: the local likelihood AIC, ``deviance + 2 sum infl_i`` with
``infl_i = w_i K(0) exp(eta_i) [A^-1(x_i)]_00`` the influence of reading ``i`` on its own fit
(Loader 1999, Sections 4.3-4.4; the likelihood analogue of Mallows' Cp), minimised over the
same candidate grid as the Gaussian selectors.

References
----------
Fan, J., Heckman, N. E. & Wand, M. P. (1995). Local polynomial kernel regression for generalized
    linear models and quasi-likelihood functions. Journal of the American Statistical Association
    90, 141-150.
Loader, C. (1999). Local Regression and Likelihood. Springer.
Schucany, W. R. & Sommers, J. P. (1977). Improvement of kernel type density estimators. Journal of
    the American Statistical Association 72, 420-423.
Fan, J. & Gijbels, I. (1996). Local Polynomial Modelling and Its Applications. Chapman & Hall.
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
from scipy.special import ndtri, pdtr, pdtrik, xlogy

from .bandwidth.cautions import edge_caution
from .bandwidth.grid import candidate_grid
from .bandwidth.record import Selection
from .bandwidth.rule_of_thumb import rule_of_thumb_bandwidth
from .cautions import Caution
from .kernels import Kernel
from .local_poly import LocalPolynomial
from .robust import ResistantFit, RobustWeights, resistant_weights
from .sample import SortedSample
from .sums import MomentPlan
from .uncertainty.arguments import check_level, check_points
from .uncertainty.results import Bands

__all__ = ["PoissonSmoother", "check_counts", "poisson_deviance", "poisson_fit", "poisson_quantile", "resistant_poisson_fit"]

_NEWTON_STEPS = 30
_STEP_TOLERANCE = 1e-10
_SINGULAR = 1e-9
_MAX_LOG_SLOPE_STEP = 1.0
_NODES_PER_BANDWIDTH = 32
_PATIENCE = 6
#: sqrt(integral (2 K_h - K_{sqrt2 h})^2 / integral K_h^2) for the gaussian kernel (see ``PoissonSmoother.bands``)
_JACKKNIFE_SE_FACTOR = math.sqrt(4.0 + 1.0 / math.sqrt(2.0) - 8.0 / math.sqrt(6.0))


def poisson_deviance(y: np.ndarray, mu: np.ndarray, w: np.ndarray | None = None) -> np.ndarray:
    """Unit Poisson deviances ``2 w [y log(y / mu) - (y - mu)]`` (``y log y = 0`` at ``y = 0``)."""
    ya = np.asarray(y, dtype=float)
    ma = np.asarray(mu, dtype=float)
    dev = 2.0 * (xlogy(ya, ya) - xlogy(ya, ma) - (ya - ma))
    out: np.ndarray = dev if w is None else np.asarray(w, dtype=float) * dev
    return out


def poisson_quantile(q: float, mu: np.ndarray) -> np.ndarray:
    """The smallest count ``k`` with ``P(X <= k) >= q`` for ``X ~ Poisson(mu)``; NaN where ``mu`` is NaN.

    From the inverse of the continuous Poisson distribution function (``pdtrik``), rounded up and
    stepped down once where the count below already reaches ``q``.
    """
    m = np.asarray(mu, dtype=float)
    with np.errstate(invalid="ignore", over="ignore"):
        pos = np.where(m > 0, m, 1.0)
        k = np.maximum(np.ceil(pdtrik(q, pos)), 0.0)
        below = np.maximum(k - 1.0, 0.0)
        k = np.where((k > 0) & (pdtr(below, pos) >= q), below, k)
    out: np.ndarray = np.where(m > 0, k, np.where(m == 0, 0.0, np.nan))
    out = np.where(np.isinf(m), np.inf, out)
    return out


def check_counts(y: Any) -> None:
    """Refuse negative readings: ``ValueError`` naming the first one."""
    ya = np.asarray(y, dtype=float)
    bad = np.flatnonzero(ya < 0)
    if bad.size:
        i = int(bad[0])
        raise ValueError(
            f"y[{i}] is {ya[i]:g}: family 'poisson' takes counts or rates, which cannot be negative; "
            "send y >= 0 or use family 'gaussian'"
        )


@dataclass
class _Local:
    """Local log-linear fits at sorted points: ``a``, ``b`` and the moments ``E`` (weights, shifted)."""

    a: np.ndarray
    b: np.ndarray
    e: np.ndarray  # (m, 3): E_0, E_1, E_2 of sum w K(u) exp(b u) u^k / exp(b^2/2)
    degree: np.ndarray  # degree used, -1 where no data


def _shifted(plan: MomentPlan, t: np.ndarray, shift: np.ndarray, h: float, order: int) -> np.ndarray:
    """Moments ``sum w K(u') u'^k`` at ``t + shift h`` re-expanded to powers of ``u' + shift``."""
    tp = t + shift * h
    perm = np.argsort(tp, kind="stable")
    mom_sorted, _, _ = plan(tp[perm])
    mom = np.empty((t.size, order + 1))
    mom[perm] = mom_sorted[:, 0, : order + 1]
    if order == 0:
        return mom
    out = np.empty_like(mom)
    out[:, 0] = mom[:, 0]
    out[:, 1] = mom[:, 1] + shift * mom[:, 0]
    if order >= 2:
        out[:, 2] = mom[:, 2] + 2.0 * shift * mom[:, 1] + shift**2 * mom[:, 0]
    return out


class PoissonSmoother(ResistantFit, LocalPolynomial):
    """A local log-linear Poisson fit; see :func:`poisson_fit` and the module notes."""

    family = "poisson"

    def __init__(
        self,
        sample: SortedSample,
        kernel: Kernel,
        degree: int,
        bandwidth: float,
        engine: str = "auto",
        selection: Selection | None = None,
        cautions: list[Caution] | None = None,
        robustness: RobustWeights | None = None,
    ) -> None:
        super().__init__(sample, kernel, degree, bandwidth, engine, cautions or [])
        self.selection = selection
        #: robustness weights of a resistant fit (``robust=True``), else None
        self.robustness = robustness
        engine_used = self._engine_for(sample.n)
        self._w_plan = MomentPlan(sample.xs, sample.ws[:, None], kernel, self.bandwidth, 2, engine=engine_used)
        self._w2_plan: MomentPlan | None = None
        self._y_plan = MomentPlan(sample.xs, (sample.ws * sample.ys)[:, None], kernel, self.bandwidth, 1, engine=engine_used)
        self._y_mean = float(np.sum(sample.ws * sample.ys) / np.sum(sample.ws))

    @property
    def noise(self) -> str:
        """Counts are taken as independent: ``"independent"``."""
        return "independent"

    @property
    def noise_autocorrelation(self) -> float:
        """Not estimated for counts: NaN."""
        return math.nan

    def pearson_residuals(self) -> np.ndarray:
        """``(y - mu) / sqrt(mu)`` at the data (caller's order; McCullagh & Nelder 1989, Section 2.4.2)."""
        mu = self.fitted()
        with np.errstate(divide="ignore", invalid="ignore"):
            out: np.ndarray = np.where(mu > 0, (self.sample.y - mu) / np.sqrt(mu), np.nan)
        return out

    @property
    def warnings(self) -> list[Caution]:
        """Fit-level cautions and those of the bandwidth selection."""
        out = list(self.cautions)
        if self.selection is not None:
            out.extend(self.selection.warnings)
        return out

    # -- the local likelihood --------------------------------------------------
    def _node_grid(self, m: int) -> np.ndarray | None:
        """Nodes ``h / 32`` apart over the data range when ``m`` points outnumber them fourfold (else None)."""
        lo, hi = self.x_min, self.x_max
        nodes = int((hi - lo) / (self.bandwidth / _NODES_PER_BANDWIDTH)) + 2
        if nodes * 4 >= m or hi <= lo:
            return None
        return np.linspace(lo, hi, nodes)

    def _local(self, t: np.ndarray) -> _Local:
        """Local fits at ``t``; many points inside the data range are interpolated from nodes.

        With more than four points a node (nodes ``h / 32`` apart), the fits are computed at the
        nodes and carried to the points by linear interpolation of ``a``, ``b`` and the moments:
        all are smooth on the scale ``h``, and the interpolation error, about ``(h / 32)^2 / 8``
        times their second derivative, is far below the curve's own bias (order ``h^2``).
        """
        grid = self._node_grid(t.size)
        if grid is None:
            return self._local_direct(t)
        inside = (t >= grid[0]) & (t <= grid[-1])
        node = self._local_direct(grid)
        out = _Local(np.empty(t.size), np.empty(t.size), np.empty((t.size, 3)), np.empty(t.size, dtype=np.int64))
        ti = t[inside]
        out.a[inside] = np.interp(ti, grid, node.a)
        out.b[inside] = np.interp(ti, grid, node.b)
        for k in range(3):
            out.e[inside, k] = np.interp(ti, grid, node.e[:, k])
        nearest = np.clip(np.searchsorted(grid, ti), 0, grid.size - 1)
        out.degree[inside] = node.degree[nearest]
        if not inside.all():
            rest = self._local_direct(t[~inside])
            out.a[~inside], out.b[~inside], out.e[~inside], out.degree[~inside] = rest.a, rest.b, rest.e, rest.degree
        return out

    def _local_direct(self, t: np.ndarray) -> _Local:
        h = self.bandwidth
        perm = np.argsort(t, kind="stable")
        ys_sorted, _, _ = self._y_plan(t[perm])
        ysum = np.empty((t.size, 2))
        ysum[perm] = ys_sorted[:, 0, :2]
        zero = np.zeros(t.size)
        e = _shifted(self._w_plan, t, zero, h, 2)
        e0 = e[:, 0]
        has = e0 > 0
        floor = 1e-12 * max(self._y_mean, 1e-300)
        with np.errstate(divide="ignore", invalid="ignore"):
            a = np.where(has, np.log(np.maximum(ysum[:, 0], floor * e0) / e0), np.nan)
        b = np.zeros(t.size)
        deg = np.where(has, 0, -1)
        if self.degree >= 1:
            det0 = e[:, 0] * e[:, 2] - e[:, 1] ** 2
            active = has & (ysum[:, 0] > 0) & (det0 > _SINGULAR * e[:, 0] * e[:, 2])
            deg = np.where(active, 1, deg)
            for _ in range(_NEWTON_STEPS):
                if not active.any():
                    break
                idx = np.flatnonzero(active)
                ei = _shifted(self._w_plan, t[idx], b[idx], h, 2)
                s = np.exp(a[idx] + 0.5 * b[idx] ** 2)
                g0 = ysum[idx, 0] - s * ei[:, 0]
                g1 = ysum[idx, 1] - s * ei[:, 1]
                det = ei[:, 0] * ei[:, 2] - ei[:, 1] ** 2
                ok = det > _SINGULAR * ei[:, 0] * ei[:, 2]
                with np.errstate(divide="ignore", invalid="ignore"):
                    da = np.where(ok, (ei[:, 2] * g0 - ei[:, 1] * g1) / (det * s), 0.0)
                    db = np.where(ok, (ei[:, 0] * g1 - ei[:, 1] * g0) / (det * s), 0.0)
                big = np.maximum(np.abs(db) / _MAX_LOG_SLOPE_STEP, 1.0)
                a[idx] += da / big
                b[idx] += db / big
                e[idx] = ei
                done = (np.abs(da) + np.abs(db) < _STEP_TOLERANCE * (1.0 + np.abs(a[idx]))) | ~ok
                active[idx[done]] = False
            e[has] = _shifted(self._w_plan, t[has], b[has], h, 2)
        return _Local(a, b, e, deg)

    def _link(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray, _Local]:
        """``eta(t)`` and its sandwich variance."""
        loc = self._local(t)
        if self._w2_plan is None:
            self._w2_plan = MomentPlan(
                self.sample.xs, self.sample.ws[:, None], self.kernel_spec, self.bandwidth, 2, power=2,
                engine=self._engine_for(self.sample.n),
            )
        var = np.full(t.size, np.nan)
        has = loc.degree >= 0
        b = loc.b[has]
        if self.degree >= 1:
            g = _shifted(self._w2_plan, t[has], 0.5 * b, self.bandwidth, 2)
            e = loc.e[has]
            det = e[:, 0] * e[:, 2] - e[:, 1] ** 2
            lin = loc.degree[has] >= 1
            with np.errstate(divide="ignore", invalid="ignore"):
                # row 0 of E^-1: (E_2, -E_1) / det
                r0, r1 = e[:, 2] / det, -e[:, 1] / det
                quad = r0 * r0 * g[:, 0] + 2.0 * r0 * r1 * g[:, 1] + r1 * r1 * g[:, 2]
                const = g[:, 0] / e[:, 0] ** 2
            v = np.where(lin, quad, const)
        else:
            g = _shifted(self._w2_plan, t[has], np.zeros(b.size), self.bandwidth, 0)
            e = loc.e[has]
            v = g[:, 0] / e[:, 0] ** 2
        # A = s E, B = exp(a + b^2/4) G: var(a) = exp(a + b^2/4) / s^2 [E^-1 G E^-1]_00
        a = loc.a[has]
        var[has] = np.exp(-a - 0.75 * b**2) * v
        return loc.a, var, loc

    # -- public API ------------------------------------------------------------
    def predict(self, points: Any) -> np.ndarray:
        """Intensity estimate ``exp(a(t))`` at ``points``; NaN where the window holds no data."""
        t = np.asarray(points, dtype=float).ravel()
        out: np.ndarray = np.exp(self._local(t).a)
        return out

    def slope(self, points: Any) -> np.ndarray:
        """Derivative of the intensity, ``exp(a) b / h`` (degree 1)."""
        if self.degree < 1:
            raise ValueError("slope needs degree >= 1 (a local linear or quadratic fit)")
        t = np.asarray(points, dtype=float).ravel()
        loc = self._local(t)
        out: np.ndarray = np.where(loc.degree >= 1, np.exp(loc.a) * loc.b / self.bandwidth, np.nan)
        return out

    def _data_fit(self) -> _Local:
        return self.memo("data_fit", lambda: self._local(self.sample.x))

    def fitted(self) -> np.ndarray:
        """Fitted intensities at the data points, in the caller's order."""
        out: np.ndarray = np.exp(self._data_fit().a)
        return out

    def residuals(self) -> np.ndarray:
        """Response residuals ``y - fitted``."""
        out: np.ndarray = self.sample.y - self.fitted()
        return out

    def leverages(self) -> np.ndarray:
        """Influence of each reading on its own fit, ``w_i K(0) exp(eta_i) [A^-1]_00`` (Loader 1999, Section 4.4)."""
        loc = self._data_fit()
        out: np.ndarray = self.sample.w * self._influence_factor(loc)
        return out

    @property
    def effective_df(self) -> float:
        lev = self.leverages()
        return float(np.nansum(lev))

    @property
    def variance_df(self) -> float:
        return self.effective_df

    def _influence_factor(self, loc: _Local) -> np.ndarray:
        """``K(0) exp(-b^2 / 2) [E^-1]_00``: the influence of a unit-weight reading at the fit's point."""
        e = loc.e
        with np.errstate(divide="ignore", invalid="ignore"):
            inv00 = np.where(loc.degree >= 1, e[:, 2] / (e[:, 0] * e[:, 2] - e[:, 1] ** 2), 1.0 / e[:, 0])
        out: np.ndarray = self.kernel_spec.at_zero * np.exp(-0.5 * loc.b**2) * inv00
        return out

    def likelihood_aic(self) -> tuple[float, float]:
        """``(deviance + 2 df, df)`` with ``df`` the summed influences (Loader 1999, Section 4.3).

        With many readings the local fits come from nodes (see ``_local``), so scoring a
        candidate costs O(n) for the deviance and the sums, not a Newton pass over every reading.
        """
        sample = self.sample
        loc = self._local(sample.xs)
        a, infl = loc.a, sample.ws * self._influence_factor(loc)
        df = float(np.sum(infl))
        dev = float(np.sum(poisson_deviance(sample.ys, np.exp(a), sample.ws)))
        return dev + 2.0 * df, df

    def deviance(self) -> float:
        """Total Poisson deviance of the fit at the data (McCullagh & Nelder 1989, Section 2.3)."""
        mu = self.fitted()
        ok = (self.sample.w > 0) & np.isfinite(mu)
        return float(np.sum(poisson_deviance(self.sample.y[ok], mu[ok], self.sample.w[ok])))

    @property
    def residual_scale(self) -> float:
        """Dispersion: ``sqrt(Pearson chi^2 / (n - df))``, about 1 for Poisson counts (McCullagh & Nelder 1989, Section 4.5)."""
        mu = self.fitted()
        ok = (self.sample.w > 0) & np.isfinite(mu) & (mu > 0)
        dof = float(np.count_nonzero(ok)) - self.effective_df
        if dof <= 0:
            return float("nan")
        chi2 = float(np.sum(self.sample.w[ok] * (self.sample.y[ok] - mu[ok]) ** 2 / mu[ok]))
        return math.sqrt(chi2 / dof)

    def standard_error(self, points: Any, *, robust: bool = False) -> np.ndarray:
        """Standard error of the intensity estimate (delta method: ``exp(eta) se(eta)``)."""
        t = check_points(points)
        eta, var, _ = self._link(t)
        out: np.ndarray = np.exp(eta) * np.sqrt(var)
        return out

    def bands(
        self, points: Any, level: float = 0.95, method: str = "analytic", replicates: int = 0, seed: int | None = 0,
        simultaneous: bool = False, **options: Any,
    ) -> Bands:
        """Pointwise band ``exp(eta_c +- z se_c)``: computed on the link scale, so it stays positive.

        The centre is bias-corrected by the generalized jackknife (Schucany & Sommers 1977):
        with ``eta_h`` the fit at bandwidth ``h``, whose leading bias is proportional to ``h^2``,
        ``eta_c = 2 eta_h - eta_{sqrt(2) h}`` removes it. Its standard error is the sandwich
        standard error of ``eta_h`` times ``sqrt(4 + 1/sqrt(2) - 8/sqrt(6)) = 1.20``, the ratio of
        ``integral (2 K_h - K_{sqrt(2) h})^2`` to ``integral K_h^2`` for the gaussian kernel (the
        equivalent kernel of an interior local fit, Fan & Gijbels 1996, Section 3.2.2).

        Only the analytic pointwise band exists for this family; ``method``, ``replicates``,
        ``seed`` and ``simultaneous`` are recorded as the band actually given (analytic, pointwise).
        """
        t = check_points(points)
        lev = check_level(level)
        z = float(ndtri(0.5 + lev / 2.0))
        eta_h, var, _ = self._link(t)
        wider = PoissonSmoother(self.sample, self.kernel_spec, self.degree, self.bandwidth * math.sqrt(2.0), self.engine_request)
        eta = 2.0 * eta_h - wider._local(t).a
        se_eta = np.sqrt(var) * _JACKKNIFE_SE_FACTOR
        est = np.exp(eta)
        warn = []
        if method != "analytic" or simultaneous:
            warn.append(Caution("counts_bands", "counts get the analytic pointwise band on the log scale; ask for method 'analytic'"))
        return Bands(
            lower=np.exp(eta - z * se_eta), upper=np.exp(eta + z * se_eta), se=est * se_eta, estimate=est,
            method="analytic", level=lev, simultaneous=False, replicates=None, seed=None, critical_value=z,
            bias_corrected=True, centre_degree=self.degree, noise="poisson", warnings=warn,
        )

    def prediction_interval(self, points: Any, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
        """Interval for a new count (unit weight): Poisson quantiles at the ends of the band.

        ``[Q((1 - p) / 2; lower), Q((1 + p) / 2; upper)]`` with ``Q(q; mu)`` the Poisson quantile
        and ``lower, upper`` the curve's band at the same level: conservative, it allows for the
        curve's uncertainty as well as the Poisson noise of the new count.
        """
        lev = check_level(level)
        band = self.bands(points, level=lev)
        return poisson_quantile((1.0 - lev) / 2.0, band.lower), poisson_quantile((1.0 + lev) / 2.0, band.upper)


def poisson_fit(
    sample: SortedSample,
    kernel: Kernel,
    degree: int,
    bandwidth: float | str,
    engine: str = "auto",
    candidates: int = 40,
    bandwidth_min: float | None = None,
    bandwidth_max: float | None = None,
) -> PoissonSmoother:
    """Local log-linear Poisson fit (see the module notes); ``bandwidth="auto"`` minimises the local likelihood AIC.

    Candidates are scored from the smoothest down; after six in a row that score worse than
    the best so far, the rougher rest stay unscored (NaN in ``selection.scores``).

    Raises
    ------
    ValueError
        Negative readings, a kernel other than gaussian, degree 2.
    """
    check_counts(sample.y)
    if kernel.name != "gaussian":
        raise ValueError(f"family 'poisson' uses the gaussian kernel; got kernel {kernel.name!r}: ask for kernel 'gaussian'")
    if degree > 1:
        raise ValueError("family 'poisson' fits degree 0 or 1 (local constant or local log-linear); ask for degree 1")
    if float(np.sum(sample.ws * sample.ys)) <= 0:
        raise ValueError("every count is 0: a Poisson intensity cannot be estimated; check the readings")
    if not isinstance(bandwidth, str):
        return PoissonSmoother(sample, kernel, degree, float(bandwidth), engine)
    grid, cautions = candidate_grid(sample, kernel, degree, candidates, bandwidth_min, bandwidth_max)
    scores = np.full(grid.size, np.nan)
    dfs = np.full(grid.size, np.nan)
    # from the smoothest candidate down; once the score has stayed above the best for
    # _PATIENCE candidates in a row (a quarter of the bandwidth or less), the rougher ones,
    # whose variance only grows, are left unscored (NaN)
    best_score, behind = math.inf, 0
    for i in range(grid.size - 1, -1, -1):
        score, df = PoissonSmoother(sample, kernel, degree, float(grid[i]), engine).likelihood_aic()
        if not math.isfinite(score):
            continue
        scores[i] = score
        dfs[i] = df
        if score < best_score:
            best_score, behind = score, 0
        else:
            behind += 1
            if behind >= _PATIENCE:
                break
    if not np.isfinite(scores).any():
        raise ValueError("no candidate bandwidth gives a defined fit; give a bandwidth")
    best = int(np.nanargmin(scores))
    chosen = float(grid[best])
    edge = edge_caution(best, grid, "likelihood AIC choice", False)
    if edge is not None:
        cautions.append(edge)
    selection = Selection(
        selector="likelihood_aic", rule="min", candidates=grid, scores=scores, chosen=chosen,
        gaussian_equivalent=chosen, warnings=list(cautions), effective_df=dfs, scoring="exact",
    )
    return PoissonSmoother(sample, kernel, degree, chosen, engine, selection)


def resistant_poisson_fit(
    sample: SortedSample,
    kernel: Kernel,
    degree: int,
    bandwidth: float | str,
    engine: str = "auto",
    candidates: int = 40,
    bandwidth_min: float | None = None,
    bandwidth_max: float | None = None,
) -> PoissonSmoother:
    """A count fit that spikes do not drag: the scheme of :mod:`estimators.robust` on Pearson residuals.

    Robustness weights from the Pearson residuals ``(y - mu) / sqrt(mu)`` (a Huber step, then
    Cleveland's bisquare iterations, then the readings they give no weight are left out), the
    weighting of the residuals that robust quasi-likelihood uses for counts (Cantoni & Ronchetti
    2001b). With ``bandwidth="auto"`` the AIC picks a pilot on all readings and, when readings are
    left out, scores the candidates again on those that are kept (as for the gaussian family, the
first weights are found at the larger of the AIC's choice and the rule-of-thumb bandwidth);
    the selector is then reported as ``robust_likelihood_aic``.

    References
    ----------
    Cantoni, E. & Ronchetti, E. (2001b). Robust inference for generalized linear models. Journal of
        the American Statistical Association 96, 1022-1030.
    """
    pilot = poisson_fit(sample, kernel, degree, bandwidth, engine, candidates, bandwidth_min, bandwidth_max)

    def pearson_at(h: float) -> Callable[[SortedSample], np.ndarray]:
        return lambda smp: PoissonSmoother(smp, kernel, degree, h, engine).pearson_residuals()

    h = pilot.bandwidth
    start_h = h
    if pilot.selection is not None:
        # spikes can draw the AIC to a bandwidth that follows them: the weights start at the larger
        # of its choice and the rule of thumb (a global fit, never that small), as for the gaussian family
        rot, _ = rule_of_thumb_bandwidth(sample, kernel)
        grid = pilot.selection.candidates
        if math.isfinite(rot):
            start_h = max(h, float(np.clip(rot, grid[0], grid[-1])))
    rob = resistant_weights(sample, kernel, degree, start_h, engine, residuals=pearson_at(start_h))
    selection = pilot.selection
    if rob.n_rejected and isinstance(bandwidth, str):
        again = poisson_fit(sample.reweighted(rob.weights), kernel, degree, bandwidth, engine, candidates, bandwidth_min, bandwidth_max)
        h, selection = again.bandwidth, again.selection
        rob = resistant_weights(sample, kernel, degree, h, engine, start=rob.weights, residuals=pearson_at(h))
    if selection is not None:
        selection = replace(selection, selector=f"robust_{selection.selector}")
    return PoissonSmoother(sample.reweighted(rob.weights), kernel, degree, h, engine, selection, robustness=rob)
