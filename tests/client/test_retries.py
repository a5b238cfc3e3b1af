"""Retries, timeouts and odd answers, against scripted HTTP servers on 127.0.0.1.

The 200 answers are real: bodies the in-process app gave for the same
request.  Every loop here is bounded by the retry policy under test; each
scripted server serves only loopback.
"""

from __future__ import annotations

import asyncio
import logging
import time
from collections.abc import Callable
from email.utils import formatdate
from typing import Any

import orjson
import pytest

from service.client import (
    AsyncBandwiseClient,
    BandwiseClient,
    ConnectionFailed,
    DeadlineExceeded,
    Overloaded,
    RetryPolicy,
    ServerError,
    SmoothResult,
    Timeout,
    UnexpectedResponse,
    ValidationFailed,
)

from .conftest import API_KEY, InProcessApp, Reply, Script, ScriptedServer, free_port

Scripted = Callable[[Script], ScriptedServer]

X = [-2.0, 0.5, 3.0, 5.5, 8.0, 10.5, 13.0, 15.5, 18.0, 20.5, 23.0, 25.5]  # outdoor °C
Y = [23.1, 24.0, 25.6, 26.2, 27.9, 28.4, 30.2, 31.0, 33.9, 36.8, 39.5, 41.2]  # compressor kW
OPTIONS: dict[str, Any] = {"kernel": "epanechnikov", "bandwidth": 4.0, "curve": {"points": 7}, "predict_at": [12.0, 30.0]}
QUICK = RetryPolicy(attempts=4, backoff=0.01, max_backoff=0.05, total=20.0)
JSON = {"Content-Type": "application/json"}
PROBLEM = {"Content-Type": "application/problem+json"}


def problem(slug: str, status: int, title: str, detail: str) -> bytes:
    return orjson.dumps({"type": f"/problems/{slug}", "title": title, "status": status, "detail": detail, "instance": "/v1/smooth", "request_id": "scripted"})


OVERLOADED = problem("overloaded", 503, "Service overloaded", "All 1 workers are busy and 4 requests are already waiting.")


@pytest.fixture(scope="module")
def real_answer(app: InProcessApp) -> bytes:
    """The service's own answer to the request these tests send."""
    response = app.raw("POST", "/v1/smooth", json={"x": X, "y": Y, **OPTIONS}, headers={"Authorization": f"Bearer {API_KEY}"})
    assert response.status_code == 200, response.text
    return response.content


def smooth(server: ScriptedServer, retry: RetryPolicy = QUICK, **kwargs: Any) -> SmoothResult:
    with BandwiseClient(server.url, api_key=API_KEY, retry=retry, **kwargs) as client:
        return client.smooth(X, Y, **OPTIONS)


def test_503_with_retry_after_twice_then_200(scripted: Scripted, real_answer: bytes) -> None:
    retry_after = 1
    unavailable = Reply(503, OVERLOADED, {**PROBLEM, "Retry-After": str(retry_after)})
    server = scripted([unavailable, unavailable, Reply(200, real_answer, JSON)])
    result = smooth(server)
    assert result == SmoothResult.model_validate_json(real_answer)
    assert len(server.seen) == 3
    first, second, third = server.seen
    # Never earlier than Retry-After (RFC 9110 section 10.2.3).
    assert second.at - first.answered_at >= retry_after - 0.02
    assert third.at - second.answered_at >= retry_after - 0.02
    # The retried request is the same request: same body, same id, same key.
    assert first.body == second.body == third.body
    assert orjson.loads(first.body)["x"] == X
    assert first.headers["x-request-id"] == second.headers["x-request-id"] == third.headers["x-request-id"]
    assert all(s.headers["authorization"] == f"Bearer {API_KEY}" for s in server.seen)
    assert all(s.headers["content-type"] == "application/json" for s in server.seen)


def test_retry_after_as_http_date(scripted: Scripted, real_answer: bytes) -> None:
    def unavailable_until_two_seconds_from_now() -> Reply:
        # An IMF-fixdate has whole seconds, so the wait it asks for is between 1 and 2 s.
        return Reply(503, OVERLOADED, {**PROBLEM, "Retry-After": formatdate(time.time() + 2.0, usegmt=True)})

    server = scripted([unavailable_until_two_seconds_from_now, Reply(200, real_answer, JSON)])
    assert smooth(server) == SmoothResult.model_validate_json(real_answer)
    assert len(server.seen) == 2
    assert server.seen[1].at - server.seen[0].answered_at >= 0.98


def test_429_then_200(scripted: Scripted, real_answer: bytes) -> None:
    limited = Reply(429, problem("rate-limited", 429, "Too many requests", "More than 60 requests per minute."), {**PROBLEM, "Retry-After": "1"})
    server = scripted([limited, Reply(200, real_answer, JSON)])
    assert smooth(server) == SmoothResult.model_validate_json(real_answer)
    assert len(server.seen) == 2
    assert server.seen[1].at - server.seen[0].answered_at >= 0.98


def test_gives_up_after_the_attempt_count(scripted: Scripted, caplog: pytest.LogCaptureFixture) -> None:
    server = scripted([Reply(503, OVERLOADED, {**PROBLEM, "Retry-After": "0"})])
    caplog.set_level(logging.INFO, logger="bandwise.client")
    with pytest.raises(Overloaded) as info:
        smooth(server, retry=RetryPolicy(attempts=3, backoff=0.01, max_backoff=0.02, total=10.0))
    error = info.value
    assert len(server.seen) == 3 and error.attempts == 3
    assert error.status == 503 and error.retry_after == 0.0
    assert error.slug == "overloaded" and error.request_id == "scripted"
    assert "3 attempts" in str(error) and "workers are busy" in str(error)
    assert len([r for r in caplog.records if r.getMessage().startswith("retrying POST")]) == 2


def test_retry_after_beyond_the_budget_is_not_waited_for(scripted: Scripted) -> None:
    server = scripted([Reply(503, OVERLOADED, {**PROBLEM, "Retry-After": "120"})])
    with pytest.raises(Overloaded) as info:
        smooth(server, retry=RetryPolicy(attempts=5, total=5.0))
    assert len(server.seen) == 1
    assert info.value.retry_after == 120.0
    assert "retry budget of 5 s" in str(info.value)


def test_deadline_exceeded_is_not_retried(scripted: Scripted) -> None:
    body = problem("deadline-exceeded", 503, "Deadline exceeded", "The request did not finish within 30 s and was stopped.")
    server = scripted([Reply(503, body, {**PROBLEM, "Retry-After": "1"})])
    with pytest.raises(DeadlineExceeded) as info:
        smooth(server)
    assert len(server.seen) == 1
    assert isinstance(info.value, Overloaded)
    assert "fewer points" in str(info.value)


def test_500_is_not_retried(scripted: Scripted) -> None:
    body = problem("internal-error", 500, "Internal error", "An unexpected error occurred.")
    server = scripted([Reply(500, body, PROBLEM)])
    with pytest.raises(ServerError) as info:
        smooth(server)
    assert len(server.seen) == 1 and info.value.status == 500


def test_gateway_502_without_problem_details_is_retried(scripted: Scripted, real_answer: bytes) -> None:
    page = Reply(502, b"<html><body>502 Bad Gateway</body></html>", {"Content-Type": "text/html"})
    server = scripted([page, Reply(200, real_answer, JSON)])
    assert isinstance(smooth(server), SmoothResult)
    assert len(server.seen) == 2
    server = scripted([page])
    with pytest.raises(ServerError) as info:
        smooth(server, retry=RetryPolicy(attempts=2, backoff=0.01))
    assert info.value.status == 502 and "without problem details (text/html)" in str(info.value)


def test_422_is_not_retried(scripted: Scripted) -> None:
    body = orjson.dumps({"type": "/problems/validation-error", "title": "Invalid request", "status": 422, "detail": "see errors", "errors": [{"field": "x[2]", "message": "Input should be a finite number", "type": "finite_number"}]})
    server = scripted([Reply(422, body, PROBLEM)])
    with pytest.raises(ValidationFailed) as info:
        smooth(server)
    assert len(server.seen) == 1
    assert [e.field for e in info.value.errors] == ["x[2]"]
    assert "x[2]: Input should be a finite number" in str(info.value)


def test_answers_outside_the_contract(scripted: Scripted, real_answer: bytes) -> None:
    server = scripted([Reply(200, b"<html>a router login page</html>", {"Content-Type": "text/html"})])
    with pytest.raises(UnexpectedResponse, match="not JSON"):
        smooth(server)
    server = scripted([Reply(200, b'{"curve": {}}', JSON)])
    with pytest.raises(UnexpectedResponse, match="does not match the Bandwise contract"):
        smooth(server)


def test_fields_added_by_a_newer_service_are_ignored(scripted: Scripted, real_answer: bytes) -> None:
    doc = orjson.loads(real_answer)
    doc["provenance"] = {"replica": "b"}
    doc["diagnostics"]["new_measure"] = 1.5
    doc["predictions"][0]["new_flag"] = True
    server = scripted([Reply(200, orjson.dumps(doc), JSON)])
    assert smooth(server) == SmoothResult.model_validate_json(real_answer)


def test_read_timeout(scripted: Scripted, real_answer: bytes) -> None:
    server = scripted([Reply(200, real_answer, JSON, delay=2.0)])
    with pytest.raises(Timeout) as info:
        smooth(server, timeout=0.3)
    assert len(server.seen) == 1, "read timeouts are not retried by default"
    assert info.value.status is None and "within 0.3 s" in str(info.value)
    server = scripted([Reply(200, real_answer, JSON, delay=2.0)])
    with pytest.raises(Timeout) as info:
        smooth(server, timeout=0.3, retry=RetryPolicy(attempts=2, backoff=0.01, retry_timeouts=True))
    assert len(server.seen) == 2 and info.value.attempts == 2


def test_connection_refused_is_retried_then_reported(caplog: pytest.LogCaptureFixture) -> None:
    caplog.set_level(logging.INFO, logger="bandwise.client")
    url = f"http://127.0.0.1:{free_port()}"
    with BandwiseClient(url, retry=RetryPolicy(attempts=3, backoff=0.01, max_backoff=0.02)) as client, pytest.raises(ConnectionFailed) as info:
        client.kernels()
    assert info.value.attempts == 3 and info.value.status is None
    assert url in str(info.value) and "Check base_url" in str(info.value)
    assert len([r for r in caplog.records if r.getMessage().startswith("retrying GET")]) == 2


def test_total_budget_bounds_the_attempts() -> None:
    policy = RetryPolicy(attempts=10_000, backoff=0.05, max_backoff=0.05, total=0.5)
    with BandwiseClient(f"http://127.0.0.1:{free_port()}", retry=policy) as client, pytest.raises(ConnectionFailed) as info:
        client.kernels()
    # Waits average 0.025 s, so about 20 fit in the budget; far fewer than the attempt limit.
    assert 2 <= info.value.attempts < 200
    assert "retry budget of 0.5 s" in str(info.value)


def test_async_client_retries_the_same_way(scripted: Scripted, real_answer: bytes) -> None:
    unavailable = Reply(503, OVERLOADED, {**PROBLEM, "Retry-After": "1"})
    server = scripted([unavailable, unavailable, Reply(200, real_answer, JSON)])

    async def main() -> SmoothResult:
        async with AsyncBandwiseClient(server.url, api_key=API_KEY, retry=QUICK) as client:
            return await client.smooth(X, Y, **OPTIONS)

    result = asyncio.run(main())
    assert result == SmoothResult.model_validate_json(real_answer)
    assert len(server.seen) == 3
    assert server.seen[1].at - server.seen[0].answered_at >= 0.98
    assert server.seen[2].at - server.seen[1].answered_at >= 0.98
    assert server.seen[0].headers["x-request-id"] == server.seen[2].headers["x-request-id"]


def test_async_timeout_and_connection_errors(scripted: Scripted, real_answer: bytes) -> None:
    server = scripted([Reply(200, real_answer, JSON, delay=2.0)])

    async def main() -> None:
        async with AsyncBandwiseClient(server.url, timeout=0.3, retry=QUICK) as client:
            with pytest.raises(Timeout):
                await client.smooth(X, Y, **OPTIONS)
        async with AsyncBandwiseClient(f"http://127.0.0.1:{free_port()}", retry=RetryPolicy(attempts=2, backoff=0.01)) as client:
            with pytest.raises(ConnectionFailed) as info:
                await client.kernels()
            assert info.value.attempts == 2

    asyncio.run(main())
