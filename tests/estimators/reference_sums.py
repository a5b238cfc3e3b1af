"""Vectorised reference for the compact kernels' exact moment sums (tile-centred prefix sums).

The compiled sweep of :mod:`estimators._compiled` is held to this form by the tests: each point's
powers are taken about its own tile centre and a window is assembled from at most three tiles,
re-centred by an exact binomial (or angle-addition) shift. See ``docs/methods.md`` (windowed moment sums).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import comb

from estimators.kernels import Kernel, Shape
from estimators.sums import window_bounds

_TILE_STRETCH = 1.0 + 2.0**-10  # tiles a hair wider than h: a window meets at most 3 tiles
_CHUNK = 16384


@dataclass(frozen=True)
class _Basis:
    """Functions of the tile-local coordinate whose window sums give the moments.

    ``omega == 0``: powers ``v**j`` for ``j <= degree``.
    ``omega > 0``: ``cos(omega v) v**j`` then ``sin(omega v) v**j``.
    """

    degree: int
    omega: float = 0.0

    @property
    def size(self) -> int:
        return (self.degree + 1) * (1 if self.omega == 0.0 else 2)

    def features(self, v: np.ndarray, q: np.ndarray) -> np.ndarray:
        out = np.empty((v.size, self.size))
        if self.omega == 0.0:
            col = q.copy()
            for j in range(self.degree + 1):
                out[:, j] = col
                if j < self.degree:
                    col *= v
            return out
        d1 = self.degree + 1
        c = q * np.cos(self.omega * v)
        s = q * np.sin(self.omega * v)
        for j in range(d1):
            out[:, j] = c
            out[:, d1 + j] = s
            if j < self.degree:
                c *= v
                s *= v
        return out

    def shift(self, delta: np.ndarray) -> np.ndarray:
        """Matrices ``T`` with ``features(v + delta) = T @ features(v)``; shape (m, F, F)."""
        delta = np.atleast_1d(np.asarray(delta, dtype=float))
        d1 = self.degree + 1
        binom = np.zeros((delta.size, d1, d1))
        powers = np.ones((delta.size, d1))
        for k in range(1, d1):
            powers[:, k] = powers[:, k - 1] * delta
        for big in range(d1):
            for j in range(big + 1):
                binom[:, big, j] = comb(big, j, exact=True) * powers[:, big - j]
        if self.omega == 0.0:
            return binom
        cw = np.cos(self.omega * delta)[:, None, None]
        sw = np.sin(self.omega * delta)[:, None, None]
        out = np.empty((delta.size, 2 * d1, 2 * d1))
        out[:, :d1, :d1] = binom * cw
        out[:, :d1, d1:] = -binom * sw
        out[:, d1:, :d1] = binom * sw
        out[:, d1:, d1:] = binom * cw
        return out


def _blocks(shape: Shape, order: int) -> list[tuple[_Basis, np.ndarray, np.ndarray]]:
    """Bases with linear maps from shifted features to moments ``k = 0..order``.

    Returns ``(basis, right_map, left_map)``; ``*_map`` has shape
    ``(order + 1, basis.size)`` and gives ``sum q K(u) u^k`` on the part of the
    window with ``u >= 0`` (right) or ``u < 0`` (left).
    """
    blocks = []
    if shape.poly:
        deg_k = len(shape.poly) - 1
        basis = _Basis(deg_k + order)
        right = np.zeros((order + 1, basis.size))
        left = np.zeros((order + 1, basis.size))
        for k in range(order + 1):
            for a, coef in enumerate(shape.poly):
                right[k, a + k] += coef
                left[k, a + k] += coef * ((-1.0) ** a if shape.in_abs else 1.0)
        blocks.append((basis, right, left))
    for amp, omega in shape.cosines:
        basis = _Basis(order, omega)
        m = np.zeros((order + 1, basis.size))
        for k in range(order + 1):
            m[k, k] = amp
        blocks.append((basis, m, m))
    return blocks


def compact_moments(
    x: np.ndarray,
    q: np.ndarray,
    points: np.ndarray,
    kernel: Kernel,
    shape: Shape,
    bandwidth: float,
    order: int,
) -> np.ndarray:
    n, ncol = q.shape
    m = points.size
    out = np.zeros((m, ncol, order + 1))
    if n == 0 or m == 0:
        return out
    h = float(bandwidth)
    width = h * _TILE_STRETCH
    stretch = width / h
    origin = float(x[0])
    rel = x - origin
    tile = np.floor(rel / width)
    v = (rel - (tile + 0.5) * width) / h

    lo, hi = window_bounds(x, points, kernel, h)
    empty = hi <= lo
    last_tile = float(tile[-1])
    b0 = np.clip(np.floor((points - origin) / width), -2.0, last_tile + 2.0)
    delta0 = ((b0 + 0.5) * width - (points - origin)) / h
    delta0[empty] = 0.0
    s0 = np.searchsorted(tile, b0, side="left")
    s1 = np.searchsorted(tile, b0 + 1.0, side="left")
    if shape.in_abs:
        mid = np.clip(np.searchsorted(x, points, side="left"), lo, hi)
        halves = [("left", lo, mid), ("right", mid, hi)]
    else:
        halves = [("right", lo, hi)]

    cuts = []
    for side, a, b in halves:
        p1 = np.clip(s0, a, b)
        p2 = np.clip(s1, a, b)
        cuts.append((side, np.stack([a, p1, p2, b])))

    for basis, right_map, left_map in _blocks(shape, order):
        t_minus = basis.shift(np.array([-stretch]))[0]
        t_plus = basis.shift(np.array([stretch]))[0]
        for c in range(ncol):
            cum = np.empty((n + 1, basis.size))
            cum[0] = 0.0
            np.cumsum(basis.features(v, q[:, c]), axis=0, out=cum[1:])
            for start in range(0, m, _CHUNK):
                sl = slice(start, min(start + _CHUNK, m))
                t_final = basis.shift(delta0[sl])
                for side, idx in cuts:
                    g = cum[idx[:, sl]]  # (4, chunk, F)
                    piece_a = g[1] - g[0]
                    piece_b = g[2] - g[1]
                    piece_c = g[3] - g[2]
                    local = piece_a @ t_minus.T + piece_b + piece_c @ t_plus.T
                    shifted = np.einsum("mgf,mf->mg", t_final, local)
                    kmap = left_map if side == "left" else right_map
                    out[sl, c, :] += shifted @ kmap.T
    return out
