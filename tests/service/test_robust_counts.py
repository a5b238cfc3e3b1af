"""robust, anomalies and family over HTTP: the answer matches ``estimators`` called in this process.

The service is a thin layer, so the reference for every number is the numerical package itself
(whose methods are checked against outside references in tests/estimators/test_robust.py and
test_poisson.py); here the checks are the wire: field names, request positions, 422 codes.
"""

from __future__ import annotations

from typing import Any

import numpy as np

import estimators
from estimators.anomalies import find_anomalies
from estimators.demo import cold_store, parcel_depot
from service.contract.models import BandwidthResponse, SmoothResponse

from .conftest import Harness, problem_ok

COLD = cold_store()
X = COLD.x.tolist()
Y = COLD.y.tolist()


def _post(api: Harness, path: str, body: dict[str, Any]) -> dict[str, Any]:
    response = api.post(path, json=body)
    assert response.status_code == 200, response.text[:800]
    assert "NaN" not in response.text
    doc: dict[str, Any] = response.json()
    return doc


def test_robust_fit_with_anomalies_matches_the_numerics(api: Harness) -> None:
    doc = _post(api, "/v1/smooth", {"x": X, "y": Y, "robust": True, "anomalies": {"level": 0.999}, "include_fitted": True})
    SmoothResponse.model_validate(doc)
    ref = estimators.fit(X, Y, robust=True)
    assert doc["bandwidth"]["selector"] == "robust_gcv"
    assert doc["bandwidth"]["value"] == ref.bandwidth
    np.testing.assert_array_equal(doc["fitted"]["robustness_weights"], ref.robustness_weights)
    found = find_anomalies(ref, 0.999)
    assert [a["index"] for a in doc["anomalies"]] == found.index.tolist()
    assert found.index.size > 0  # the demo data carry defrost spikes
    for a in doc["anomalies"]:
        assert a["x"] == X[a["index"]] and a["y"] == Y[a["index"]]
        assert a["y"] < a["lower"] or a["y"] > a["upper"]
    assert doc["diagnostics"]["robust"] is True
    assert doc["diagnostics"]["n_outliers"] == int(np.count_nonzero(ref.robustness_weights == 0))


def test_anomaly_index_is_the_position_in_the_request(api: Harness) -> None:
    # a null early in the arrays is left out; indices still count every reading sent
    y = list(Y)
    y[3] = None
    doc = _post(api, "/v1/smooth", {"x": X, "y": y, "anomalies": {}})
    kept = [i for i in range(len(X)) if i != 3]
    ref = estimators.fit([X[i] for i in kept], [Y[i] for i in kept], robust=True)
    expected = [kept[i] for i in find_anomalies(ref, 0.999).index.tolist()]
    assert [a["index"] for a in doc["anomalies"]] == expected


def test_counts_stay_positive_and_match_the_numerics(api: Harness) -> None:
    depot = parcel_depot()
    x, y = depot.x.tolist(), depot.y.tolist()
    doc = _post(api, "/v1/smooth", {"x": x, "y": y, "family": "poisson", "bands": {"method": "analytic"}, "curve": {"points": 50}})
    SmoothResponse.model_validate(doc)
    ref = estimators.fit(x, y, family="poisson")
    assert doc["bandwidth"]["selector"] == "likelihood_aic"
    est = np.array([v for v in doc["curve"]["estimate"] if v is not None])
    low = np.array([v for v in doc["curve"]["lower"] if v is not None])
    assert np.all(est > 0) and np.all(low > 0)
    assert doc["bandwidth"]["value"] == ref.bandwidth
    assert doc["diagnostics"]["family"] == "poisson"


def test_negative_count_is_a_422_naming_the_index(api: Harness) -> None:
    y = [1.0, 2.0, 3.0, -4.0, 5.0]
    response = api.post("/v1/smooth", json={"x": [0, 1, 2, 3, 4], "y": y, "family": "poisson"})
    doc = problem_ok(response, 422)
    fields = {e["field"]: e["type"] for e in doc["errors"]}
    assert fields.get("y[3]") == "too_small", doc


def test_batch_and_bandwidth_take_the_new_fields(api: Harness) -> None:
    batch = _post(api, "/v1/smooth/batch", {"series": [{"x": X, "y": Y, "robust": True}, {"x": X, "y": Y, "family": "poisson"}]})
    first = batch["results"][0]
    assert first["bandwidth"]["selector"] == "robust_gcv"
    assert batch["results"][1]["bandwidth"]["selector"] == "likelihood_aic"
    sel = _post(api, "/v1/bandwidth", {"x": X, "y": Y, "robust": True})
    BandwidthResponse.model_validate(sel)
    assert sel["bandwidth"]["value"] == estimators.fit(X, Y, robust=True).bandwidth


def test_anomalies_on_a_time_axis_answer_date_times(api: Harness) -> None:
    # the parcel depot with RFC 3339 x and a robust count fit; the anomalies' x are the readings' own times
    depot = parcel_depot()
    stamps = np.datetime_as_string(depot.x[:240].astype("int64").astype("datetime64[ms]"), unit="ms", timezone="UTC").tolist()
    counts = depot.y[:240].tolist()
    counts[100] = counts[100] + 400.0  # a burst the curve cannot explain
    doc = _post(api, "/v1/smooth", {"x": stamps, "y": counts, "family": "poisson", "robust": True, "anomalies": {"level": 0.999}})
    SmoothResponse.model_validate(doc)
    flagged = {a["index"]: a for a in doc["anomalies"]}
    assert 100 in flagged
    assert flagged[100]["x"] == stamps[100]
    assert doc["bandwidth"]["selector"] == "robust_likelihood_aic"
