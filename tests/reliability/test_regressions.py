"""Regression tests for defects the schema fuzzer found (``known_bugs.py``).

A defect still open is marked ``xfail(strict=True)``: the suite stays green
while it is open, and the fix makes the test pass, which strict xfail reports
as a failure, so the marker (and the entry in ``known_bugs.py``) must go with
the fix. Fixed defects keep their test, unmarked. The expectations come from DESIGN.md: "never a 500 for anything a
client sent", undefined numbers are null only where the response schema
allows null, and the OpenAPI document describes the answers.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from typing import Any

import pytest

from tests.service.conftest import Harness

TWELVE_X = [float(i) for i in range(12)]
TWELVE_Y = [0.0, 1.0, 2.0] * 4


@pytest.fixture(scope="module")
def api() -> Iterator[Harness]:
    h = Harness(workers=1, access_log=False, log_level="critical")
    yield h
    h.close()


def _not_server_error(response: Any) -> None:
    assert response.status_code < 500, (response.status_code, response.text[:300])
    assert response.status_code in (200, 422), (response.status_code, response.text[:300])


GRID_OVERFLOW_CASES = [
    pytest.param("/v1/smooth", {"x": [0.0, 1.0, 2.0], "y": [0.0, 1.0, 2.0], "bandwidth": 1e308}, id="bandwidth-near-float-max"),
    pytest.param("/v1/smooth", {"x": [0.0, 1e300, 2e300], "y": [0.0, 1.0, 2.0], "bandwidth": 1e-300}, id="span-over-bandwidth-overflows"),
    pytest.param("/v1/smooth", {"x": [-1.5e308, 1.5e308], "y": [0.0, 1.0], "bandwidth": 1.0}, id="x-span-overflows"),
    pytest.param("/v1/smooth", {"x": TWELVE_X, "y": TWELVE_Y, "bandwidth_max": 1e308}, id="auto-with-huge-bandwidth-max"),
    pytest.param("/v1/bandwidth", {"x": TWELVE_X, "y": TWELVE_Y, "bandwidth_max": 1e308}, id="selection-with-huge-bandwidth-max"),
    pytest.param("/v1/smooth/batch", {"series": [{"x": TWELVE_X, "y": TWELVE_Y}, {"x": [0.0, 1.0, 2.0], "y": [0.0, 1.0, 2.0], "bandwidth": 1e308}]}, id="batch-slot"),
]


@pytest.mark.parametrize(("path", "body"), GRID_OVERFLOW_CASES)
def test_gaussian_fit_with_extreme_bandwidth_or_span_is_not_a_server_error(api: Harness, path: str, body: dict[str, Any]) -> None:
    """GRID-OVERFLOW (fixed): the engine choice computed int(inf) in binned_grid_size for the gaussian kernel, answered 500."""
    response = api.post(path, json=body)
    _not_server_error(response)


def test_extreme_values_with_a_compact_kernel_and_exact_engine_are_answered(api: Harness) -> None:
    """Control for GRID-OVERFLOW: the same bandwidth with a compact kernel does not reach the faulty estimate."""
    response = api.post("/v1/smooth", json={"x": [0.0, 1.0, 2.0], "y": [0.0, 1.0, 2.0], "bandwidth": 1e308, "kernel": "epanechnikov"})
    _not_server_error(response)


@pytest.mark.parametrize("kernel", ["triangular", "epanechnikov", "gaussian"])
def test_overflowing_x_span_is_refused_or_gives_a_finite_curve(api: Harness, kernel: str) -> None:
    """SPAN-OVERFLOW (fixed): with max(x) - min(x) beyond the float range the answer was 200 with curve.x all null."""
    body = {"x": [-1e308, 0.0, 1e308], "y": [0.0, 1.0, 2.0], "kernel": kernel, "bandwidth": 1.0}
    assert not math.isfinite(max(body["x"]) - min(body["x"]))
    response = api.post("/v1/smooth", json=body)
    _not_server_error(response)
    if response.status_code == 200:
        xs = response.json()["curve"]["x"]
        assert all(isinstance(v, float) and math.isfinite(v) for v in xs), xs[:5]


def test_readyz_body_matches_its_documented_schema(api: Harness) -> None:
    doc = api.get("/openapi.json").json()
    ref = doc["paths"]["/readyz"]["get"]["responses"]["200"]["content"]["application/json"]["schema"]["$ref"]
    schema = doc["components"]["schemas"][ref.rsplit("/", 1)[-1]]
    body = api.get("/readyz").json()
    if schema.get("additionalProperties") is False:
        assert set(body) <= set(schema["properties"]), sorted(set(body) - set(schema["properties"]))


@pytest.mark.parametrize("n", [4, 6, 8, 10])
def test_automatic_bandwidth_on_a_short_series_is_fitted(api: Harness, n: int) -> None:
    """FEW-POINTS-AUTO (fixed): up to 8 evenly spaced points used to be refused, 422 naming bandwidth_min/bandwidth_max, fields the client never sent."""
    body = {"x": [float(i) for i in range(n)], "y": [float(i % 3) for i in range(n)]}
    response = api.post("/v1/smooth", json=body)
    assert response.status_code == 200, response.text[:300]
    chosen = response.json()["bandwidth"]
    assert chosen["selector"] == "gcv"
    assert min(chosen["candidates"]) <= chosen["value"] <= max(chosen["candidates"])


@pytest.mark.parametrize("bands", [None, {"replicates": 60, "seed": 0}])
def test_binned_engine_with_a_tiny_bandwidth_is_answered_by_the_exact_path(api: Harness, bands: dict[str, Any] | None) -> None:
    """BINNED-HUGE-GRID (fixed): engine "binned" with h = 0.001 over an x range of 326 built a grid of
    83 million nodes (256 per bandwidth) and ran past the 30 s deadline; found by the model-property test."""
    body: dict[str, Any] = {"x": [0.0, 0.0, 326.0, 0.0, 0.0, 0.0], "y": [0.0, 0.5, 0.0, 0.0, 0.0, 0.0], "bandwidth": 0.001, "engine": "binned"}
    if bands is not None:
        body["bands"] = bands
    response = api.post("/v1/smooth", json=body)
    assert response.status_code == 200, response.text[:300]
    doc = response.json()
    assert doc["diagnostics"]["engine"] == "exact"
    exact = api.post("/v1/smooth", json={**body, "engine": "exact"}).json()
    assert doc["curve"]["estimate"] == exact["curve"]["estimate"]
