"""Where bootstrap errors meet the equivalent-kernel weights: nodes (sources or a grid) and weight blocks."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._compiled_bootstrap import banded_product
from ..local_poly import LocalPolynomial
from ..sums import binned_grid_allowed, effective_radius

MEMORY_ELEMENTS = 1 << 21  # float64 elements per working array (16 MiB)
_POINT_BLOCK = 32
_EXACT_MAX = 1 << 22  # sources x replicates up to which bootstrap weights are exact
_GAUSS_GRID = 16.0
_GAUSS_REACH = 7.0  # bandwidths beyond the nearest data point at which gaussian weights are dropped


@dataclass
class Nodes:
    """Where the random errors meet the weights: the sources themselves, or a regular grid."""

    x: np.ndarray  # node locations (ascending)
    src: slice  # reachable sources
    node: np.ndarray  # node index of each reachable source
    frac: np.ndarray  # share going to node + 1 (0 on the exact path)
    binned: bool


def _grid_step(s: LocalPolynomial) -> float | None:
    """Grid spacing for binned errors, or None where binning is not accurate enough.

    Linear binning replaces each weight by its linear interpolation between
    grid nodes; the measured change of bootstrap variances is below 3e-3
    relative at ``h / 16`` for the gaussian and 1.5e-3 at ``h / 128`` for compact
    kernels that fall continuously to zero at the window edge. A kernel that
    jumps at the edge (uniform) is always exact.
    """
    k = s.kernel_spec
    if not math.isfinite(k.support):
        return s.bandwidth / _GAUSS_GRID
    edge = float(k(np.array([1.0]))[0])
    if edge > 1e-12 * k.at_zero:
        return None
    return s.bandwidth / 128.0


def _reach(s: LocalPolynomial, t: np.ndarray) -> np.ndarray:
    """Distance from each point beyond which weights are ignored.

    Compact kernels: the support. Gaussian: ``7 h`` beyond the nearest data
    point (the weights there are ``exp(-24.5) ~ 2e-11`` of the largest), at most
    the ``10 h`` cut-off of the fit itself.
    """
    h = s.bandwidth
    full = effective_radius(s.kernel_spec) * h
    if math.isfinite(s.kernel_spec.support):
        return np.full(t.size, full)
    xs = s.sample.xs
    i = np.clip(np.searchsorted(xs, t), 1, xs.size - 1) if xs.size > 1 else np.zeros(t.size, dtype=np.int64)
    near = np.minimum(np.abs(xs[i] - t), np.abs(xs[i - 1] - t)) if xs.size > 1 else np.abs(xs[0] - t)
    reach: np.ndarray = np.minimum(full, _GAUSS_REACH * h + near)
    return reach


def make_nodes(s: LocalPolynomial, t: np.ndarray, replicates: int, engine: str) -> Nodes:
    xs = s.sample.xs
    radius = _reach(s, t)
    a = int(np.searchsorted(xs, t[0] - radius[0], side="left"))
    b = int(np.searchsorted(xs, t[-1] + radius[-1], side="right"))
    src = slice(a, b)
    xr = xs[src]
    step = _grid_step(s)
    span = float(xr[-1] - xr[0]) if xr.size else 0.0
    grid_size = int(math.ceil(span / step)) + 2 if (xr.size and step is not None) else 0
    use_grid = step is not None and (
        (engine == "binned" and binned_grid_allowed(grid_size, xr.size, t.size))
        or (engine == "auto" and xr.size * replicates > _EXACT_MAX and grid_size * 4 <= xr.size)
    )
    if step is None or not use_grid or xr.size == 0:
        return Nodes(xr, src, np.arange(xr.size, dtype=np.int64), np.zeros(xr.size), False)
    origin = float(xr[0])
    pos = (xr - origin) / step
    node = np.minimum(np.floor(pos).astype(np.int64), grid_size - 2)
    frac = pos - node
    grid = origin + step * np.arange(grid_size)
    return Nodes(grid, src, node, frac, True)


def _kernel_rows(s: LocalPolynomial, t: np.ndarray, a: np.ndarray, xn: np.ndarray) -> np.ndarray:
    """``K(u) sum_k a_k u^k`` with ``u = (xn - t) / h``: the weights without ``w_j``, shape (len(t), len(xn))."""
    h = s.bandwidth
    u = (xn[None, :] - t[:, None]) / h
    k = s.kernel_spec(u)
    if not math.isfinite(s.kernel_spec.support):
        k = np.where(np.abs(u) <= effective_radius(s.kernel_spec), k, 0.0)
    poly = np.zeros_like(u)
    for j in range(a.shape[1] - 1, -1, -1):
        poly = poly * u + a[:, j, None]
    rows: np.ndarray = k * poly
    return rows


class WeightBlocks:
    """Equivalent-kernel weights at the nodes, for blocks of consecutive (sorted) points."""

    def __init__(self, s: LocalPolynomial, t: np.ndarray, a: np.ndarray, nodes: Nodes) -> None:
        self.s, self.t, self.a, self.nodes = s, t, a, nodes
        radius = _reach(s, t)
        pad = (nodes.x[1] - nodes.x[0]) if nodes.binned and nodes.x.size > 1 else 0.0
        self.spans = []
        for i0 in range(0, t.size, _POINT_BLOCK):
            i1 = min(i0 + _POINT_BLOCK, t.size)
            lo = int(np.searchsorted(nodes.x, t[i0] - radius[i0] - pad, side="left"))
            hi = int(np.searchsorted(nodes.x, t[i1 - 1] + radius[i1 - 1] + pad, side="right"))
            self.spans.append((i0, i1, lo, hi))
        size = sum((i1 - i0) * (hi - lo) for i0, i1, lo, hi in self.spans)
        self._cache: list[np.ndarray] | None = None
        if size <= 4 * MEMORY_ELEMENTS:
            self._cache = [self._rows(*sp) for sp in self.spans]

    def _rows(self, i0: int, i1: int, lo: int, hi: int) -> np.ndarray:
        return _kernel_rows(self.s, self.t[i0:i1], self.a[i0:i1], self.nodes.x[lo:hi])

    def apply(self, g: np.ndarray, out: np.ndarray) -> None:
        """``out[i, :] = sum_c rows[i, c] g[c, :]`` for every point block."""
        for k, (i0, i1, lo, hi) in enumerate(self.spans):
            rows = self._cache[k] if self._cache is not None else self._rows(i0, i1, lo, hi)
            block = np.empty((i1 - i0, g.shape[1]))
            banded_product(np.ascontiguousarray(rows), g, lo, block)
            out[i0:i1] = block

    def power_sums(self, c2: np.ndarray, c4: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``sum_c rows^2 c2_c`` and ``sum_c rows^4 c4_c`` for every point."""
        s2 = np.empty(self.t.size)
        s4 = np.empty(self.t.size)
        for k, (i0, i1, lo, hi) in enumerate(self.spans):
            rows = self._cache[k] if self._cache is not None else self._rows(i0, i1, lo, hi)
            sq = rows * rows
            s2[i0:i1] = (sq * c2[lo:hi]).sum(axis=1)
            s4[i0:i1] = (sq * sq * c4[lo:hi]).sum(axis=1)
        return s2, s4
