"""Bootstrap bands hold a fixed amount of memory whatever the number of band points.

The deviations are computed in slabs of points, each drawing the same
errors again from the seed; these tests check that slabs join into exactly
the one-slab answer, and that the peak memory of a request with many points
and replicates stays near the slab size instead of points x replicates x 8 bytes.
"""

from __future__ import annotations

import tracemalloc

import numpy as np
import pytest

from estimators import fit
from estimators.uncertainty import bootstrap

MIB = 1024 * 1024


def _smoother() -> object:
    rng = np.random.default_rng(11)
    x = np.sort(rng.uniform(0.0, 10.0, 400))
    y = np.sin(x) + rng.normal(0.0, 0.3, x.size)
    return fit(x, y, bandwidth=0.8)


@pytest.mark.parametrize("method", ["wild_bootstrap", "residual_bootstrap", "analytic"])
def test_slabs_join_into_the_one_slab_answer(method: str, monkeypatch: pytest.MonkeyPatch) -> None:
    s = _smoother()
    t = np.linspace(0.5, 9.5, 97)
    whole = s.bands(t, method=method, replicates=300, seed=5, simultaneous=True)  # type: ignore[attr-defined]
    monkeypatch.setattr(bootstrap, "SLAB_ELEMENTS", 300 * 7)  # 7 points a slab: 14 slabs
    assert len(bootstrap.point_slabs(t.size, 300)) == 14
    sliced = s.bands(t, method=method, replicates=300, seed=5, simultaneous=True)  # type: ignore[attr-defined]
    # the same draws: equal up to the rounding of sums taken over other point blocks
    np.testing.assert_allclose(sliced.lower, whole.lower, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(sliced.upper, whole.upper, rtol=1e-12, atol=1e-12)
    assert sliced.critical_value == pytest.approx(whole.critical_value, rel=1e-12, nan_ok=True)


def test_peak_memory_does_not_grow_with_points_times_replicates() -> None:
    """20,000 points x 2,000 replicates would be 305 MiB for the deviations alone; the peak stays far below."""
    s = _smoother()
    t = np.linspace(0.0, 10.0, 20_000)
    tracemalloc.start()
    try:
        s.bands(t, method="wild_bootstrap", replicates=2_000, seed=1)  # type: ignore[attr-defined]
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 200 * MIB, f"peak {peak / MIB:.0f} MiB"
