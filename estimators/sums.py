"""Kernel-weighted moment sums over sorted data: exact fast paths and the binned path.

``M_ck(t) = sum_i q_ic K(u_i)^p u_i^k`` with ``u_i = (x_i - t) / h``, without an ``n`` by ``m`` matrix:
tile-centred sums for compact kernels, a fast Gauss transform for the gaussian, linear binning and FFT
for the binned path. Derivations, error bounds and references: ``docs/methods.md`` (windowed moment sums).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from functools import cache

import numpy as np
from scipy import fft as sp_fft

from . import _compiled  # compiled sweeps (their vectorised reference is in the tests)
from .kernels import Kernel, Shape

__all__ = [
    "GAUSSIAN_CUTOFF",
    "BINNED_POINTS_PER_BANDWIDTH",
    "moment_sums",
    "window_counts",
]

GAUSSIAN_CUTOFF = 10.0
N_TERMS = 24
#: Fast Gauss transform terms, by local degree, for the squared kernel's sums at the data points (see ``docs/methods.md``)
DATA_POINT_TERMS = {0: 16, 1: 18, 2: 22}
BINNED_POINTS_PER_BANDWIDTH = 256


# ---------------------------------------------------------------------------
# window bookkeeping
# ---------------------------------------------------------------------------


def effective_radius(kernel: Kernel) -> float:
    """Half-width of the window in bandwidths (support, or the gaussian cutoff)."""
    return kernel.support if math.isfinite(kernel.support) else GAUSSIAN_CUTOFF


#: ascending points at least 1/16 as many as the data get their windows by one forward sweep
#: (O(n + m)); fewer get binary searches (O(m log n)), which do not walk every data point
_SWEEP_MIN_SHARE = 16


def window_bounds(
    x: np.ndarray, points: np.ndarray, kernel: Kernel, bandwidth: float, ascending: bool = False
) -> tuple[np.ndarray, np.ndarray]:
    """Index range ``[lo, hi)`` of sorted ``x`` inside each point's window.

    Kernels that vanish at ``|u| = 1`` use the open window (edge points carry no
    weight); the uniform kernel uses the closed one.  ``ascending=True``
    promises sorted points, which allows the forward sweep.
    """
    radius = effective_radius(kernel) * bandwidth
    closed = not kernel.vanishes_at_edge
    m = points.size
    if ascending and m * _SWEEP_MIN_SHARE >= x.size:
        lo = np.empty(m, dtype=np.int64)
        hi = np.empty(m, dtype=np.int64)
        _compiled.window_bounds_ascending(x, np.ascontiguousarray(points, dtype=float), radius, closed, lo, hi)
        return lo, hi
    lo = np.searchsorted(x, points - radius, side="left" if closed else "right")
    hi = np.searchsorted(x, points + radius, side="right" if closed else "left")
    return lo, hi


def window_counts(x: np.ndarray, points: np.ndarray, kernel: Kernel, bandwidth: float) -> np.ndarray:
    """Number of sorted data points carrying weight in each point's window."""
    lo, hi = window_bounds(x, points, kernel, bandwidth)
    counts: np.ndarray = np.maximum(hi - lo, 0)
    return counts


# ---------------------------------------------------------------------------
# gaussian kernel: fast Gauss transform on tiles of width h
# ---------------------------------------------------------------------------


def _hermite_functions(d: np.ndarray, count: int) -> np.ndarray:
    """``f^(n)(d)`` for ``f(u) = exp(-u^2/2)``, ``n < count``: ``(-1)^n He_n(d) exp(-d^2/2)``."""
    d = np.asarray(d, dtype=float)
    out = np.empty(d.shape + (count,))
    base = np.exp(-0.5 * d * d)
    he_prev = np.zeros_like(d)
    he = np.ones_like(d)
    for k in range(count):
        out[..., k] = ((-1.0) ** k) * he * base
        he_prev, he = he, d * he - k * he_prev
    return out


def _sorted_groups(keys: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct values of ascending ``keys`` and the index where each run starts (``np.unique`` without its sort)."""
    if keys.size == 0:
        return keys, np.zeros(0, dtype=np.int64)
    starts = np.flatnonzero(np.concatenate(([True], keys[1:] != keys[:-1])))
    return keys[starts], starts


#: Taylor terms economized down to ``N_TERMS`` (their own truncation error, 1.09 / sqrt(48!), is below 1e-30)
_TAYLOR_TERMS = 48


_FACTORIALS = np.array([math.factorial(j) for j in range(2 * N_TERMS)], dtype=float)
_FACTORIALS.setflags(write=False)
_FACTORIALS_TAYLOR = np.array([math.factorial(j) for j in range(_TAYLOR_TERMS)], dtype=float)

#: local expansions kept per source set, in tiles; beyond it each call translates afresh
_LOCAL_CACHE_TILES = 16384
#: source tiles farther than this from a target tile are skipped (GAUSSIAN_CUTOFF bandwidths, plus one tile)
_REACH = int(math.ceil(GAUSSIAN_CUTOFF)) + 1


#: points whose nearest source is farther than this many bandwidths get their gaussian sums term by
#: term: the transform's absolute error (below 1e-18 of the mass in reach) is then no longer small
#: against sums of exp(-u^2/2) < 1.5e-8 of that mass (3e-11 relative at the threshold)
_DIRECT_BEYOND = 6.0


def _reach_in_tiles(power: int) -> int:
    """Tiles of ``h / sqrt(power)`` that span ``GAUSSIAN_CUTOFF`` bandwidths ``h``, plus one.

    The squared kernel's sums run on tiles ``sqrt 2`` times narrower; with the
    same count of tiles they would stop at 7.8 bandwidths, so a point 8-10
    bandwidths from all data (a gap, or far outside the data) would get a
    variance of 0 while its estimate is defined.
    """
    return int(math.ceil(GAUSSIAN_CUTOFF * math.sqrt(power))) + 1


class _GaussSources:
    """Source side of the fast Gauss transform: tile moments ``M[S, c, j] = sum q v^j / j!``.

    Local expansions, once translated for a target tile, are kept (up to
    :data:`_LOCAL_CACHE_TILES` tiles), so evaluating the same sources at the
    curve points and then at the data points translates each tile once.  When
    every tile with a source in reach fits, the kept expansions are one dense
    array indexed by tile and a single compiled pass does the lookup,
    translation and evaluation (:func:`_compiled.gauss_transform`); otherwise
    a sorted cache of tiles is merged in Python.
    """

    def __init__(self, x: np.ndarray, q: np.ndarray, bandwidth: float, terms: int = N_TERMS, reach: int = _REACH) -> None:
        n, ncol = q.shape
        self.h = float(bandwidth)
        self.terms = terms
        self.reach = reach
        self.x, self.q = x, np.ascontiguousarray(q, dtype=float)
        self.translations = _translation_matrices(terms, reach)
        self.lengths = offset_terms(terms, reach)
        self.ncol = ncol
        self.origin = float(x[0])
        self.tiles, self.moments = _compiled.gauss_sources(np.ascontiguousarray(x, dtype=float), self.origin, self.h, self.q, _FACTORIALS, terms)
        self._wide_gaps: bool | None = None  # found when first needed (see _has_wide_gaps)
        self._cached_tiles = np.empty(0)
        self._cached_local = np.empty((0, ncol, terms))
        # Every tile with a source in reach fits the cache: keep it as one dense array indexed by tile.
        span = int(self.tiles[-1] - self.tiles[0]) + 1 + 2 * reach if self.tiles.size else 0
        self._dense = 0 < span <= _LOCAL_CACHE_TILES
        if self._dense:
            self._tile_lo = float(self.tiles[0] - reach)
            self._dense_local = np.empty((span, ncol, terms))
            self._filled = np.zeros(span, dtype=np.bool_)

    def _local(self, ttiles: np.ndarray) -> np.ndarray:
        """Local expansions at the ascending distinct target tiles ``ttiles``."""
        known = self._cached_tiles
        pos = np.minimum(np.searchsorted(known, ttiles), max(known.size - 1, 0))
        hit = known[pos] == ttiles if known.size else np.zeros(ttiles.size, dtype=bool)
        if hit.all():
            return self._cached_local[pos]
        missing = ttiles[~hit]
        fresh = np.empty((missing.size, self.ncol, self.terms))
        _compiled.gauss_translate(self.tiles, self.moments, missing, self.translations, self.lengths, self.reach, fresh)
        if known.size + missing.size <= _LOCAL_CACHE_TILES:
            merged = np.concatenate([known, missing])
            order = np.argsort(merged, kind="stable")
            self._cached_tiles = merged[order]
            self._cached_local = np.concatenate([self._cached_local, fresh])[order]
            return self._cached_local[np.searchsorted(self._cached_tiles, ttiles)]
        out = np.empty((ttiles.size, self.ncol, self.terms))
        out[~hit] = fresh
        out[hit] = self._cached_local[pos[hit]]
        return out

    def transform(self, points: np.ndarray, conv: np.ndarray, ascending: bool = False) -> np.ndarray:
        """``sum_j conv[j, k] D_j(t)`` with ``D_j = d^j/dw^j sum_i q_i exp(-(x_i - t)^2 / 2h^2)`` in units of ``h``.

        ``D_j = sum_i q_i He_j(u_i) exp(-u_i^2/2)`` with ``u_i = (x_i - t)/h``
        (the identity for ``conv`` gives the derivatives themselves).
        ``points`` in any order (ascending needs no sort; ``ascending=True``
        promises it and skips the check). Returns shape ``(m, ncol, conv.shape[1])``.
        """
        m = points.size
        nk = conv.shape[1]
        if m == 0:
            return np.zeros((0, self.ncol, nk))
        if not ascending and not _is_sorted(points):
            perm = np.argsort(points, kind="stable")
            out = np.empty((m, self.ncol, nk))
            out[perm] = self.transform(points[perm], conv)
            return out
        out = np.empty((m, self.ncol, nk))
        if self._dense:
            _compiled.gauss_transform(
                np.ascontiguousarray(points, dtype=float), self.origin, self.h, self._tile_lo, self.tiles, self.moments, self.translations, self.lengths, self.reach,
                _FACTORIALS, conv, self._dense_local, self._filled, out,
            )
            self._far_points_directly(points, conv, out)
            return out
        tgt_tile_all = np.floor((points - self.origin) / self.h)
        w_all = (points - self.origin) / self.h - (tgt_tile_all + 0.5)
        ttiles, starts = _sorted_groups(tgt_tile_all)
        which = np.repeat(np.arange(ttiles.size, dtype=np.int64), np.diff(np.append(starts, m)))
        local = self._local(ttiles)
        _compiled.gauss_evaluate(local, which, np.ascontiguousarray(w_all), _FACTORIALS, conv, out)
        self._far_points_directly(points, conv, out)
        return out

    def _has_wide_gaps(self) -> bool:
        """Whether some gap between data holds a point beyond ``_DIRECT_BEYOND`` bandwidths from both sides."""
        if self._wide_gaps is None:
            tiles = self.tiles
            # sources in tiles a < b are less than (b - a + 1) tile widths apart, so such a gap needs
            # b - a >= 2 _DIRECT_BEYOND, i.e. that many empty tiles less one; fewer in all: no need to look
            empty = float(tiles[-1] - tiles[0]) + 1.0 - tiles.size if tiles.size else 0.0
            wide = 2.0 * _DIRECT_BEYOND
            self._wide_gaps = bool(empty >= wide - 1.0 and np.any(np.diff(tiles) >= wide))
        return self._wide_gaps

    def _far_points_directly(self, points: np.ndarray, conv: np.ndarray, out: np.ndarray) -> None:
        """Replace the transform's sums by term-by-term sums at ascending points far from all data.

        Such points lie beyond the ends of the data or inside a wide gap, so the
        check costs nothing for points among the data.
        """
        near = _DIRECT_BEYOND * self.h
        if not (points[0] < self.x[0] - near or points[-1] > self.x[-1] + near or self._has_wide_gaps()):
            return
        idx = np.searchsorted(self.x, points)
        left = points - self.x[np.maximum(idx - 1, 0)]
        right = self.x[np.minimum(idx, self.x.size - 1)] - points
        gap = np.minimum(np.where(idx > 0, left, np.inf), np.where(idx < self.x.size, right, np.inf))
        far = np.flatnonzero(gap > near)
        if far.size == 0:
            return
        pts = np.ascontiguousarray(points[far], dtype=float)
        radius = (self.reach + 1) * self.h  # every source the transform could have counted
        lo = np.searchsorted(self.x, pts - radius, side="left")
        hi = np.searchsorted(self.x, pts + radius, side="right")
        sums = np.empty((far.size, self.ncol, conv.shape[0]))
        _compiled.gauss_direct(self.x, self.q, pts, lo, hi, self.h, sums)
        out[far] = np.einsum("mcj,jk->mck", sums, conv)


def _chebyshev_kernel(offset: float) -> np.ndarray:
    """Chebyshev coefficients on ``|s| <= 1`` of the :data:`_TAYLOR_TERMS`-term Taylor series of ``exp(-(offset + s)^2 / 2)``."""
    taylor = _hermite_functions(np.array(float(offset)), _TAYLOR_TERMS) / _FACTORIALS_TAYLOR
    return np.polynomial.chebyshev.poly2cheb(taylor)


def economized_kernel(offset: float, terms: int = N_TERMS) -> np.ndarray:
    """Power-basis coefficients ``a_n`` (``n < terms``) with ``sum a_n s^n ~ exp(-(offset + s)^2 / 2)`` on ``|s| <= 1``.

    The Taylor series about ``offset`` to :data:`_TAYLOR_TERMS` terms,
    rewritten as a Chebyshev series, cut after ``terms`` terms and written
    back in powers of ``s`` (Lanczos economization): the cut changes the
    polynomial by at most the sum of the dropped coefficients on the interval,
    and the result is within rounding of the Chebyshev truncation of the
    kernel (see ``docs/methods.md`` for the bound).
    """
    power = np.polynomial.chebyshev.cheb2poly(_chebyshev_kernel(offset)[:terms])
    out = np.zeros(terms)
    out[: power.size] = power  # the conversion drops trailing zeros
    return out


#: highest derivative of the kernel the fits take from the transform (moments up to u^4, local quadratic)
_DERIVATIVES = 4


@cache
def offset_terms(terms: int = N_TERMS, reach: int = _REACH) -> np.ndarray:
    """Polynomial length ``N_D <= terms`` used at each tile offset ``D = -reach .. reach``.

    The error of cutting the Chebyshev series ``sum c_n T_n(s)`` of
    ``exp(-(D + s)^2 / 2)`` after ``N`` terms is at most ``sum_{n >= N} |c_n|``
    on ``|s| <= 1``, and that of its derivative ``r`` at most
    ``sum_{n >= N} |c_n| n^(2r)`` (Markov's inequality for polynomials).  Far
    from the target the kernel is tiny and so are its coefficients: ``N_D`` is
    the shortest length whose bounds, for every derivative up to
    :data:`_DERIVATIVES`, stay within the worst bound of the full length over
    all offsets.  The error per unit of mass is then no larger than with
    ``terms`` everywhere, and the translations do less work (about three
    quarters of it with 24 terms and reach 11).  Symmetric in ``D`` (the
    kernel is even).  Read-only, built once per ``(terms, reach)``.
    """
    orders = 2.0 * np.arange(_DERIVATIVES + 1)
    tails = np.zeros((reach + 1, orders.size, _TAYLOR_TERMS + 1))
    for d in range(reach + 1):
        c = np.abs(_chebyshev_kernel(float(d)))
        n = np.arange(c.size, dtype=float)
        weighted = c[None, :] * n[None, :] ** orders[:, None]
        tails[d, :, : c.size] = np.cumsum(weighted[:, ::-1], axis=1)[:, ::-1]  # tails[d, r, N] = sum_{n >= N}
    worst = tails[:, :, terms].max(axis=0)
    lengths = [next(m for m in range(1, terms + 1) if np.all(tails[d, :, m] <= worst)) for d in range(reach + 1)]
    out = np.array(lengths[:0:-1] + lengths, dtype=np.int64)
    out.setflags(write=False)
    return out


@cache
def _translation_matrices(terms: int = N_TERMS, reach: int = _REACH) -> np.ndarray:
    """``A[k, j] = (-1)^k (j+k)! a_{j+k}(D) / k!`` (``j + k < N_D``, zero beyond) for every tile offset ``D``.

    With ``a_n(D)`` from :func:`economized_kernel` at the length ``N_D`` of
    :func:`offset_terms`, ``exp(-(D + v - w)^2/2) ~ sum_n a_n (v - w)^n``;
    expanding the binomial, the local coefficients of a target tile are
    ``L_k = sum_j A[k, j] M_j`` summed over the source tiles at offset ``D``
    (the tile moments ``M`` already hold ``1/j!``). For the plain Taylor
    series ``(j+k)! a_{j+k}`` is the derivative ``f^(j+k)(D)``. A constant
    table per term count, built once (read-only).
    """
    n = terms
    jk = np.add.outer(np.arange(n), np.arange(n))
    sign_k = (-1.0) ** np.arange(n)
    lengths = offset_terms(terms, reach)
    out = np.empty((2 * reach + 1, n, n))
    for i, off in enumerate(range(-reach, reach + 1)):
        nd = int(lengths[i])
        a = np.zeros(n)
        a[:nd] = economized_kernel(float(off), nd)
        derivative_like = a * _FACTORIALS[:n]
        out[i] = np.where(jk < nd, derivative_like[np.minimum(jk, n - 1)] * (sign_k / _FACTORIALS[:n])[:, None], 0.0)
    out.setflags(write=False)
    return out


for _terms in sorted({N_TERMS, *DATA_POINT_TERMS.values()}):
    _translation_matrices(_terms)  # built at import (and in the preloaded worker parent), not on a first request
_translation_matrices(N_TERMS, _reach_in_tiles(2))  # the squared kernel's sums at arbitrary points
del _terms


@cache
def _hermite_to_power(order: int) -> np.ndarray:
    """Matrix ``P`` with ``u^k = sum_j P[k, j] He_j(u)`` for ``k <= order`` (read-only, built once per order)."""
    p = np.zeros((order + 1, order + 1))
    # u^k = sum_i k! / (i! (k-2i)! 2^i) He_{k-2i}(u)
    for k in range(order + 1):
        for i in range(k // 2 + 1):
            p[k, k - 2 * i] = math.factorial(k) / (math.factorial(i) * math.factorial(k - 2 * i) * 2**i)
    p.setflags(write=False)
    return p


@cache
def _gauss_conversion(order: int, power: int) -> np.ndarray:
    """``conv[j, k]`` with ``sum q u^k K(u)^power = sum_j conv[j, k] (sum q He_j(u') f(u'))``, ``u' = sqrt(power) u``.

    ``f`` the unnormalised gaussian ``exp(-u'^2 / 2)``; read-only, built once per ``(order, power)``.
    """
    norm = (2.0 * math.pi) ** (-0.5 * power)
    scale = norm * (1.0 / math.sqrt(power)) ** np.arange(order + 1)  # u = u' / sqrt(power)
    conv = np.ascontiguousarray(_hermite_to_power(order).T * scale)
    conv.setflags(write=False)
    return conv


class _GaussianPlan:
    """Moments for the gaussian kernel (or its square) by the fast Gauss transform."""

    def __init__(self, x: np.ndarray, q: np.ndarray, bandwidth: float, order: int, power: int, terms: int = N_TERMS, data_points: bool = False) -> None:
        # K(u)^2 = exp(-u^2) / (2 pi) = f(sqrt2 u) / (2 pi): a gaussian at h / sqrt 2
        self.order = order
        # at a data point the sum holds the point's own term, so sources beyond 7.8 bandwidths
        # (11 tiles of h / sqrt 2) cannot matter there; anywhere else the full cutoff is needed
        reach = _REACH if data_points else _reach_in_tiles(power)
        self.sources = _GaussSources(x, q, bandwidth / math.sqrt(power), terms, reach)
        self.conv = _gauss_conversion(order, power)

    def __call__(self, points: np.ndarray) -> np.ndarray:
        return self.sources.transform(points, self.conv, ascending=True)  # plans take ascending points


# ---------------------------------------------------------------------------
# binned path
# ---------------------------------------------------------------------------


def binned_grid_size(x_min: float, x_max: float, kernel: Kernel, bandwidth: float) -> int:
    """Number of grid points the binned path would use for this problem."""
    span = (x_max - x_min) + 2.0 * effective_radius(kernel) * bandwidth
    cells = span / bandwidth * BINNED_POINTS_PER_BANDWIDTH
    if not math.isfinite(cells) or cells > 2.0**62:
        return 2**62  # no grid could hold it: callers fall back to the exact path
    return int(math.ceil(cells)) + 4


#: a binned grid beyond the data size by more than this many nodes is not built: the exact
#: path is then faster, and the grid's memory would grow with 1 / bandwidth, not with the data
BINNED_GRID_SLACK = 2**20


def binned_grid_allowed(size: int, n: int, m: int) -> bool:
    """Whether a binned grid of ``size`` nodes is worth building for ``n`` sources and ``m`` queries."""
    return size <= max(n, m) + BINNED_GRID_SLACK


class _BinnedPlan:
    """Binned moments: linear binning, FFT convolution onto the grid once; cubic interpolation per call."""

    def __init__(
        self,
        x: np.ndarray,
        q: np.ndarray,
        kernel: Kernel,
        bandwidth: float,
        order: int,
        power: int,
        column_orders: Sequence[int] | None = None,
    ) -> None:
        n, ncol = q.shape
        self.ncol, self.order = ncol, order
        orders = [order] * ncol if column_orders is None else [min(order, int(o)) for o in column_orders]
        h = float(bandwidth)
        radius = effective_radius(kernel)
        self.step = step = h / BINNED_POINTS_PER_BANDWIDTH
        self.start = start = float(x[0]) - radius * h - 2 * step
        self.size = size = binned_grid_size(float(x[0]), float(x[-1]), kernel, h)
        reach = int(math.ceil(radius * BINNED_POINTS_PER_BANDWIDTH))
        lags = np.arange(-reach, reach + 1) * (step / h)
        kvals = kernel(lags) ** power
        counts = np.zeros((size, ncol))
        _compiled.linear_bin(x, np.ascontiguousarray(q), start, step, size, counts)
        # sum_j c_j K(u) u^k with u = (g_j - g_l) / h is a correlation: one forward FFT per
        # column, one inverse per (column, order)
        length = sp_fft.next_fast_len(size + 2 * reach, real=True)
        filters = sp_fft.rfft(np.stack([(kvals * lags**k)[::-1] for k in range(order + 1)]), n=length, axis=1)
        self.grid = np.zeros((size, ncol, order + 1))
        for c in range(ncol):
            spec = sp_fft.rfft(counts[:, c], n=length)
            for k in range(orders[c] + 1):
                conv = sp_fft.irfft(spec * filters[k], n=length)
                self.grid[:, c, k] = conv[reach : reach + size]

    def __call__(self, points: np.ndarray) -> np.ndarray:
        m = points.size
        out = np.zeros((m, self.ncol, self.order + 1))
        _compiled.keys_interpolate(self.grid, self.start, self.step, points, out)
        return out


def compiled_shape(shape: Shape) -> tuple[tuple[float, ...], tuple[int, ...], tuple[int, ...], float, float]:
    """A compact kernel's form as the compiled sweeps take it: ``(poly, sides, trig_marker, amp, omega)``.

    Tuple lengths are part of the compiled signature, so each kernel gets loops
    with constant bounds: ``poly`` holds at least one coefficient, ``sides`` has
    two entries for a polynomial in ``|u|``, ``trig_marker`` one entry when the
    kernel has a cosine term ``amp cos(omega u)``.
    """
    if len(shape.cosines) > 1:
        raise NotImplementedError("the compiled sweep takes at most one cosine term")
    amp, omega = shape.cosines[0] if shape.cosines else (0.0, 0.0)
    poly = tuple(float(c) for c in shape.poly) or (0.0,)
    sides = (0, 1) if shape.in_abs else (0,)
    return poly, sides, ((0,) if shape.cosines else ()), float(amp), float(omega)


def _is_sorted(a: np.ndarray) -> bool:
    return bool(a.size < 2 or np.all(a[1:] >= a[:-1]))


class MomentPlan:
    """Source-side work done once; call with ascending points (any number of blocks).

    Returns ``(moments, lo, hi)`` per call; see :func:`moment_sums` for the
    meaning of the arguments. ``column_orders`` may lower the order needed for
    some columns (entries above it are then zero and are not to be used).
    ``gauss_terms`` sets the polynomial length of the fast Gauss transform
    (gaussian kernel, exact engine only; see :data:`DATA_POINT_TERMS`);
    ``data_points=True`` promises that the points are data locations, where the
    squared kernel's sums may stop at 7.8 bandwidths (see :class:`_GaussianPlan`).
    """

    def __init__(
        self,
        x: np.ndarray,
        q: np.ndarray,
        kernel: Kernel,
        bandwidth: float,
        order: int,
        *,
        power: int = 1,
        engine: str = "exact",
        column_orders: Sequence[int] | None = None,
        gauss_terms: int = N_TERMS,
        data_points: bool = False,
    ) -> None:
        self.x, self.q = x, (q[:, None] if q.ndim == 1 else q)
        self.kernel, self.bandwidth, self.order, self.power = kernel, float(bandwidth), int(order), int(power)
        #: the binned or gaussian evaluation of the sums (window bounds separately); None for compact kernels
        self._evaluate: Callable[[np.ndarray], np.ndarray] | None = None
        #: compact kernels: sums and window bounds in one compiled sweep (:meth:`_compact`)
        self._fused = False
        if engine == "binned":
            if x.size:
                self._evaluate = _BinnedPlan(x, self.q, kernel, bandwidth, order, power, column_orders)
        elif engine != "exact":
            raise ValueError(f"unknown engine {engine!r}")
        elif kernel.shape is None:
            if x.size:
                self._evaluate = _GaussianPlan(x, self.q, bandwidth, order, power, gauss_terms, data_points)
        else:
            self.shape = kernel.shape if power == 1 else kernel.shape.squared()
            self.orders = np.full(self.q.shape[1], order, dtype=np.int64)
            if column_orders is not None:
                self.orders[:] = np.minimum(np.asarray(column_orders, dtype=np.int64), order)
            self.q = np.ascontiguousarray(self.q, dtype=float)
            self._fused = True

    def _compact(self, points: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Compiled sliding sweep for compact kernels: moments and window bounds in one pass."""
        m = points.size
        mom = np.empty((m, self.q.shape[1], self.order + 1))
        lo = np.empty(m, dtype=np.int64)
        hi = np.empty(m, dtype=np.int64)
        poly, sides, trig_marker, amp, omega = compiled_shape(self.shape)
        # one compiled sweep for all kernels here (coefficients as an array); the fits specialise per kernel
        _compiled.window_moments(
            self.x, self.q, points, self.bandwidth, np.asarray(poly), sides, trig_marker, amp, omega, self.orders,
            not self.kernel.vanishes_at_edge, mom, lo, hi,
        )
        return mom, lo, hi

    def sums(self, points: np.ndarray) -> np.ndarray:
        """The moment sums alone (no window bounds), shape ``(m, ncol, order + 1)``."""
        if self._evaluate is None or points.size == 0:
            return self(points)[0]
        return self._evaluate(points)

    def __call__(self, points: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        m = points.size
        if m == 0 or (self._evaluate is None and not self._fused):
            zeros = np.zeros(m, dtype=np.int64)
            return np.zeros((m, self.q.shape[1], self.order + 1)), zeros, zeros.copy()
        if self._evaluate is None:
            return self._compact(points)
        mom = self._evaluate(points)
        lo, hi = window_bounds(self.x, points, self.kernel, self.bandwidth, ascending=True)
        return mom, lo, hi


def moment_sums_sorted(
    x: np.ndarray,
    q: np.ndarray,
    points: np.ndarray,
    kernel: Kernel,
    bandwidth: float,
    order: int,
    *,
    power: int = 1,
    engine: str = "exact",
    column_orders: Sequence[int] | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`moment_sums` for ascending ``points``; also returns the window bounds ``lo, hi``."""
    plan = MomentPlan(x, q, kernel, bandwidth, order, power=power, engine=engine, column_orders=column_orders)
    return plan(points)


def moment_sums(
    x: np.ndarray,
    values: np.ndarray,
    points: np.ndarray,
    kernel: Kernel,
    bandwidth: float,
    order: int,
    *,
    power: int = 1,
    engine: str = "exact",
) -> np.ndarray:
    """Windowed kernel moment sums ``sum_i q_ic K(u_i)^power u_i^k``.

    Parameters
    ----------
    x : ndarray, shape (n,)
        Sorted data locations (ascending).
    values : ndarray, shape (n, ncol)
        Value columns ``q``, e.g. weights and weights times ``y``.
    points : ndarray, shape (m,)
        Evaluation points, any order (sorted internally once).
    kernel : Kernel
    bandwidth : float
    order : int
        Highest power ``k`` of ``u``.
    power : {1, 2}
        Power of the kernel (2 for variances).
    engine : {"exact", "binned"}

    Returns
    -------
    ndarray, shape (m, ncol, order + 1)
        Zero where the window holds no data.
    """
    x = np.asarray(x, dtype=float)
    q = np.asarray(values, dtype=float)
    if q.ndim == 1:
        q = q[:, None]
    pts = np.asarray(points, dtype=float).ravel()
    if _is_sorted(pts):
        return moment_sums_sorted(x, q, pts, kernel, bandwidth, order, power=power, engine=engine)[0]
    perm = np.argsort(pts)
    mom = moment_sums_sorted(x, q, pts[perm], kernel, bandwidth, order, power=power, engine=engine)[0]
    out = np.empty_like(mom)
    out[perm] = mom
    return out
