"""Leverage-adjusted residuals at the sorted sources, computed once per smoother."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..local_poly import LocalPolynomial
from .local_fits import variance

#: ``d_j`` at or below which point ``j`` alone determines its fit and its residual carries no noise information
_SELF_DETERMINED = 1e-8


@dataclass
class Residuals:
    """Leverage-adjusted residuals at the sorted sources (points with weight > 0)."""

    ra: np.ndarray  # r_j / sqrt(d_j)
    factor: np.ndarray  # d_j = 1 - 2 L_jj + w_j sum_k L_jk^2 / w_k

    @property
    def informative(self) -> np.ndarray:
        """Points whose residual says something about the noise (``d_j`` above rounding)."""
        return self.factor > _SELF_DETERMINED


def adjusted_residuals(s: LocalPolynomial) -> Residuals:
    return s.memo("residuals", lambda: _build_residuals(s))


def _build_residuals(s: LocalPolynomial) -> Residuals:
    sample = s.sample
    keep = sample.w[sample.order] > 0
    resid = s.residuals()[sample.order][keep]
    lev = s.leverages()[sample.order][keep]
    # the local fits at the data, cached by the smoother (it computed them for the fitted values)
    a = s.fits_at_data.inv[keep, 0, :]
    cross = variance(s, sample.xs, a, sample.ws)  # sum_k L_jk^2 / w_k
    factor = 1.0 - 2.0 * lev + sample.ws * cross
    # a point that alone determines its fit (d_j ~ 0) carries no noise information
    ra = np.where(factor > _SELF_DETERMINED, resid / np.sqrt(np.maximum(factor, _SELF_DETERMINED)), 0.0)
    return Residuals(ra, factor)
