"""Every configurable limit: at the limit the request passes, one past it fails with the right problem.

The ``small`` harness sets tiny limits (see conftest) so the bodies stay small.
"""

from __future__ import annotations

from collections.abc import AsyncIterator
from typing import Any

import pytest

from service.runtime.settings import MIB, Settings

from .conftest import Harness, problem_ok


def _series(n: int) -> dict[str, Any]:
    return {"x": [float(i) for i in range(n)], "y": [float(i % 3) for i in range(n)], "bandwidth": 2.0}


def _fields(response: Any) -> list[str]:
    return [e["field"] for e in response.json()["errors"]]


def test_defaults_match_the_documented_limits() -> None:
    s = Settings()
    assert s.max_body_bytes == 128 * MIB
    assert s.max_points == 2_000_000
    assert s.max_predict_points == 100_000
    assert s.max_curve_points == 10_000
    assert s.max_replicates == 5_000
    assert s.max_batch_series == 1_000
    assert s.max_batch_points == 2_000_000
    assert s.deadline_seconds == 30.0


def test_points_limit(small: Harness) -> None:
    assert small.post("/v1/smooth", json=_series(50)).status_code == 200
    response = small.post("/v1/smooth", json=_series(51))
    problem_ok(response, 422)
    assert _fields(response) == ["x"]
    assert "at most 50" in response.json()["errors"][0]["message"]


def test_points_limit_applies_to_bandwidth_endpoint(small: Harness) -> None:
    body = _series(51)
    body.pop("bandwidth")
    problem_ok(small.post("/v1/bandwidth", json=body), 422)


def test_predict_limit(small: Harness) -> None:
    assert small.post("/v1/smooth", json={**_series(10), "predict_at": [1.0] * 5}).status_code == 200
    response = small.post("/v1/smooth", json={**_series(10), "predict_at": [1.0] * 6})
    problem_ok(response, 422)
    assert _fields(response) == ["predict_at"]


@pytest.mark.parametrize("spec_ok,spec_bad", [({"points": 20}, {"points": 21}), ({"at": [1.0] * 20}, {"at": [1.0] * 21})])
def test_curve_limit(small: Harness, spec_ok: dict[str, Any], spec_bad: dict[str, Any]) -> None:
    assert small.post("/v1/smooth", json={**_series(10), "curve": spec_ok}).status_code == 200
    response = small.post("/v1/smooth", json={**_series(10), "curve": spec_bad})
    problem_ok(response, 422)
    assert _fields(response) == ["curve"]


def test_replicates_limit(small: Harness) -> None:
    response = small.post("/v1/smooth", json={**_series(10), "bands": {"replicates": 31}})
    problem_ok(response, 422)
    assert _fields(response) == ["bands"]


def test_candidates_limit(small: Harness) -> None:
    body = _series(30)
    body.pop("bandwidth")
    response = small.post("/v1/smooth", json={**body, "candidate_count": 11})
    problem_ok(response, 422)
    assert _fields(response) == ["candidate_count"]
    # Without an explicit count the default is capped by the limit, so the request still works.
    ok = small.post("/v1/smooth", json={**body, "curve": {"points": 5}})
    assert ok.status_code == 200, ok.text
    assert len(ok.json()["bandwidth"]["candidates"]) == 10


def test_body_limit_by_declared_length(small: Harness) -> None:
    body = b'{"x": [' + b"1," * 3000 + b'1], "y": [1]}'
    assert len(body) > 4096
    response = small.post("/v1/smooth", content=body, headers={"content-type": "application/json"})
    doc = problem_ok(response, 413)
    assert "4096" in doc["detail"]


def test_body_limit_while_streaming_without_length(small: Harness) -> None:
    sent: list[int] = []

    async def chunks() -> AsyncIterator[bytes]:
        yield b'{"x": ['
        for _ in range(100):
            sent.append(1)
            yield b"1.0," * 50
        yield b"1]}"

    response = small.post("/v1/smooth", content=chunks(), headers={"content-type": "application/json"})
    assert "content-length" not in {k.lower() for k in response.request.headers}
    problem_ok(response, 413)
    # The body was refused while it was being read: most chunks were never pulled.
    assert len(sent) < 100


def test_body_just_under_the_limit_is_read(small: Harness) -> None:
    body = _series(40)
    response = small.post("/v1/smooth", json=body)
    assert response.status_code == 200
    assert len(response.request.content) <= 4096


def test_invalid_content_length_is_400(small: Harness) -> None:
    response = small.post("/v1/smooth", content=b"{}", headers={"content-type": "application/json", "content-length": "many"})
    assert response.status_code in (400, 413)


def test_trickled_body_times_out_with_408() -> None:
    import asyncio

    h = Harness(workers=1, deadline_seconds=0.5)

    async def slow() -> AsyncIterator[bytes]:
        yield b'{"x": [1, 2, 3],'
        await asyncio.sleep(2.0)
        yield b' "y": [1, 2, 3]}'

    try:
        response = h.post("/v1/smooth", content=slow(), headers={"content-type": "application/json"})
        doc = problem_ok(response, 408)
        assert doc["type"] == "/problems/request-timeout"
        assert h.post("/v1/smooth", json=_series(5)).status_code == 200
    finally:
        h.close()
