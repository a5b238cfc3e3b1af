"""The client passes robust, family and anomalies, and reads the answer's anomalies and robustness weights.

Reference: ``estimators`` called in this process on the same readings (the service is a thin layer).
"""

from __future__ import annotations

import numpy as np
import pytest

import estimators
from estimators.anomalies import find_anomalies
from estimators.demo import cold_store, parcel_depot
from service.client import ValidationFailed

from .conftest import API_KEY, InProcessApp


def test_robust_fit_and_anomalies_through_the_client(app: InProcessApp) -> None:
    demo = cold_store()
    with app.client(api_key=API_KEY) as client:
        result = client.smooth(demo.x, demo.y, robust=True, anomalies={"level": 0.999}, include_fitted=True)
    ref = estimators.fit(demo.x, demo.y, robust=True)
    flagged = result.anomaly_arrays()
    np.testing.assert_array_equal(flagged.index, find_anomalies(ref, 0.999).index)
    np.testing.assert_array_equal(flagged.y, demo.y[flagged.index])
    assert result.fitted is not None
    weights = result.fitted.arrays().robustness_weights
    assert weights is not None
    np.testing.assert_array_equal(weights, ref.robustness_weights)
    assert result.bandwidth.selector == "robust_gcv"


def test_counts_through_the_client(app: InProcessApp) -> None:
    depot = parcel_depot()
    with app.client(api_key=API_KEY) as client:
        result = client.smooth(depot.x, depot.y, family="poisson", bands={"method": "analytic"})
        with pytest.raises(ValidationFailed):
            client.smooth([0.0, 1.0, 2.0], [1.0, -1.0, 2.0], family="poisson")
    curve = result.curve.arrays()
    assert curve.lower is not None
    defined = np.isfinite(curve.estimate)
    assert np.all(curve.estimate[defined] > 0) and np.all(curve.lower[defined] > 0)
    assert result.diagnostics.family == "poisson"
