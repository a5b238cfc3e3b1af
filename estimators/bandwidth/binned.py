"""Binned scoring of candidates: a dyadic hierarchy of grids and moment sums by FFT.

Method notes: ``docs/methods.md`` (bandwidth selection: scoring and large samples).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import fft as sfft

from ..kernels import Kernel
from ..sample import SortedSample
from ..sums import GAUSSIAN_CUTOFF
from .fits import BINNED_NODES_PER_BANDWIDTH, CandidateFit
from .groups import TieGroups

#: binned scoring: fewest nodes in any grid (bounds the linear-interpolation error at large bandwidths)
BINNED_MIN_NODES = 2049
#: binned scoring: most nodes in the finest grid
BINNED_MAX_NODES = 2**18 + 1
#: binned scoring: sample size from which it is used for compact kernels
BINNED_SCORING_MIN_N = 1000
_SINGULAR = 1e-10


class _Level:
    """Linearly binned data on a regular grid, with the exact mass matrix of the hat functions.

    ``c_j = sum w_i phi_j(x_i)``, ``d_j = sum w_i yc_i phi_j(x_i)``,
    ``a_j = sum w_i phi_j(x_i)^2``, ``b_j = sum w_i phi_j(x_i) phi_{j+1}(x_i)``.
    For grid values ``G`` and the piecewise linear curve through them,
    ``sum w_i (yc_i - G(x_i))^2 = wyy - 2 d.G + a.G^2 + 2 b.(G_j G_{j+1})``
    holds exactly.
    """

    def __init__(self, step: float, c: np.ndarray, d: np.ndarray, a: np.ndarray, b: np.ndarray) -> None:
        self.step, self.c, self.d, self.a, self.b = step, c, d, a, b
        self._spectra: dict[int, np.ndarray] = {}

    @classmethod
    def bin(cls, xs: np.ndarray, ws: np.ndarray, yc: np.ndarray, nodes: int) -> _Level:
        step = float(xs[-1] - xs[0]) / (nodes - 1)
        pos = (xs - xs[0]) / step
        j = np.minimum(pos.astype(np.int64), nodes - 2)
        th = pos - j
        w1 = ws * th
        w0 = ws - w1
        jj = np.concatenate([j, j + 1])

        def spread(v0: np.ndarray, v1: np.ndarray) -> np.ndarray:
            return np.bincount(jj, np.concatenate([v0, v1]), nodes)

        return cls(
            step,
            spread(w0, w1),
            spread(w0 * yc, w1 * yc),
            spread(w0 * (1.0 - th), w1 * th),
            np.bincount(j, w0 * th, nodes - 1),
        )

    def coarsen(self) -> _Level:
        """The same data binned at twice the spacing (exact: coarse hats are sums of fine ones)."""
        c, d, a, b = self.c, self.d, self.a, self.b

        def restrict(v: np.ndarray) -> np.ndarray:
            out = v[0::2].copy()
            out[:-1] += 0.5 * v[1::2]
            out[1:] += 0.5 * v[1::2]
            return out

        ac = a[0::2].copy()
        ac[:-1] += 0.25 * a[1::2] + b[0::2]
        ac[1:] += 0.25 * a[1::2] + b[1::2]
        bc = 0.25 * a[1::2] + 0.5 * b[0::2] + 0.5 * b[1::2]
        return _Level(2.0 * self.step, restrict(c), restrict(d), ac, bc)

    def spectra(self, length: int) -> np.ndarray:
        if length not in self._spectra:
            self._spectra[length] = sfft.rfft(np.stack([self.c, self.d]), length, axis=1)
        return self._spectra[length]


def _grid_solve(smom: np.ndarray, tmom: np.ndarray, degree: int) -> tuple[np.ndarray, np.ndarray]:
    """Local fits at grid nodes from moments ``S_k`` (rows) and ``T_k``.

    Returns the intercept ``G`` and ``H = [S^-1]_00``; zero where the window is
    empty. Where the local system is numerically singular the degree drops.
    """
    m = smom.shape[1]
    fitted = np.zeros(m)
    h00 = np.zeros(m)
    s0 = smom[0]
    live = s0 > 1e-12 * float(np.max(s0))
    deg = np.where(live, degree, -1)
    with np.errstate(divide="ignore", invalid="ignore"):
        if degree >= 2:
            a, b, c, d, e = (smom[k] for k in range(5))
            c00 = c * e - d * d
            c01 = -(b * e - c * d)
            c02 = b * d - c * c
            det2 = a * c00 + b * c01 + c * c02
            weak = (deg == 2) & ~(np.abs(det2) > _SINGULAR * np.abs(a * c * e))
            deg[weak] = 1
            at = deg == 2
            fitted[at] = ((c00 * tmom[0] + c01 * tmom[1] + c02 * tmom[2]) / det2)[at]
            h00[at] = (c00 / det2)[at]
        if degree >= 1:
            a, b, c = smom[0], smom[1], smom[2]
            det1 = a * c - b * b
            weak = (deg == 1) & ~(np.abs(det1) > _SINGULAR * np.abs(a * c))
            deg[weak] = 0
            at = deg == 1
            fitted[at] = ((c * tmom[0] - b * tmom[1]) / det1)[at]
            h00[at] = (c / det1)[at]
        at = deg == 0
        fitted[at] = (tmom[0] / s0)[at]
        h00[at] = (1.0 / s0)[at]
    return fitted, h00


class BinnedScorer:
    """Scores on linearly binned data (Wand 1994) with exact accounting of the interpolation.

    The data are binned once onto the finest grid (``O(n)``); coarser grids
    are derived exactly by restriction. A candidate ``h`` is fitted at the
    nodes of the coarsest grid with at least
    :data:`BINNED_NODES_PER_BANDWIDTH` nodes per bandwidth (moment sums by FFT
    convolution with the sampled kernel), and its residual sum of squares and
    trace are then exact for the piecewise linear curve through the node
    values (see :class:`_Level`). Candidates with fewer nodes per bandwidth
    than that (only when the finest grid is capped at
    :data:`BINNED_MAX_NODES`) are marked ``coarse``; fewer than 1 node per
    bandwidth is not scored here at all.
    """

    name = "binned"

    def __init__(
        self, sample: SortedSample, groups: TieGroups, kernel: Kernel, degree: int, h_lo: float, h_hi: float
    ) -> None:
        self.sample, self.groups, self.kernel, self.degree = sample, groups, kernel, degree
        self.k0 = kernel.at_zero
        self.radius = kernel.support if math.isfinite(kernel.support) else GAUSSIAN_CUTOFF
        xs = sample.xs
        span = float(xs[-1] - xs[0])
        r = BINNED_NODES_PER_BANDWIDTH
        finest = min(max(h_lo / r, span / (BINNED_MAX_NODES - 1)), span / (BINNED_MIN_NODES - 1))
        coarsest = max(min(h_hi / r, span / (BINNED_MIN_NODES - 1)), finest)
        self.top = int(math.floor(math.log2(coarsest / finest)))
        per_top = max(2, int(math.ceil(span / (finest * 2**self.top))))
        nodes = per_top * 2**self.top + 1
        self.x0 = float(xs[0])
        self.levels = [_Level.bin(xs, sample.ws, sample.yc, nodes)]
        self.wyy = float(np.sum(sample.ws * sample.yc**2))
        self.group_pos = (groups.x - self.x0) / self.levels[0].step

    def level(self, h: float) -> tuple[int, _Level]:
        base = self.levels[0].step
        ell = int(math.floor(math.log2(max(h / (BINNED_NODES_PER_BANDWIDTH * base), 1.0))))
        ell = min(ell, self.top)
        while len(self.levels) <= ell:
            self.levels.append(self.levels[-1].coarsen())
        return ell, self.levels[ell]

    def nodes_per_bandwidth(self, h: float) -> float:
        return h / self.level(h)[1].step

    def evaluate(self, h: float) -> CandidateFit:
        ell, lev = self.level(h)
        p = self.degree
        m = lev.c.size
        reach = min(int(math.ceil(self.radius * h / lev.step)), m - 1)
        lags = np.arange(-reach, reach + 1) * (lev.step / h)
        kv = self.kernel(lags)
        filt = np.empty((2 * p + 1, lags.size))
        filt[0] = kv
        for k in range(1, 2 * p + 1):
            filt[k] = filt[k - 1] * lags
        # one transform length per grid (the widest window it serves), so the data spectra are reused;
        # a circular convolution of length >= m + reach leaves the outputs reach .. reach + m - 1 unaliased
        widest = m - 1 if ell == self.top else min(m - 1, int(math.ceil(self.radius * 2 * BINNED_NODES_PER_BANDWIDTH)) + 1)
        length = sfft.next_fast_len(m + max(widest, reach), real=True)
        spec_f = sfft.rfft(filt, length, axis=1)
        spec_d = lev.spectra(length)
        prods = np.concatenate([spec_d[0][None, :] * spec_f, spec_d[1][None, :] * spec_f[: p + 1]])
        conv = sfft.irfft(prods, length, axis=1)[:, reach : reach + m]
        # conv gives sum c K(-u) (-u)^k: flip the odd moments back
        sign = np.array([(-1.0) ** k for k in range(2 * p + 1)] + [(-1.0) ** k for k in range(p + 1)])
        conv *= sign[:, None]
        fitted, h00 = _grid_solve(conv[: 2 * p + 1], conv[2 * p + 1 :], p)
        # einsum, not BLAS: threaded BLAS dot products only add contention at these sizes
        rss_raw = (
            self.wyy
            - 2.0 * np.einsum("i,i->", lev.d, fitted)
            + np.einsum("i,i,i->", lev.a, fitted, fitted)
            + 2.0 * np.einsum("i,i,i->", lev.b, fitted[:-1], fitted[1:])
        )
        rss = max(float(rss_raw), 0.0) * self.groups.scale
        df = self.k0 * float(np.einsum("i,i->", lev.c, h00))
        pos = self.group_pos / 2**ell

        def at_groups(idx: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
            at = pos if idx is None else pos[idx]
            j = np.minimum(at.astype(np.int64), m - 2)
            th = at - j
            f = (1.0 - th) * fitted[j] + th * fitted[j + 1]
            hh = (1.0 - th) * h00[j] + th * h00[j + 1]
            return f, self.k0 * hh * (self.groups.W if idx is None else self.groups.W[idx])

        return CandidateFit(rss, df, at_groups, h / lev.step)


def _binnable(kernel: Kernel) -> bool:
    """Kernels smooth at ``u = 0`` (the uniform jumps there, the triangular has a kink)."""
    return kernel.name not in ("uniform", "triangular")


def resolve_scoring(scoring: str, kernel: Kernel, sample: SortedSample, selector: str) -> str:
    """``auto``: binned from :data:`BINNED_SCORING_MIN_N` points, and for the gaussian kernel (whose
    exact sums are slow for small samples too) from the start; never for the uniform and
    triangular kernels. (``selector`` is accepted for symmetry; binned ``loocv`` guards itself
    against large leverages, see :func:`_score_candidates`.)
    """
    if scoring != "auto":
        if scoring == "binned" and not _binnable(kernel):
            raise ValueError(f"binned scoring is not accurate for the {kernel.name} kernel; use exact")
        return scoring
    if not _binnable(kernel):
        return "exact"
    if sample.n_used >= BINNED_SCORING_MIN_N or not math.isfinite(kernel.support):
        return "binned"
    return "exact"


def binned_floor(sample: SortedSample) -> float:
    """Smallest default candidate that the binned grid resolves with full accuracy."""
    return BINNED_NODES_PER_BANDWIDTH * float(sample.xs[-1] - sample.xs[0]) / (BINNED_MAX_NODES - 1)
