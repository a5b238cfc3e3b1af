"""The client's ``noise`` option against the real app in this process, on series of known correlation.

* A stationary AR(1) series (phi 0.6, known truth): the reported lag-1
  autocorrelation must be near 0.6 (the difference-based estimate,
  Hall & Van Keilegom 2003, has sd 0.047 at n = 1500 in a Monte Carlo run of
  300 series; the tolerance is a bit over 3 sd),
  and ``noise="correlated"`` must take the correlated path (selector
  ``modified_cv``), ``noise="independent"`` the independent one.
* A value outside auto / independent / correlated is refused before sending.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.client import ValidationFailed

from .conftest import API_KEY, InProcessApp

N = 1500
PHI = 0.6


def _series() -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(5)
    eps = rng.standard_normal(N)
    e = np.empty(N)
    e[0] = eps[0]
    for i in range(1, N):
        e[i] = PHI * e[i - 1] + math.sqrt(1.0 - PHI * PHI) * eps[i]
    x = np.arange(N, dtype=float) * 15.0  # minutes
    return x, np.sin(2.0 * math.pi * x / x[-1]) + 0.3 * e


def test_smooth_reports_the_noise_path_and_the_lag_one_estimate(app: InProcessApp) -> None:
    x, y = _series()
    with app.client(api_key=API_KEY) as client:
        auto = client.smooth(x, y, curve={"points": 10})
        forced = client.smooth(x, y, noise="independent", curve={"points": 10})
    assert auto.diagnostics.noise == "correlated"
    assert auto.bandwidth.selector == "modified_cv"
    assert "correlated_noise" in auto.warning_codes()
    assert auto.diagnostics.noise_autocorrelation is not None
    assert abs(auto.diagnostics.noise_autocorrelation - PHI) < 0.15
    assert forced.diagnostics.noise == "independent"
    assert forced.bandwidth.selector == "gcv"
    assert "correlated_noise" not in forced.warning_codes()
    # the modified criterion does not follow the correlated noise: a wider window than GCV's
    assert auto.bandwidth.value > forced.bandwidth.value


def test_bandwidth_and_batch_take_noise(app: InProcessApp) -> None:
    x, y = _series()
    with app.client(api_key=API_KEY) as client:
        alone = client.bandwidth(x, y, noise="correlated", candidate_count=12)
        batch = client.smooth_batch([{"x": x, "y": y, "noise": "correlated", "candidate_count": 12, "curve": {"points": 5}}])
    assert alone.diagnostics.noise == "correlated"
    assert alone.bandwidth.selector == "modified_cv"
    slot = batch.succeeded()[0]
    assert slot.diagnostics.noise == "correlated"
    assert slot.bandwidth.value == alone.bandwidth.value


def test_unknown_noise_is_refused_before_sending(app: InProcessApp) -> None:
    x, y = _series()
    with app.client(api_key=API_KEY) as client, pytest.raises(ValidationFailed) as info:
        client.smooth(x, y, noise="ar1")
    assert info.value.status is None
    assert [e.field for e in info.value.errors] == ["noise"]
