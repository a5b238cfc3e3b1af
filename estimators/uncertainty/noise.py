"""The noise variance as a function of x: constant, or a local linear fit chosen by GCV.

Method notes: ``docs/methods.md`` (uncertainty: local noise scale).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..local_poly import LocalPolynomial
from ..sample import validate_sample
from .residuals import Residuals, adjusted_residuals

_VARIANCE_CANDIDATES = 12


@dataclass
class NoiseScale:
    """``sigma^2(x)`` for a unit-weight observation; constant or a local linear fit."""

    kind: str  # "constant" | "local"
    constant: float
    fit: LocalPolynomial | None = None  # local linear fit of w ra^2 on x (kind "local")
    floor_fit: LocalPolynomial | None = None  # its degree-0 counterpart, a positive lower guard
    x_min: float = 0.0
    x_max: float = 0.0
    bandwidth: float = math.nan

    def at(self, points: np.ndarray) -> np.ndarray:
        if self.kind == "constant" or self.fit is None or self.floor_fit is None:
            return np.full(points.shape, self.constant)
        tc = np.clip(points, self.x_min, self.x_max)
        ll = self.fit.predict(tc)
        nw = self.floor_fit.predict(tc)
        out = np.where(np.isfinite(ll), np.maximum(ll, 0.25 * nw), nw)
        scale: np.ndarray = np.where(np.isfinite(out), out, self.constant)
        return scale


def noise_scale(s: LocalPolynomial) -> NoiseScale:
    """Choose between a constant and a local linear noise variance by GCV (see ``docs/methods.md``, uncertainty: local noise scale)."""
    return s.memo("noise", lambda: _build_noise_scale(s, adjusted_residuals(s)))


def _build_noise_scale(s: LocalPolynomial, res: Residuals) -> NoiseScale:
    sample = s.sample
    # points that alone determine their fit have residual 0 whatever the noise: leave them out
    keep = res.informative
    if not keep.any():
        return NoiseScale("constant", math.nan)
    xs = sample.xs[keep]
    z = sample.ws[keep] * res.ra[keep] ** 2
    n = z.size
    mean = float(np.mean(z))
    best_score = n * float(np.sum((z - mean) ** 2)) / (n - 1.0) ** 2 if n > 1 else math.inf
    best: NoiseScale = NoiseScale("constant", mean)
    span = float(xs[-1] - xs[0])
    lo_h = 2.0 * s.bandwidth
    hi_h = max(span, lo_h)
    if n < 10 or span <= 0 or not math.isfinite(best_score):
        return best
    vsample = validate_sample(xs, z)
    for hv in np.geomspace(lo_h, hi_h, _VARIANCE_CANDIDATES):
        vs = LocalPolynomial(vsample, s.kernel_spec, 1, float(hv), s.engine_request)
        r = vs.residuals()
        if not np.all(np.isfinite(r)):
            continue
        df = vs.effective_df
        if not df < n:
            continue
        score = n * float(np.sum(r * r)) / (n - df) ** 2
        if score < best_score:
            best_score = score
            floor_fit = LocalPolynomial(vsample, s.kernel_spec, 0, float(hv), s.engine_request)
            best = NoiseScale("local", mean, vs, floor_fit, s.x_min, s.x_max, float(hv))
    return best


def noise_column(s: LocalPolynomial, noise: NoiseScale) -> np.ndarray:
    """``w_j sigma^2(x_j)`` at the sorted sources: ``w_j^2 Var(e_j)`` for :func:`variance`."""
    column: np.ndarray = s.sample.ws * noise.at(s.sample.xs)
    return column
