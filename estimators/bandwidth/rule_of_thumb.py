"""Normal reference rule on the spread of x, carried to the kernel by canonical scaling."""

from __future__ import annotations

import math

import numpy as np

from ..kernels import Kernel, convert_bandwidth
from ..sample import SortedSample


def _weighted_quantile(x_sorted: np.ndarray, w: np.ndarray, probs: np.ndarray) -> np.ndarray:
    """Quantiles of sorted ``x`` with weights; equal weights give numpy's default (linear) method."""
    cw = np.cumsum(w)
    total = cw[-1]
    pos = (cw - 0.5 * w - 0.5 * w[0]) / (total - 0.5 * w[0] - 0.5 * w[-1])
    out: np.ndarray = np.interp(probs, pos, x_sorted)
    return out


def rule_of_thumb_bandwidth(sample: SortedSample, kernel: Kernel) -> tuple[float, dict[str, float]]:
    """``h = 0.9 min(s, IQR / 1.34) n^(-1/5)`` for the gaussian kernel (Silverman 1986, eq. 3.31),
    carried to ``kernel`` by canonical scaling, ``h_K = h_G delta_0(K) / delta_0(gaussian)``.

    ``s`` and ``IQR`` are the weighted standard deviation and interquartile
    range of ``x``; ``n`` is the number of points with positive weight.
    """
    xs, ws = sample.xs, sample.ws
    n = sample.n_used
    mean = float(np.sum(ws * xs) / np.sum(ws))
    var = float(np.sum(ws * (xs - mean) ** 2) / np.sum(ws)) * n / max(n - 1, 1)
    sd = math.sqrt(var)
    q1, q3 = _weighted_quantile(xs, ws, np.array([0.25, 0.75]))
    iqr = float(q3 - q1)
    spread = min(sd, iqr / 1.34) if iqr > 0 else sd
    h_gauss = 0.9 * spread * n ** (-0.2)
    return convert_bandwidth(h_gauss, "gaussian", kernel.name), {
        "sd": sd,
        "iqr": iqr,
        "spread": spread,
        "gaussian_bandwidth": h_gauss,
    }
