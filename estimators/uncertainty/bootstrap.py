"""Bootstrap deviations ``D*(t) = sum_j l_j(t) e*_j``, drawn block by block, and the small-sample factor.

Method notes: ``docs/methods.md`` (uncertainty: methods, large data).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import ndtri
from scipy.stats import t as student_t

from .._compiled_bootstrap import accumulate_resampled, accumulate_signs, alias_bytes, bidiagonal_cholesky
from ..local_poly import LocalPolynomial
from .noise import NoiseScale
from .residuals import Residuals
from .weights import MEMORY_ELEMENTS, Nodes, WeightBlocks

_SQRT5 = math.sqrt(5.0)
MAMMEN = ((1.0 - _SQRT5) / 2.0, (1.0 + _SQRT5) / 2.0, (_SQRT5 + 1.0) / (2.0 * _SQRT5))


def _mammen_alias() -> tuple[np.ndarray, np.ndarray]:
    """Alias table (Vose 1991) for the 256 patterns of 8 bits, bit = 1 with Mammen's ``p_low``."""
    p_low = MAMMEN[2]
    ones = np.array([bin(k).count("1") for k in range(256)])
    pmf = p_low**ones * (1.0 - p_low) ** (8 - ones)
    scaled = pmf * 256.0
    prob = np.zeros(256)
    alias = np.arange(256, dtype=np.uint8)
    small = [k for k in range(256) if scaled[k] < 1.0]
    large = [k for k in range(256) if scaled[k] >= 1.0]
    while small and large:
        lo, hi = small.pop(), large.pop()
        prob[lo], alias[lo] = scaled[lo], hi
        scaled[hi] -= 1.0 - scaled[lo]
        (small if scaled[hi] < 1.0 else large).append(hi)
    for k in small + large:
        prob[k] = 1.0
    return prob, alias


def small_sample_factor(blocks: WeightBlocks, ws: np.ndarray, level: float) -> np.ndarray:
    """``t_(nu, 1 - alpha/2) / z_(1 - alpha/2)`` with Satterthwaite degrees of freedom of the HC variance.

    ``nu = (sum_j l_j^2 / w_j)^2 / sum_j (l_j^2 / w_j)^2``, the degrees of
    freedom of ``sum_j l_j^2 ra_j^2`` when the errors are normal with equal
    variance (Bell & McCaffrey 2002; Imbens & Kolesar 2016 recommend this
    adjustment for heteroscedasticity-consistent standard errors in small
    samples). Rademacher weights cannot reproduce the variability of a
    variance built from a few squared residuals (their fourth moment is 1), so
    the bootstrap quantiles are widened by this factor; it tends to 1 as the
    windows fill up.
    """
    nodes = blocks.nodes
    w = ws[nodes.src]
    ncol = nodes.x.size + 1
    w1 = np.bincount(nodes.node, w * (1.0 - nodes.frac), ncol) + np.bincount(nodes.node + 1, w * nodes.frac, ncol)
    w2 = np.bincount(nodes.node, (w * w) * (1.0 - nodes.frac), ncol) + np.bincount(
        nodes.node + 1, (w * w) * nodes.frac, ncol
    )
    s2, s4 = blocks.power_sums(w1[:-1], w2[:-1])
    with np.errstate(divide="ignore", invalid="ignore"):
        nu = s2 * s2 / s4
    alpha = 1.0 - level
    z = float(ndtri(1.0 - alpha / 2.0))
    nu = np.where(np.isfinite(nu) & (nu > 1.0), nu, 1.0)
    return np.asarray(student_t.ppf(1.0 - alpha / 2.0, nu) / z)


def _groups(nodes: Nodes) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Split the reachable sources into runs of at most 8 that share a node."""
    node = nodes.node
    n = node.size
    if n == 0:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty, empty
    new_run = np.empty(n, dtype=bool)
    new_run[0] = True
    new_run[1:] = node[1:] != node[:-1]
    run_id = np.cumsum(new_run) - 1
    run_start = np.flatnonzero(new_run)
    pos_in_run = np.arange(n) - run_start[run_id]
    starts = np.flatnonzero(new_run | (pos_in_run % 8 == 0))
    lengths = np.diff(np.append(starts, n))
    return starts.astype(np.int64), lengths.astype(np.int64), node[starts].astype(np.int64)


SLAB_ELEMENTS = 2 * MEMORY_ELEMENTS
"""Points x replicates of bootstrap deviations held at once (32 MiB of float64)."""


def point_slabs(points: int, replicates: int) -> list[tuple[int, int]]:
    """Consecutive ranges of points whose deviations (points x replicates) fit in :data:`SLAB_ELEMENTS`.

    The bands are computed slab by slab, each slab drawing the same bootstrap
    errors again from the same seed, so the memory held is fixed whatever the
    number of points and the result is the same as with one slab.
    """
    rows = max(1, SLAB_ELEMENTS // max(replicates, 1))
    return [(i0, min(i0 + rows, points)) for i0 in range(0, points, rows)]


def deviations(
    s: LocalPolynomial,
    blocks: WeightBlocks,
    method: str,
    replicates: int,
    rng: np.random.Generator,
    res: Residuals,
    noise: NoiseScale | None,
    multiplier: str,
) -> np.ndarray:
    """Bootstrap deviations ``D*[i, b] = sum_j l_j(t_i) e*_jb`` for sorted ``t``; shape (m, replicates)."""
    nodes, t = blocks.nodes, blocks.t
    ws = s.sample.ws[nodes.src]
    if method == "wild_bootstrap":
        base = ws * res.ra[nodes.src]
    elif method == "analytic":  # gaussian draws with the local noise scale
        assert noise is not None
        base = ws * np.sqrt(noise.at(s.sample.xs[nodes.src]) / ws)
    else:
        assert noise is not None  # the residual bootstrap rescales by the local noise scale
        xs = s.sample.xs
        scale_all = np.sqrt(noise.at(xs) / s.sample.ws)
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.where(scale_all > 0, res.ra / scale_all, 0.0)
        pool = z - z.mean()
        base = ws * scale_all[nodes.src]
    vals_l = np.ascontiguousarray(base * (1.0 - nodes.frac))
    vals_r = np.ascontiguousarray(base * nodes.frac)
    two_sided = nodes.binned
    nrow = nodes.x.size + 1
    block = int(max(1, min(replicates, MEMORY_ELEMENTS // max(nrow, 1))))
    out = np.empty((t.size, replicates))
    g_start, g_len, g_node = _groups(nodes)
    if multiplier == "gaussian":
        # node sums of normal errors are jointly normal with a tridiagonal covariance (each source
        # meets one node and its right neighbour): draw them as L z with its bidiagonal Cholesky factor
        var_l = np.bincount(nodes.node, vals_l * vals_l, nrow)
        var_r = np.bincount(nodes.node + 1, vals_r * vals_r, nrow)
        cov_lr = np.bincount(nodes.node, vals_l * vals_r, nrow)
        chol_diag = np.empty(nrow)
        chol_sub = np.empty(nrow)
        bidiagonal_cholesky(var_l + var_r, cov_lr, chol_diag, chol_sub)
    for r0 in range(0, replicates, block):
        nb = min(block, replicates - r0)
        g = np.zeros((nrow, nb))
        if method != "residual_bootstrap" and multiplier == "gaussian":
            z = rng.standard_normal((nrow, nb))
            g += chol_diag[:, None] * z
            g[1:] += chol_sub[:-1, None] * z[:-1]
        elif method == "wild_bootstrap":
            chunk = max(1, MEMORY_ELEMENTS // (8 * nb))
            for c0 in range(0, g_start.size, chunk):
                c1 = min(c0 + chunk, g_start.size)
                count = (c1 - c0) * nb
                if multiplier == "rademacher":
                    raw = rng.bit_generator.random_raw((count + 7) // 8)
                    rbytes = raw.view(np.uint8)[:count].reshape(c1 - c0, nb)
                    one, zero = 1.0, -1.0
                else:
                    low, high, _ = MAMMEN
                    rbytes = np.empty((c1 - c0, nb), dtype=np.uint8)
                    prob, alias = _mammen_alias()
                    alias_bytes(rng.bit_generator.random_raw(count).reshape(c1 - c0, nb), prob, alias, rbytes)
                    one, zero = low, high
                accumulate_signs(
                    rbytes, g_start[c0:c1], g_len[c0:c1], g_node[c0:c1], vals_l, vals_r, two_sided, one, zero, g
                )
        else:
            chunk = max(1, MEMORY_ELEMENTS // nb)
            for c0 in range(0, vals_l.size, chunk):
                c1 = min(c0 + chunk, vals_l.size)
                idx = rng.integers(0, pool.size, size=(c1 - c0, nb))
                accumulate_resampled(
                    idx, pool, vals_l[c0:c1], vals_r[c0:c1], nodes.node[c0:c1], two_sided, g
                )
        blocks.apply(g, out[:, r0 : r0 + nb])
    return out
