"""Generated requests: whatever a client sends, the answer is never a 5xx.

Two generators: cases drawn from the service's own OpenAPI document
(schemathesis), and well-shaped smooth requests with extreme but finite
numbers (hypothesis), which reach the numerics.  Both are derandomised so a
run is reproducible.  Invariants checked on every answer: status below 500;
errors are problem+json; a 200 answer validates against the response model
and contains no ``NaN``.
"""

from __future__ import annotations

import json
from typing import Any

import httpx
import pytest
import schemathesis
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.contract.models import KERNEL_NAMES, SELECTOR_NAMES, BandwidthResponse, BatchResponse, SmoothResponse

from .conftest import Harness

MODELS = {"/v1/smooth": SmoothResponse, "/v1/smooth/batch": BatchResponse, "/v1/bandwidth": BandwidthResponse}
FUZZ = settings(max_examples=60, deadline=None, derandomize=True, suppress_health_check=list(HealthCheck), database=None)


def _not_json(token: str) -> None:
    raise AssertionError(f"{token} is not a JSON number")


def _check(response: httpx.Response, path: str) -> None:
    assert response.status_code < 500, (response.status_code, response.text[:300], response.request.content[:300])
    if response.status_code >= 400:
        assert response.headers["content-type"] == "application/problem+json"
        doc = response.json()
        assert doc["status"] == response.status_code and doc["type"].startswith("/problems/")
    elif path in MODELS:
        # No NaN/Infinity number tokens (RFC 8259 has none); the words may appear inside strings, e.g. an
        # unknown field named "NaN" in a batch slot's problem.
        MODELS[path].model_validate(json.loads(response.text, parse_constant=_not_json))


@pytest.fixture(scope="module")
def schema(api: Harness) -> Any:
    return schemathesis.openapi.from_dict(api.get("/openapi.json").json())


@pytest.mark.parametrize("path", ["/v1/smooth", "/v1/smooth/batch", "/v1/bandwidth"])
def test_schema_generated_requests(api: Harness, schema: Any, path: str) -> None:
    strategy = schema[path]["POST"].as_strategy()

    @FUZZ
    @given(strategy)
    def run(case: Any) -> None:
        kwargs = case.as_transport_kwargs(base_url="http://bandwise.test")
        response = api.request(kwargs["method"], path, json=kwargs.get("json"), headers={k: v for k, v in (kwargs.get("headers") or {}).items() if k.lower() != "content-length"})
        _check(response, path)

    run()


finite = st.floats(allow_nan=False, allow_infinity=False)
moderate = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False)
positive = st.floats(min_value=5e-324, max_value=1.7e308, allow_nan=False, allow_infinity=False, exclude_min=False)


@st.composite
def smooth_requests(draw: Any) -> dict[str, Any]:
    n = draw(st.integers(2, 40))
    values = draw(st.sampled_from([finite, moderate]))
    body: dict[str, Any] = {
        "x": draw(st.lists(values, min_size=n, max_size=n)),
        "y": draw(st.lists(values, min_size=n, max_size=n)),
        "kernel": draw(st.sampled_from(KERNEL_NAMES)),
        "degree": draw(st.integers(0, 2)),
        "bandwidth": draw(st.one_of(st.just("auto"), positive, st.floats(min_value=1e-3, max_value=1e3))),
        "engine": draw(st.sampled_from(["auto", "exact", "binned"])),
    }
    if body["bandwidth"] == "auto":
        body["selector"] = draw(st.sampled_from(SELECTOR_NAMES))
        body["rule"] = draw(st.sampled_from(["min", "one_se"]))
        body["candidate_count"] = draw(st.integers(2, 20))
    if draw(st.booleans()):
        body["weights"] = draw(st.lists(st.floats(min_value=0, max_value=1e300), min_size=n, max_size=n))
    if draw(st.booleans()):
        body["curve"] = draw(st.one_of(st.builds(lambda k: {"points": k}, st.integers(2, 50)), st.builds(lambda a: {"at": a}, st.lists(values, min_size=1, max_size=10))))
    if draw(st.booleans()):
        body["predict_at"] = draw(st.lists(values, min_size=1, max_size=10))
    if draw(st.booleans()):
        body["bands"] = {
            "method": draw(st.sampled_from(["wild_bootstrap", "residual_bootstrap", "analytic"])),
            "level": draw(st.floats(min_value=0.5, max_value=0.99)),
            "replicates": draw(st.integers(40, 80)),
            "simultaneous": draw(st.booleans()),
        }
    body["include_fitted"] = draw(st.booleans())
    return body


def test_well_shaped_requests_with_extreme_numbers(api: Harness) -> None:
    @FUZZ
    @given(smooth_requests())
    def run(body: dict[str, Any]) -> None:
        _check(api.post("/v1/smooth", json=body), "/v1/smooth")

    run()
