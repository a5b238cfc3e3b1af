"""POST /v1/smooth/batch and POST /v1/bandwidth."""

from __future__ import annotations

import math

import numpy as np

import estimators
from estimators.demo import cold_store, parcel_depot
from service.contract.models import BandwidthResponse, BatchResponse

from .conftest import Harness

COLD = cold_store()
DEPOT = parcel_depot()
CX, CY = COLD.x[::10].tolist(), COLD.y[::10].tolist()
DX, DY = DEPOT.x[::2].tolist(), DEPOT.y[::2].tolist()


def test_batch_slots_in_order_each_with_its_own_result_or_problem(api: Harness) -> None:
    series = [
        {"x": CX, "y": CY, "bandwidth": 2.0, "curve": {"points": 20}},
        {"x": CX, "y": CY[:-1], "bandwidth": 2.0},  # invalid: lengths differ
        {"x": [5.0] * 10, "y": list(range(10))},  # valid shape, but all x equal: no bandwidth can be selected
        {"x": DX, "y": DY, "bandwidth": 3 * 3_600_000.0, "curve": {"points": 20}, "predict_at": [DX[0] - 3_600_000.0]},
        {"x": CX, "y": CY, "bandwith": 2.0},  # typo in a field name
    ]
    response = api.post("/v1/smooth/batch", json={"series": series})
    assert response.status_code == 200, response.text[:500]
    doc = response.json()
    BatchResponse.model_validate(doc)
    results = doc["results"]
    assert len(results) == len(series)

    single = api.post("/v1/smooth", json=series[0]).json()
    assert results[0] == single

    bad = results[1]["problem"]
    assert bad["status"] == 422 and bad["type"] == "/problems/validation-error"
    assert [e["field"] for e in bad["errors"]] == ["y"]
    assert bad["instance"].endswith("#series[1]")

    unfit = results[2]["problem"]
    assert unfit["status"] == 422 and unfit["type"] == "/problems/unsuitable-data"
    assert "equal" in unfit["detail"]

    depot = results[3]
    assert depot["predictions"][0]["extrapolated"] is True
    ref = estimators.fit(np.array(DX), np.array(DY), bandwidth=3 * 3_600_000.0)
    cx, estimate = np.array(depot["curve"]["x"]), np.array(depot["curve"]["estimate"], dtype=float)
    hole = np.zeros(cx.size, dtype=bool)  # the depot's scanner outage is a gap: the curve is null strictly inside it
    for gap in depot["gaps"]:
        hole |= (cx > gap["start"]) & (cx < gap["end"])
    assert len(depot["gaps"]) == 1 and hole.any() and np.isnan(estimate[hole]).all()
    np.testing.assert_allclose(estimate[~hole], ref.predict(cx[~hole]), rtol=1e-10)

    typo = results[4]["problem"]
    assert [e["field"] for e in typo["errors"]] == ["bandwith"]


def test_batch_limits(small: Harness) -> None:
    one = {"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 1.0], "bandwidth": 1.0}
    ok = small.post("/v1/smooth/batch", json={"series": [one] * 3})
    assert ok.status_code == 200
    too_many = small.post("/v1/smooth/batch", json={"series": [one] * 4})
    assert too_many.status_code == 422
    assert too_many.json()["errors"][0]["field"] == "series"
    big = {"x": [float(i) for i in range(40)], "y": [0.0] * 40, "bandwidth": 3.0}
    too_many_points = small.post("/v1/smooth/batch", json={"series": [big, big, big]})  # 120 > 100
    assert too_many_points.status_code == 422
    assert "points" in too_many_points.json()["errors"][0]["message"]


def test_bandwidth_endpoint_matches_estimators(api: Harness) -> None:
    body = {"x": CX, "y": CY, "kernel": "epanechnikov", "selector": "loocv", "candidate_count": 15}
    response = api.post("/v1/bandwidth", json=body)
    assert response.status_code == 200, response.text[:500]
    doc = response.json()
    BandwidthResponse.model_validate(doc)
    assert set(doc) == {"bandwidth", "diagnostics", "warnings"}
    ref = estimators.select_bandwidth(np.array(CX), np.array(CY), kernel="epanechnikov", selector="loocv", candidates=15)
    assert ref.noise is not None and doc["diagnostics"]["noise"] == ref.noise.used
    assert math.isclose(doc["diagnostics"]["noise_autocorrelation"], ref.noise.autocorrelation, rel_tol=1e-12)
    bw = doc["bandwidth"]
    assert bw["selector"] == ("loocv" if ref.noise.used == "independent" else "modified_cv") and bw["rule"] == "min"
    assert math.isclose(bw["value"], ref.chosen, rel_tol=1e-12)
    assert len(bw["candidates"]) == len(bw["scores"]) == 15
    np.testing.assert_allclose(bw["candidates"], ref.candidates, rtol=1e-12)
    scores = np.array([np.nan if s is None else s for s in bw["scores"]])
    np.testing.assert_allclose(scores, ref.scores, rtol=1e-10, equal_nan=True)
    # With rule "min" the chosen bandwidth is the best-scoring candidate.
    assert math.isclose(bw["value"], bw["candidates"][int(np.nanargmin(scores))], rel_tol=1e-12)


def test_bandwidth_endpoint_agrees_with_smooth_auto(api: Harness) -> None:
    common = {"x": CX, "y": CY, "selector": "gcv", "rule": "one_se", "candidate_count": 20}
    alone = api.post("/v1/bandwidth", json=common).json()["bandwidth"]
    within = api.post("/v1/smooth", json={**common, "curve": {"points": 5}}).json()["bandwidth"]
    assert alone == within


def test_bandwidth_rejects_smooth_only_fields(api: Harness) -> None:
    response = api.post("/v1/bandwidth", json={"x": CX, "y": CY, "bandwidth": 2.0})
    assert response.status_code == 422
    assert [e["field"] for e in response.json()["errors"]] == ["bandwidth"]
