"""Why the sums are tile-centred: raw-power prefix sums lose every digit on epoch milliseconds."""

from __future__ import annotations

import numpy as np

from estimators import KERNELS
from estimators.sums import moment_sums


def _naive_prefix_moments(x: np.ndarray, q: np.ndarray, t: np.ndarray, h: float) -> np.ndarray:
    """Textbook fast sum updating: prefix sums of raw powers x^j, binomial expansion about t.

    sum_{window} q (x - t)^k = sum_j C(k, j) (-t)^(k - j) sum_{window} q x^j, for the
    epanechnikov kernel K(u) = 3/4 (1 - u^2) on the open window |x - t| < h.
    """
    from math import comb

    powers = np.stack([q * x**j for j in range(5)], axis=1)
    cum = np.vstack([np.zeros(5), np.cumsum(powers, axis=0)])
    lo = np.searchsorted(x, t - h, side="right")
    hi = np.searchsorted(x, t + h, side="left")
    raw = cum[hi] - cum[lo]  # sum q x^j over the window

    def centred(k: int) -> np.ndarray:  # sum q (x - t)^k
        return sum(comb(k, j) * (-t) ** (k - j) * raw[:, j] for j in range(k + 1))

    return np.stack([0.75 * (centred(k) / h**k - centred(k + 2) / h ** (k + 2)) for k in range(3)], axis=1)


def test_naive_prefix_sums_fail_and_tile_centred_sums_hold_on_epoch_ms() -> None:
    rng = np.random.default_rng(1)
    x = np.sort(1.7e12 + rng.uniform(0, 14 * 86_400_000, 2000))  # two weeks of epoch ms
    q = np.ones_like(x)
    h = 6 * 3_600_000.0  # six hours
    t = x[::50]
    u = (x[None, :] - t[:, None]) / h
    k = KERNELS["epanechnikov"](u)
    dense = np.stack([(k * u**j).sum(axis=1) for j in range(3)], axis=1)
    scale = np.abs(dense).max()

    ours = moment_sums(x, q, t, KERNELS["epanechnikov"], h, 2)[:, 0, :]
    naive = _naive_prefix_moments(x, q, t, h)

    assert np.max(np.abs(ours - dense)) <= 1e-12 * scale
    # the naive formula is not just imprecise but meaningless here (x^4 ~ 1e49)
    assert np.max(np.abs(naive - dense)) >= 1e3 * scale
