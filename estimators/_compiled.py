"""Compiled loops of the numerical core (numba, cached on disk).

Most of this module is one sliding-window sweep that serves every compact
kernel; the rest are the loops of the fast Gauss transform, linear binning,
cubic interpolation and the one-pass gather of a sorted sample.

The sweep processes queries in ascending order; the window ``[lo, hi)`` (and,
for kernels in ``|u|``, the split point ``mid`` at the query) only moves forward.

* The running sums are power sums ``sum q v^a`` (and, for the cosine kernel,
  ``sum q cos(omega v) v^j``, ``sum q sin(omega v) v^j``) of the tile-local
  coordinate ``v = (x - c) / h`` about the centre ``c`` of the query's tile
  (width ``h``, or ``h / 2`` for high orders, see ``_TILE_*``), so every stored
  term is bounded whatever the location and scale of ``x``.
* When the query enters a new tile the sums are recomputed from scratch about
  the new centre (cost: the window, so ``O(n)`` in all); inside a tile points
  are added and removed as the window slides.
* At a query ``t`` with ``d = (t - c) / h`` the kernel is rewritten as a
  polynomial in ``v`` by a Taylor shift, ``K(v - d) = sum_b g_b(d) v^b`` (angle
  addition for the cosine), which gives the moments in powers of ``v``; a
  binomial shift of those ``order + 1`` numbers gives the moments in powers of
  ``u = v - d``. This part runs per block of queries, vectorised across them.
* :func:`window_fit` solves the local least-squares systems in the same pass,
  so no moment array is written.

Compilation results are cached next to this file (``cache=True``); the
installer warms the cache (``python -m estimators.warmup``) so a service
process never compiles on its first request.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

__all__ = ["window_moments", "window_fit", "solve_local", "linear_bin", "keys_interpolate", "gather_sorted",
           "window_bounds_ascending", "gauss_sources", "gauss_translate", "gauss_evaluate", "gauss_transform", "hankel_quadratic_sum"]

# reassociation and fused multiply-add only: no assumptions about NaN or infinity
_FAST = {"reassoc", "contract"}
# Tile width in bandwidths. With width w, |t - c| <= w/2 and |x - c| <= 1 + w/2 inside a
# window, so the shifts grow like (1 + w)**a for a power sum of order a: tiles of one
# bandwidth (fewer fresh starts) up to order 6, half a bandwidth above.
_TILE_LOW_ORDER = 1.0
_TILE_HIGH_ORDER = 0.5
_LOW_ORDER = 6
# Queries finished together. Not a power of two: the raw-sum buffer is (sums, queries), and a
# row stride of a multiple of 4 KiB would put every sum of one query in the same cache set.
_QUERY_BLOCK = 520


@njit(cache=True, nogil=True, inline="always", error_model="numpy", fastmath=_FAST)
def _add_point(xs, q, i, centre, inv_h, deg_k, orders, has_trig, omega, sums, trig, side, sign):  # pragma: no cover
    """Add (``sign = 1``) or remove (``-1``) point ``i`` to the running sums of ``side``."""
    v = (xs[i] - centre) * inv_h
    for c in range(len(orders)):
        p = q[i, c] * sign
        for j in range(deg_k + orders[c] + 1):
            sums[side, c, j] += p
            p *= v
    if has_trig:
        cw = math.cos(omega * v)
        sw = math.sin(omega * v)
        for c in range(len(orders)):
            pc = q[i, c] * sign * cw
            ps = q[i, c] * sign * sw
            for j in range(orders[c] + 1):
                trig[0, c, j] += pc
                trig[1, c, j] += ps
                pc *= v
                ps *= v


@njit(cache=True, nogil=True, inline="always", error_model="numpy", fastmath=_FAST)
def _accumulate(xs, q, start, stop, centre, inv_h, deg_k, orders, has_trig, omega, sums, trig, side):  # pragma: no cover
    """Add points ``start..stop-1`` to the running sums of ``side`` (a tile's fresh start)."""
    for i in range(start, stop):
        _add_point(xs, q, i, centre, inv_h, deg_k, orders, has_trig, omega, sums, trig, side, 1.0)


@njit(cache=True, nogil=True, inline="always", error_model="numpy", fastmath=_FAST)
def _cofactors3(a, b, c, dd, e):  # pragma: no cover - compiled
    """Cofactors and determinant of the Hankel matrix ``[[a, b, c], [b, c, dd], [c, dd, e]]``."""
    c00 = c * e - dd * dd
    c01 = -(b * e - c * dd)
    c02 = b * dd - c * c
    c11 = a * e - c * c
    c12 = -(a * dd - b * c)
    c22 = a * c - b * b
    return c00, c01, c02, c11, c12, c22, a * c00 + b * c01 + c * c02


@njit(cache=True, nogil=True, inline="always", error_model="numpy")
def _solve_point(s, r, distinct, degree, singular, beta, inv):  # pragma: no cover - compiled
    """Solve one local system from moments ``s`` (S_0..S_2p) and ``r`` (T_0..T_p); returns the degree used.

    The degree is ``min(degree, distinct - 1)`` and drops further while the
    relative determinant is below ``singular``; ``-1`` marks an empty window.
    ``beta`` (degree+1) and ``inv`` (degree+1, degree+1) are NaN / zero padded.
    """
    for i in range(degree + 1):
        beta[i] = math.nan
        for j in range(degree + 1):
            inv[i, j] = 0.0
    s0 = s[0]
    if distinct <= 0 or not (s0 > 0.0):
        return -1
    d = min(distinct - 1, degree)
    while d >= 1:
        if d == 1:
            a = s[0]
            b = s[1]
            c = s[2]
            det = a * c - b * b
            if abs(det) > singular * a * c:
                inv[0, 0] = c / det
                inv[0, 1] = -b / det
                inv[1, 0] = -b / det
                inv[1, 1] = a / det
                break
        else:
            a = s[0]
            c = s[2]
            e = s[4]
            c00, c01, c02, c11, c12, c22, det = _cofactors3(a, s[1], c, s[3], e)
            if abs(det) > singular * a * c * e:
                inv[0, 0] = c00 / det
                inv[0, 1] = c01 / det
                inv[1, 0] = c01 / det
                inv[0, 2] = c02 / det
                inv[2, 0] = c02 / det
                inv[1, 1] = c11 / det
                inv[1, 2] = c12 / det
                inv[2, 1] = c12 / det
                inv[2, 2] = c22 / det
                break
        d -= 1
    if d <= 0:
        d = 0
        inv[0, 0] = 1.0 / s0
    for i in range(d + 1):
        acc = 0.0
        for j in range(d + 1):
            acc += inv[i, j] * r[j]
        beta[i] = acc
    return d


@njit(cache=True, nogil=True, error_model="numpy", fastmath=_FAST)
def _block_moments(nb, raw, trig, dd, kcoef, deg_k, nside, has_trig, amp, omega, orders, g, mv, mt):  # pragma: no cover
    """Moments in powers of ``u`` for a block of ``nb`` queries: ``mt[c, j, kk]`` from the raw sums.

    Every inner loop runs over the queries of the block, so it vectorises.
    """
    ncol = len(orders)
    for c in range(ncol):
        for j in range(orders[c] + 1):
            for kk in range(nb):
                mv[c, j, kk] = 0.0
    if True:
        for side in range(nside):
            # Taylor shift: coefficients g_b of K(v - d) in powers of v
            for b in range(deg_k + 1):
                for kk in range(nb):
                    g[b, kk] = kcoef[side, b]
            for i in range(deg_k):
                for b in range(deg_k - 1, i - 1, -1):
                    for kk in range(nb):
                        g[b, kk] -= dd[kk] * g[b + 1, kk]
            for c in range(ncol):
                for j in range(orders[c] + 1):
                    for b in range(deg_k + 1):
                        for kk in range(nb):
                            mv[c, j, kk] += g[b, kk] * raw[side, c, b + j, kk]
    if has_trig:
        for kk in range(nb):
            g[0, kk] = amp * math.cos(omega * dd[kk])
            g[1, kk] = amp * math.sin(omega * dd[kk])
        for c in range(ncol):
            for j in range(orders[c] + 1):
                for kk in range(nb):
                    mv[c, j, kk] += g[0, kk] * trig[0, c, j, kk] + g[1, kk] * trig[1, c, j, kk]
    # powers of v -> powers of u = v - d: u^j = sum_i C(j, i) v^i (-d)^(j - i)
    for c in range(ncol):
        for j in range(orders[c], -1, -1):
            for i in range(j - 1, -1, -1):
                cf = _binomial(j, i)
                for kk in range(nb):
                    mv[c, j, kk] += cf * _ipow(-dd[kk], j - i) * mv[c, i, kk]
            for kk in range(nb):
                mt[c, j, kk] = mv[c, j, kk]


@njit(cache=True, nogil=True, inline="always")
def _binomial(j, i):  # pragma: no cover - compiled
    out = 1.0
    for a in range(i):
        out = out * (j - a) / (a + 1)
    return out


@njit(cache=True, nogil=True, inline="always", fastmath=_FAST)
def _ipow(x, k):  # pragma: no cover - compiled
    out = 1.0
    for _ in range(k):
        out *= x
    return out


@njit(cache=True, nogil=True, error_model="numpy", fastmath=_FAST)
def _block_fits(nb, k0, mt, cnt, distinct, degree, singular, beta, inv, deg_used, careful, s, r):  # pragma: no cover
    """Solve the local systems of a block; the full-degree solve is vectorised, other cases go point by point.

    ``careful`` (scratch, one flag a query) marks empty, degenerate and near-singular windows.
    """
    if degree == 0:
        for kk in range(nb):
            a = mt[0, 0, kk]
            inv[k0 + kk, 0, 0] = 1.0 / a
            beta[k0 + kk, 0] = mt[1, 0, kk] / a
            deg_used[k0 + kk] = 0
            careful[kk] = not (a > 0.0) or cnt[kk] <= 0
    elif degree == 1:
        for kk in range(nb):
            a = mt[0, 0, kk]
            b = mt[0, 1, kk]
            c = mt[0, 2, kk]
            det = a * c - b * b
            careful[kk] = not (a > 0.0) or cnt[kk] <= 0 or distinct[kk] < 2 or not (abs(det) > singular * a * c)
            rd = 1.0 / det
            i00 = c * rd
            i01 = -b * rd
            i11 = a * rd
            inv[k0 + kk, 0, 0] = i00
            inv[k0 + kk, 0, 1] = i01
            inv[k0 + kk, 1, 0] = i01
            inv[k0 + kk, 1, 1] = i11
            beta[k0 + kk, 0] = i00 * mt[1, 0, kk] + i01 * mt[1, 1, kk]
            beta[k0 + kk, 1] = i01 * mt[1, 0, kk] + i11 * mt[1, 1, kk]
            deg_used[k0 + kk] = 1
    else:
        for kk in range(nb):
            a = mt[0, 0, kk]
            c = mt[0, 2, kk]
            e = mt[0, 4, kk]
            c00, c01, c02, c11, c12, c22, det = _cofactors3(a, mt[0, 1, kk], c, mt[0, 3, kk], e)
            careful[kk] = not (a > 0.0) or cnt[kk] <= 0 or distinct[kk] < 3 or not (abs(det) > singular * a * c * e)
            rd = 1.0 / det
            c00 *= rd
            c01 *= rd
            c02 *= rd
            c11 *= rd
            c12 *= rd
            c22 *= rd
            inv[k0 + kk, 0, 0] = c00
            inv[k0 + kk, 0, 1] = c01
            inv[k0 + kk, 1, 0] = c01
            inv[k0 + kk, 0, 2] = c02
            inv[k0 + kk, 2, 0] = c02
            inv[k0 + kk, 1, 1] = c11
            inv[k0 + kk, 1, 2] = c12
            inv[k0 + kk, 2, 1] = c12
            inv[k0 + kk, 2, 2] = c22
            r0 = mt[1, 0, kk]
            r1 = mt[1, 1, kk]
            r2 = mt[1, 2, kk]
            beta[k0 + kk, 0] = c00 * r0 + c01 * r1 + c02 * r2
            beta[k0 + kk, 1] = c01 * r0 + c11 * r1 + c12 * r2
            beta[k0 + kk, 2] = c02 * r0 + c12 * r1 + c22 * r2
            deg_used[k0 + kk] = 2
    # empty or degenerate windows and near-singular systems: the careful solve, point by point
    for kk in range(nb):
        if careful[kk]:
            for j in range(2 * degree + 1):
                s[j] = mt[0, j, kk]
            for j in range(degree + 1):
                r[j] = mt[1, j, kk]
            dist = distinct[kk] if cnt[kk] > 0 else 0
            deg_used[k0 + kk] = _solve_point(s, r, dist, degree, singular, beta[k0 + kk], inv[k0 + kk])


@njit(cache=True, nogil=True, inline="always", error_model="numpy", fastmath=_FAST)
def _sweep(
    xs, q, ts, h, poly, sides, trig_marker, amp, omega, orders, closed,
    fit_degree, distinct_prefix, singular, out, lo_out, hi_out, beta, inv, deg_used, counts,
):  # pragma: no cover - compiled
    """The shared sweep; ``fit_degree < 0`` writes moments, otherwise local fits (see the wrappers).

    The kernel's form comes as tuples whose lengths are part of the compiled
    signature (``poly``: coefficients; ``sides``: 2 for a polynomial in ``|u|``;
    ``trig_marker``: one element when there is a cosine term), so loop bounds
    are constants wherever the caller's are. Queries go in blocks of
    ``_QUERY_BLOCK``: the sweep stores each query's raw sums, then
    :func:`_block_moments` and :func:`_block_fits` finish the block with loops
    that run across queries.
    """
    n = xs.size
    m = ts.size
    ncol = len(orders)
    deg_k = len(poly) - 1
    nside = len(sides)
    in_abs = nside == 2
    has_trig = len(trig_marker) > 0
    order = 0
    for c in range(ncol):
        order = max(order, orders[c])
    jmax = deg_k + order
    order_arr = np.empty(ncol, dtype=np.int64)
    for c in range(ncol):
        order_arr[c] = orders[c]
    # kernel coefficients in powers of u on each side (side 1: u < 0, K in |u| = -u)
    kcoef = np.zeros((2, deg_k + 1))
    for a in range(deg_k + 1):
        kcoef[0, a] = poly[a]
        kcoef[1, a] = -poly[a] if (in_abs and a % 2 == 1) else poly[a]
    sums = np.zeros((2, ncol, jmax + 1))
    trig = np.zeros((2, ncol, order + 1))
    nbuf = _QUERY_BLOCK
    raw = np.empty((nside, ncol, jmax + 1, nbuf))
    rtrig = np.empty((2, ncol, order + 1, nbuf if has_trig else 0))
    dd = np.empty(nbuf)
    cnt = np.empty(nbuf, dtype=np.int64)
    distinct = np.empty(nbuf, dtype=np.int64)
    g = np.empty((max(deg_k, 1) + 1, nbuf))
    mv = np.empty((ncol, order + 1, nbuf))
    mt = np.empty((ncol, order + 1, nbuf))
    careful = np.empty(nbuf, dtype=np.bool_)
    s_pt = np.empty(5)
    r_pt = np.empty(3)
    inv_h = 1.0 / h
    width = (_TILE_LOW_ORDER if jmax <= _LOW_ORDER else _TILE_HIGH_ORDER) * h
    inv_w = 1.0 / width
    origin = xs[0] if n > 0 else 0.0
    lo = 0
    hi = 0
    mid = 0
    centre = 0.0
    tile_end = -math.inf
    kk = 0
    for k in range(m):
        t = ts[k]
        a_edge = t - h
        b_edge = t + h
        fresh = not (t < tile_end)
        while lo < n and (xs[lo] < a_edge or (not closed and xs[lo] == a_edge)):
            if not fresh:
                side = 1 if (in_abs and lo < mid) else 0
                _add_point(xs, q, lo, centre, inv_h, deg_k, orders, has_trig, omega, sums, trig, side, -1.0)
            lo += 1
        if hi < lo:
            hi = lo
        if mid < lo:
            mid = lo
        while hi < n and (xs[hi] < b_edge or (closed and xs[hi] == b_edge)):
            if not fresh:
                _add_point(xs, q, hi, centre, inv_h, deg_k, orders, has_trig, omega, sums, trig, 0, 1.0)
            hi += 1
        if in_abs:
            while mid < hi and xs[mid] < t:
                if not fresh:
                    _add_point(xs, q, mid, centre, inv_h, deg_k, orders, has_trig, omega, sums, trig, 0, -1.0)
                    _add_point(xs, q, mid, centre, inv_h, deg_k, orders, has_trig, omega, sums, trig, 1, 1.0)
                mid += 1
            if mid > hi:
                mid = hi
        if fresh:
            tile = math.floor((t - origin) * inv_w)
            centre = origin + (tile + 0.5) * width
            tile_end = origin + (tile + 1.0) * width
            sums[:, :, :] = 0.0
            trig[:, :, :] = 0.0
            if in_abs:
                _accumulate(xs, q, lo, mid, centre, inv_h, deg_k, orders, has_trig, omega, sums, trig, 1)
                _accumulate(xs, q, mid, hi, centre, inv_h, deg_k, orders, has_trig, omega, sums, trig, 0)
            else:
                _accumulate(xs, q, lo, hi, centre, inv_h, deg_k, orders, has_trig, omega, sums, trig, 0)
        if fit_degree < 0:
            lo_out[k] = lo
            hi_out[k] = hi
        else:
            counts[k] = hi - lo
        cnt[kk] = hi - lo
        distinct[kk] = distinct_prefix[hi] - distinct_prefix[lo + 1] + 1 if (fit_degree >= 0 and hi > lo) else 0
        dd[kk] = (t - centre) * inv_h
        for side in range(nside):
            for c in range(ncol):
                for j in range(deg_k + orders[c] + 1):
                    raw[side, c, j, kk] = sums[side, c, j]
        if has_trig:
            for c in range(ncol):
                for j in range(orders[c] + 1):
                    rtrig[0, c, j, kk] = trig[0, c, j]
                    rtrig[1, c, j, kk] = trig[1, c, j]
        kk += 1
        if kk == nbuf or k == m - 1:
            k0 = k + 1 - kk
            _block_moments(kk, raw, rtrig, dd, kcoef, deg_k, nside, has_trig, amp, omega, order_arr, g, mv, mt)
            if fit_degree < 0:
                for i in range(kk):
                    empty = cnt[i] <= 0
                    for c in range(ncol):
                        for j in range(order + 1):
                            out[k0 + i, c, j] = mt[c, j, i] if (j <= orders[c] and not empty) else 0.0
            else:
                _block_fits(kk, k0, mt, cnt, distinct, fit_degree, singular, beta, inv, deg_used, careful, s_pt, r_pt)
            kk = 0


@njit(cache=True, nogil=True, error_model="numpy", fastmath=_FAST)
def window_moments(xs, q, ts, h, poly, sides, trig_marker, amp, omega, orders, closed, out, lo_out, hi_out):  # pragma: no cover
    """Fill ``out[k, c, j] = sum_i q[i, c] K(u_i) u_i^j`` (``j <= orders[c]``, zero above) for sorted ``xs``, ``ts``.

    ``K(u) = sum_a poly[a] s^a + amp cos(omega u)`` on the window with ``s = |u|``
    when ``len(sides) == 2`` and ``s = u`` otherwise; the cosine term is present
    when ``trig_marker`` is not empty (see :func:`estimators.sums.compiled_shape`).
    ``lo_out``/``hi_out`` receive the window index range of each query.
    """
    _sweep(
        xs, q, ts, h, poly, sides, trig_marker, amp, omega, orders, closed,
        -1, np.empty(0, dtype=np.int64), 0.0, out, lo_out, hi_out,
        np.empty((0, 1)), np.empty((0, 1, 1)), np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64),
    )


@njit(cache=True, nogil=True, error_model="numpy", fastmath=_FAST)
def window_fit(
    xs, q, ts, h, poly, sides, trig_marker, amp, omega, degree_marker, closed, distinct_prefix, singular,
    beta, inv, deg_used, counts,
):  # pragma: no cover - compiled
    """Local polynomial fits at sorted ``ts`` in one sweep; ``q = [w, w y]``, kernel as :func:`window_moments`.

    The degree is ``len(degree_marker) - 1`` (a compile-time constant). Fills
    ``beta`` (m, degree+1), ``inv`` (m, degree+1, degree+1), ``deg_used`` (m,)
    and ``counts`` (m,) as :func:`solve_local` does.
    """
    degree = len(degree_marker) - 1
    _sweep(
        xs, q, ts, h, poly, sides, trig_marker, amp, omega, (2 * degree, degree), closed,
        degree, distinct_prefix, singular, np.empty((0, 1, 1)), np.empty(0, dtype=np.int64),
        np.empty(0, dtype=np.int64), beta, inv, deg_used, counts,
    )


@njit(cache=True, nogil=True, error_model="numpy")
def solve_local(mom, lo, hi, distinct_prefix, degree, singular, beta, inv, deg_used):  # pragma: no cover
    """Solve the local systems from moments ``mom[k, 0, :]`` (S) and ``mom[k, 1, :]`` (T); see :func:`_solve_point`."""
    for k in range(mom.shape[0]):
        distinct = distinct_prefix[hi[k]] - distinct_prefix[lo[k] + 1] + 1 if hi[k] > lo[k] else 0
        deg_used[k] = _solve_point(mom[k, 0], mom[k, 1], distinct, degree, singular, beta[k], inv[k])


@njit(cache=True, nogil=True, error_model="numpy")
def hankel_quadratic_sum(a, q, w):  # pragma: no cover - compiled
    """``sum_k w_k a_k^T Q_k a_k`` with ``Q_k[i, j] = q[k, i + j]``, skipping NaN terms (as ``np.nansum``)."""
    total = 0.0
    p1 = a.shape[1]
    for k in range(a.shape[0]):
        quad = 0.0
        for i in range(p1):
            for j in range(p1):
                quad += a[k, i] * a[k, j] * q[k, i + j]
        term = quad * w[k]
        if not math.isnan(term):
            total += term
    return total


@njit(cache=True, nogil=True, error_model="numpy")
def linear_bin(xs, q, start, step, size, out):  # pragma: no cover - compiled
    """Linear binning: ``out[g, c]`` receives ``q[i, c]`` split between the two nearest grid points."""
    ncol = q.shape[1]
    inv = 1.0 / step
    for i in range(xs.size):
        pos = (xs[i] - start) * inv
        j = int(math.floor(pos))
        if j < 0:
            j = 0
        elif j > size - 2:
            j = size - 2
        frac = pos - j
        for c in range(ncol):
            out[j, c] += q[i, c] * (1.0 - frac)
            out[j + 1, c] += q[i, c] * frac


@njit(cache=True, nogil=True, error_model="numpy")
def keys_interpolate(grid, start, step, points, out):  # pragma: no cover - compiled
    """Keys (1981) cubic convolution of ``grid[g, ...]`` at ``points``; zero outside ``[1, size - 3]``."""
    size = grid.shape[0]
    ncol = grid.shape[1]
    nord = grid.shape[2]
    inv = 1.0 / step
    for k in range(points.size):
        gpos = (points[k] - start) * inv
        for c in range(ncol):
            for j in range(nord):
                out[k, c, j] = 0.0
        if not (gpos >= 1.0 and gpos <= size - 3.0):
            continue
        gi = int(math.floor(gpos))
        t = gpos - gi
        w0 = ((-0.5 * t + 1.0) * t - 0.5) * t
        w1 = (1.5 * t - 2.5) * t * t + 1.0
        w2 = ((-1.5 * t + 2.0) * t + 0.5) * t
        w3 = (0.5 * t - 0.5) * t * t
        for c in range(ncol):
            for j in range(nord):
                out[k, c, j] = (
                    w0 * grid[gi - 1, c, j] + w1 * grid[gi, c, j] + w2 * grid[gi + 1, c, j] + w3 * grid[gi + 2, c, j]
                )




@njit(cache=True, nogil=True, error_model="numpy")
def gather_sorted(x, y, order, xs, ys, distinct_prefix):  # pragma: no cover - compiled
    """``xs = x[order]``, ``ys = y[order]`` and ``distinct_prefix[k]`` = distinct values among ``xs[:k]``, in one pass."""
    count = 0
    distinct_prefix[0] = 0
    prev = math.nan
    for i in range(order.size):
        j = order[i]
        xi = x[j]
        xs[i] = xi
        ys[i] = y[j]
        if i == 0 or xi != prev:
            count += 1
        prev = xi
        distinct_prefix[i + 1] = count


@njit(cache=True, nogil=True, error_model="numpy", fastmath=_FAST)
def gauss_direct(x, q, points, lo, hi, h, sums):  # pragma: no cover - compiled
    """``sums[i, c, j] = sum_{lo_i <= s < hi_i} q[s, c] He_j(u) exp(-u^2/2)``, ``u = (x_s - p_i) / h``.

    The Hermite functions by their recurrence (``He_{j+1} = u He_j - j He_{j-1}``),
    each source's term in full precision: for points far from all data, where
    the fast Gauss transform's absolute error is not small against the sums.
    """
    ncol, nj = sums.shape[1], sums.shape[2]
    for i in range(points.size):
        for c in range(ncol):
            for j in range(nj):
                sums[i, c, j] = 0.0
        for s in range(lo[i], hi[i]):
            u = (x[s] - points[i]) / h
            base = math.exp(-0.5 * u * u)
            prev = 0.0
            he = 1.0
            for j in range(nj):
                for c in range(ncol):
                    sums[i, c, j] += q[s, c] * he * base
                prev, he = he, u * he - j * prev


@njit(cache=True, nogil=True)
def window_bounds_ascending(x, points, radius, closed, lo, hi):  # pragma: no cover - compiled
    """``[lo, hi)``: the sorted ``x`` within ``radius`` of each ascending point, in one forward pass.

    ``closed``: ``x`` at exactly ``radius`` counts (``searchsorted`` sides
    left / right); otherwise it does not (right / left).
    """
    n = x.size
    a = 0
    b = 0
    for i in range(points.size):
        left = points[i] - radius
        right = points[i] + radius
        if closed:
            while a < n and x[a] < left:
                a += 1
            while b < n and x[b] <= right:
                b += 1
        else:
            while a < n and x[a] <= left:
                a += 1
            while b < n and x[b] < right:
                b += 1
        lo[i] = a
        hi[i] = b


@njit(cache=True, nogil=True, error_model="numpy", fastmath=_FAST)
def gauss_sources(x, origin, h, q, fact, nterms):  # pragma: no cover - compiled
    """Fast Gauss transform sources in one pass over ascending ``x``: ``(tiles, moments)``.

    ``tiles`` holds the distinct tile numbers ``floor((x - origin) / h)`` (as
    floats), ``moments[s, c, j] = sum_{i in tile s} q[i, c] v_i^j / j!`` with
    ``v_i = (x_i - origin) / h - (tile + 0.5)``, the same numbers as
    the tile moments of the method (Greengard & Strain 1991).
    """
    n = x.size
    ncol = q.shape[1]
    ntiles = 0
    prev = 0.0
    for i in range(n):
        t = np.floor((x[i] - origin) / h)
        if ntiles == 0 or t != prev:
            ntiles += 1
            prev = t
    tiles = np.empty(ntiles)
    moments = np.zeros((ntiles, ncol, nterms))
    powers = np.empty(nterms)
    s = -1
    for i in range(n):
        scaled = (x[i] - origin) / h
        t = np.floor(scaled)
        if s < 0 or t != tiles[s]:
            s += 1
            tiles[s] = t
        v = scaled - (t + 0.5)
        p = 1.0
        for j in range(nterms):  # one chain of products per point, shared by the columns
            powers[j] = p
            p *= v
        for c in range(ncol):
            qc = q[i, c]
            for j in range(nterms):
                moments[s, c, j] += qc * powers[j]
    for s in range(ntiles):
        for c in range(ncol):
            for j in range(nterms):
                moments[s, c, j] /= fact[j]
    return tiles, moments


@njit(cache=True, nogil=True, inline="always", fastmath=_FAST)
def _translate_one(amat, moments, s, row, nd):  # pragma: no cover - compiled
    """``row[c, k] += sum_j A[k, j] moments[s, c, j]`` for one source tile (``A`` is zero for ``j + k >= nd``)."""
    ncol = moments.shape[1]
    for c in range(ncol):
        for k in range(nd):
            acc = 0.0
            for j in range(nd - k):
                acc += amat[k, j] * moments[s, c, j]
            row[c, k] += acc


@njit(cache=True, nogil=True, inline="always", fastmath=_FAST)
def _translate_pair(amat, moments, right, left, row, pair, nd):  # pragma: no cover - compiled
    """Both source tiles at offsets ``+D`` (``right``) and ``-D`` (``left``) with the one matrix ``A_D``.

    The kernel is even, so ``A_{-D}[k, j] = (-1)^(j+k) A_D[k, j]``: the pair
    contributes ``sum_j A_D[k, j] (M_right[j] + (-1)^(j+k) M_left[j])``, one
    product per order ``k`` instead of two.  ``pair`` is scratch of shape ``(2, N)``;
    ``A_D`` is zero for ``j + k >= nd``.
    """
    ncol = moments.shape[1]
    for c in range(ncol):
        for j in range(nd):
            mirrored = moments[left, c, j] if j % 2 == 0 else -moments[left, c, j]
            pair[0, j] = moments[right, c, j] + mirrored  # even k
            pair[1, j] = moments[right, c, j] - mirrored  # odd k
        for k in range(nd):
            src = pair[k % 2]
            acc = 0.0
            for j in range(nd - k):
                acc += amat[k, j] * src[j]
            row[c, k] += acc


@njit(cache=True, nogil=True, inline="always", fastmath=_FAST)
def _translate_tile(tt, tiles, moments, translations, lengths, reach, first, row, pair):  # pragma: no cover - compiled
    """``row[c, k] = sum_D sum_j A_D[k, j] moments[S, c, j]`` over source tiles within ``reach`` of ``tt``.

    Source tiles at opposite offsets ``+D`` and ``-D`` share one matrix
    (:func:`_translate_pair`); ``A_D`` is zero for ``j + k >= lengths[D + reach]``.  ``first`` is where the search for the first
    source tile in reach starts (target tiles visited in ascending order only
    move it forward); returns its new value.
    """
    ns = tiles.size
    ncol, nterms = moments.shape[1], moments.shape[2]
    for c in range(ncol):
        for k in range(nterms):
            row[c, k] = 0.0
    while first < ns and tiles[first] < tt - reach:
        first += 1
    last = first
    while last < ns and tiles[last] <= tt + reach:
        last += 1
    lo, hi = first, last - 1
    while lo <= hi:  # from the farthest tiles inwards, pairing equal distances
        left, right = int(tiles[lo] - tt), int(tiles[hi] - tt)
        if lo < hi and left == -right:
            _translate_pair(translations[right + reach], moments, hi, lo, row, pair, lengths[right + reach])
            lo += 1
            hi -= 1
        elif -left > right:
            _translate_one(translations[left + reach], moments, lo, row, lengths[left + reach])
            lo += 1
        else:
            _translate_one(translations[right + reach], moments, hi, row, lengths[right + reach])
            hi -= 1
    return first


@njit(cache=True, nogil=True, error_model="numpy", fastmath=_FAST)
def gauss_translate(tiles, moments, target_tiles, translations, lengths, reach, local):  # pragma: no cover - compiled
    """Fast Gauss transform: local expansions ``local[t, c, k] = sum_D sum_j A_D[k, j] moments[S, c, j]``.

    Sums over the source tiles ``S`` within ``reach`` tiles of each target tile
    (both sorted); ``translations[D + reach]`` is ``A_D``, zero where ``j + k >= lengths[D + reach]``.
    """
    pair = np.empty((2, moments.shape[2]))
    first = 0
    for ti in range(target_tiles.size):
        first = _translate_tile(target_tiles[ti], tiles, moments, translations, lengths, reach, first, local[ti], pair)


@njit(cache=True, nogil=True, inline="always")
def _derivative_factors(fact, nk, nterms):  # pragma: no cover - compiled
    """``ratio[k, j] = (j + k)! / j!``: derivative ``k`` of ``sum_n L_n w^n`` is ``sum_j L_{j+k} ratio[k, j] w^j``."""
    ratio = np.zeros((nk, nterms))
    for k in range(nk):
        for j in range(nterms - k):
            ratio[k, j] = fact[j + k] / fact[j]
    return ratio


@njit(cache=True, nogil=True, inline="always")
def _store_four(out, b0, nb, c, k, v0, v1, v2, v3):  # pragma: no cover - compiled
    out[b0, c, k] = v0
    if nb > 1:
        out[b0 + 1, c, k] = v1
    if nb > 2:
        out[b0 + 2, c, k] = v2
    if nb > 3:
        out[b0 + 3, c, k] = v3


@njit(cache=True, nogil=True, inline="always", fastmath=_FAST)
def _evaluate_run(row, ratio, conv, w, i0, i1, coef, out):  # pragma: no cover - compiled
    """``out[i, c, k] = sum_j conv[j, k] D_j(w_i)`` for the points ``i0 <= i < i1`` of one target tile.

    ``D_j`` is derivative ``j`` of the tile's local expansion ``row[c]``; the
    combination ``conv`` is folded into the polynomial coefficients once per
    tile.  The polynomials are evaluated by Horner's rule for four points and
    two outputs at a time: eight independent chains of multiply-adds held in
    registers, so no step waits on the latency of the one before.
    """
    ncol, nterms = row.shape
    nk = ratio.shape[0]
    nr = ncol * nk
    for c in range(ncol):
        for k in range(nk):
            r = c * nk + k
            for n in range(nterms):
                coef[r, n] = 0.0
            for j in range(nk):
                f = conv[j, k]
                if f != 0.0:
                    for n in range(nterms - j):
                        coef[r, n] += f * row[c, n + j] * ratio[j, n]
    top = nterms - 1
    for b0 in range(i0, i1, 4):
        nb = min(4, i1 - b0)
        w0 = w[b0]
        w1 = w[b0 + 1] if nb > 1 else 0.0
        w2 = w[b0 + 2] if nb > 2 else 0.0
        w3 = w[b0 + 3] if nb > 3 else 0.0
        for r0 in range(0, nr, 2):
            r1 = r0 + 1 if r0 + 1 < nr else r0
            a0 = coef[r0, top]
            a1 = a0
            a2 = a0
            a3 = a0
            e0 = coef[r1, top]
            e1 = e0
            e2 = e0
            e3 = e0
            for j in range(top - 1, -1, -1):
                cj = coef[r0, j]
                dj = coef[r1, j]
                a0 = a0 * w0 + cj
                a1 = a1 * w1 + cj
                a2 = a2 * w2 + cj
                a3 = a3 * w3 + cj
                e0 = e0 * w0 + dj
                e1 = e1 * w1 + dj
                e2 = e2 * w2 + dj
                e3 = e3 * w3 + dj
            _store_four(out, b0, nb, r0 // nk, r0 % nk, a0, a1, a2, a3)
            if r1 != r0:
                _store_four(out, b0, nb, r1 // nk, r1 % nk, e0, e1, e2, e3)


@njit(cache=True, nogil=True, error_model="numpy", fastmath=_FAST)
def gauss_evaluate(local, which, w, fact, conv, out):  # pragma: no cover - compiled
    """``out[i, c, k] = sum_j conv[j, k] d^j/dw^j sum_n local[which[i], c, n] w^n`` at ``w = w[i]``.

    ``which`` is non-decreasing (points ascend), so the points of one tile form a run.
    """
    ncol, nterms = local.shape[1], local.shape[2]
    nk = conv.shape[0]
    ratio = _derivative_factors(fact, nk, nterms)
    coef = np.zeros((ncol * nk, nterms))
    m = w.size
    i0 = 0
    while i0 < m:
        i1 = i0 + 1
        while i1 < m and which[i1] == which[i0]:
            i1 += 1
        _evaluate_run(local[which[i0]], ratio, conv, w, i0, i1, coef, out)
        i0 = i1


@njit(cache=True, nogil=True, error_model="numpy", fastmath=_FAST)
def gauss_transform(points, origin, h, tile_lo, tiles, moments, translations, lengths, reach, fact, conv, local, filled, out):  # pragma: no cover - compiled
    """The whole target side of the fast Gauss transform in one pass over ascending ``points``.

    ``local[t]`` caches the local expansion of target tile ``tile_lo + t``
    (``filled[t]`` once translated), for every tile that has a source within
    ``reach``; points in tiles outside that span get zero sums.  Each point's
    tile is ``floor((p - origin) / h)`` and its offset from the tile centre
    ``w = (p - origin) / h - (tile + 0.5)``, as on the source side.  Output as
    for :func:`gauss_evaluate` (derivatives combined by ``conv``).
    """
    ncol, nterms = moments.shape[1], moments.shape[2]
    nk = conv.shape[0]
    span = filled.size
    ratio = _derivative_factors(fact, nk, nterms)
    coef = np.zeros((ncol * nk, nterms))
    pair = np.empty((2, nterms))
    m = points.size
    w = np.empty(m)
    first = 0
    i0 = 0
    while i0 < m:
        tile = np.floor((points[i0] - origin) / h)
        w[i0] = (points[i0] - origin) / h - (tile + 0.5)
        i1 = i0 + 1
        while i1 < m:
            scaled = (points[i1] - origin) / h
            if np.floor(scaled) != tile:
                break
            w[i1] = scaled - (tile + 0.5)
            i1 += 1
        rel = tile - tile_lo
        if rel >= 0.0 and rel < span:
            t = int(rel)
            if not filled[t]:
                first = _translate_tile(tile, tiles, moments, translations, lengths, reach, first, local[t], pair)
                filled[t] = True
            _evaluate_run(local[t], ratio, conv, w, i0, i1, coef, out)
        else:
            for i in range(i0, i1):
                for c in range(ncol):
                    for k in range(nk):
                        out[i, c, k] = 0.0
        i0 = i1
