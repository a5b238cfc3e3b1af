"""Request ids, JSON access log, Prometheus metrics, health and readiness, internal errors."""

from __future__ import annotations

import asyncio
import json
import logging
import os

import httpx
import pytest
from fastapi import Request

from service.contract.jobs import Job
from service.runtime.logs import AccessLogWriter, JsonFormatter

from .conftest import Harness, problem_ok

BODY = {"x": [1.0, 2.0, 3.0, 4.0, 5.0], "y": [2.0, 1.0, 2.0, 3.0, 2.0], "bandwidth": 1.0}


def test_request_id_is_echoed(api: Harness) -> None:
    response = api.post("/v1/smooth", json=BODY, headers={"x-request-id": "dash-42.retry:1"})
    assert response.headers["x-request-id"] == "dash-42.retry:1"


def test_request_id_is_generated(api: Harness) -> None:
    a = api.get("/healthz").headers["x-request-id"]
    b = api.get("/healthz").headers["x-request-id"]
    assert a != b and len(a) == 32 and int(a, 16) >= 0


@pytest.mark.parametrize("bad", ["", "has space", "x" * 129, "semi;colon", "quote\"d"])
def test_unsafe_request_id_is_replaced(api: Harness, bad: str) -> None:
    response = api.get("/healthz", headers={"x-request-id": bad})
    assert response.headers["x-request-id"] != bad
    assert len(response.headers["x-request-id"]) == 32


def test_problem_carries_the_request_id(api: Harness) -> None:
    response = api.post("/v1/smooth", json={"x": [1]}, headers={"x-request-id": "trace-me"})
    doc = problem_ok(response, 422)
    assert doc["request_id"] == "trace-me"


def test_one_json_log_line_per_request(api: Harness, caplog: pytest.LogCaptureFixture) -> None:
    caplog.set_level(logging.INFO, logger="bandwise.access")
    api.post("/v1/smooth", json=BODY, headers={"x-request-id": "log-check-1"})
    records = [r for r in caplog.records if r.name == "bandwise.access" and r.fields["request_id"] == "log-check-1"]
    assert len(records) == 1
    line = JsonFormatter().format(records[0])
    assert "\n" not in line
    entry = json.loads(line)
    assert entry["route"] == "/v1/smooth" and entry["method"] == "POST" and entry["status"] == 200
    assert entry["points"] == 5
    assert entry["duration_ms"] > 0
    assert entry["level"] == "info" and entry["ts"].endswith("Z")


def test_log_line_names_the_problem(api: Harness, caplog: pytest.LogCaptureFixture) -> None:
    caplog.set_level(logging.INFO, logger="bandwise.access")
    api.post("/v1/smooth", json={"x": [1, 2], "y": [1, 2], "kernel": "box"}, headers={"x-request-id": "log-check-2"})
    record = next(r for r in caplog.records if r.name == "bandwise.access" and r.fields["request_id"] == "log-check-2")
    assert record.fields["status"] == 422 and record.fields["problem"] == "validation-error"


def _metric(text: str, prefix: str) -> float:
    values = [float(line.rsplit(" ", 1)[1]) for line in text.splitlines() if line.startswith(prefix)]
    return sum(values)


def test_metrics(api: Harness) -> None:
    before = api.get("/metrics").text
    api.post("/v1/smooth", json=BODY)
    api.post("/v1/smooth", json={**BODY, "x": BODY["x"] * 2, "y": BODY["y"] * 2})
    api.get("/nowhere")
    response = api.get("/metrics")
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("text/plain")
    after = response.text
    ok = 'bandwise_requests_total{method="POST",route="/v1/smooth",status="200"}'
    assert _metric(after, ok) - _metric(before, ok) == 2
    assert _metric(after, "bandwise_points_processed_total") - _metric(before, "bandwise_points_processed_total") == 15
    assert _metric(after, 'bandwise_requests_total{method="GET",route="unmatched",status="404"}') >= 1
    assert 'bandwise_request_duration_seconds_bucket{le="0.1",route="/v1/smooth"}' in after
    for name in ("bandwise_work_in_flight", "bandwise_work_waiting", "bandwise_workers_ready", "bandwise_requests_shed_total", "bandwise_worker_restarts_total"):
        assert name in after, name
    assert _metric(after, "bandwise_workers_ready") == api.settings.workers


def test_healthz_and_readyz(api: Harness) -> None:
    assert api.get("/healthz").json() == {"status": "ok"}
    ready = api.get("/readyz")
    assert ready.status_code == 200
    assert ready.json()["workers_ready"] == api.settings.workers


def test_readyz_turns_503_when_draining() -> None:
    h = Harness(workers=1)
    try:
        h.service.begin_drain()
        doc = problem_ok(h.get("/readyz"), 503)
        assert doc["type"] == "/problems/shutting-down"
        work = h.post("/v1/smooth", json=BODY)
        problem_ok(work, 503)
        assert work.headers["retry-after"] and work.headers["connection"] == "close"
        assert h.get("/healthz").status_code == 200  # still alive while draining
    finally:
        h.close()


def test_unexpected_exception_is_a_500_problem_without_trace(caplog: pytest.LogCaptureFixture) -> None:
    h = Harness(workers=1)

    async def boom(request: Request) -> None:
        raise RuntimeError("secret internals")

    h.app.add_api_route("/v1/boom", boom, methods=["GET"])
    caplog.set_level(logging.ERROR, logger="bandwise.error")
    try:
        response = h.get("/v1/boom", headers={"x-request-id": "boom-1"})
        doc = problem_ok(response, 500)
        assert doc["type"] == "/problems/internal-error" and doc["request_id"] == "boom-1"
        assert "secret internals" not in response.text
        logged = [r for r in caplog.records if r.name == "bandwise.error"]
        assert logged and "secret internals" in logged[-1].fields["traceback"]
        assert h.get("/healthz").status_code == 200
    finally:
        h.close()


def test_unexpected_exception_in_a_worker_is_a_500_problem(api: Harness) -> None:
    outcome = api.run(api.service.pool.run(Job("no-such-kind", request_id="w-1", path="/v1/x"), 10.0))
    assert outcome.status == 500
    doc = json.loads(outcome.body)
    assert doc["type"] == "/problems/internal-error" and doc["request_id"] == "w-1"
    assert "Traceback" not in outcome.body.decode()
    assert api.post("/v1/smooth", json=BODY).status_code == 200


def test_problem_type_uris_resolve(api: Harness) -> None:
    doc = api.post("/v1/smooth", json={}).json()
    page = api.get(doc["type"])
    assert page.status_code == 200 and "Unprocessable Content" in page.text
    problem_ok(api.get("/problems/no-such-problem"), 404)


def test_direct_and_routed_numerical_posts_answer_alike(api: Harness) -> None:
    """The direct path for POST /v1/* and FastAPI's router (taken under a root path) give the same answer and route label."""
    root = httpx.AsyncClient(transport=httpx.ASGITransport(app=api.app, root_path="/gateway"), base_url="http://bandwise.test", timeout=60.0)
    try:
        before = _count(api, "/v1/smooth", "200")
        direct = api.post("/v1/smooth", json=BODY)
        routed = api.run(root.post("/gateway/v1/smooth", json=BODY))
        assert direct.status_code == routed.status_code == 200
        assert direct.json() == routed.json()
        assert _count(api, "/v1/smooth", "200") == before + 2
        bad_direct = api.post("/v1/bandwidth", json={"x": [1, 2], "y": [1]})
        bad_routed = api.run(root.post("/gateway/v1/bandwidth", json={"x": [1, 2], "y": [1]}))
        a, b = problem_ok(bad_direct, 422), problem_ok(bad_routed, 422)
        assert a["errors"] == b["errors"] and a["type"] == b["type"]
    finally:
        api.run(root.aclose())


def _count(api: Harness, route: str, status: str) -> float:
    value = api.service.metrics.registry.get_sample_value("bandwise_requests_total", {"route": route, "method": "POST", "status": status})
    return value or 0.0


def _pipe_text(fd: int) -> str:
    os.set_blocking(fd, False)
    try:
        return os.read(fd, 1 << 20).decode()
    except BlockingIOError:
        return ""


def test_access_log_writer_gathers_lines_and_writes_them_all() -> None:
    read_fd, write_fd = os.pipe()
    try:
        writer = AccessLogWriter(write_fd, max_bytes=1 << 20, max_delay=60.0)

        async def three_requests() -> str:
            for i in range(3):
                writer({"request_id": f"r{i}", "status": 200})
            return _pipe_text(read_fd)  # inside a loop, nothing is written yet

        assert asyncio.run(three_requests()) == ""
        writer.flush()
        lines = _pipe_text(read_fd).splitlines()
        assert [json.loads(line)["request_id"] for line in lines] == ["r0", "r1", "r2"]
        assert all(json.loads(line)["logger"] == "bandwise.access" for line in lines)
        writer({"request_id": "outside-a-loop"})  # no running loop: written at once
        assert json.loads(_pipe_text(read_fd))["request_id"] == "outside-a-loop"
    finally:
        os.close(read_fd)
        os.close(write_fd)


def test_access_log_writer_writes_on_size_and_on_its_timer() -> None:
    read_fd, write_fd = os.pipe()
    try:
        writer = AccessLogWriter(write_fd, max_bytes=300, max_delay=0.05)

        async def run() -> tuple[list[str], str]:
            for i in range(5):  # each line is ~100 bytes: the third one passes 300
                writer({"request_id": f"s{i}"})
            by_size = _pipe_text(read_fd).splitlines()
            text = ""
            for _ in range(200):  # the rest arrives by the timer; bounded wait
                await asyncio.sleep(0.01)
                text += _pipe_text(read_fd)
                if text.count("\n") == 2:
                    break
            return by_size, text

        by_size, later = asyncio.run(run())
        assert [json.loads(line)["request_id"] for line in by_size] == ["s0", "s1", "s2"]
        assert [json.loads(line)["request_id"] for line in later.splitlines()] == ["s3", "s4"]
    finally:
        os.close(read_fd)
        os.close(write_fd)


def test_generated_request_ids_are_distinct_across_many_requests(api: Harness) -> None:
    ids = {api.get("/healthz").headers["x-request-id"] for _ in range(200)}
    assert len(ids) == 200 and all(len(i) == 32 and int(i, 16) >= 0 for i in ids)


def test_client_that_disconnects_before_its_body_arrives_is_a_499_not_an_error(api: Harness, caplog: pytest.LogCaptureFixture) -> None:
    sent: list[dict] = []

    async def receive() -> dict:
        return {"type": "http.disconnect"}

    async def send(message: dict) -> None:
        sent.append(message)

    scope = {
        "type": "http", "asgi": {"version": "3.0"}, "http_version": "1.1", "method": "POST", "scheme": "http",
        "path": "/v1/smooth", "raw_path": b"/v1/smooth", "root_path": "", "query_string": b"",
        "headers": [(b"host", b"bandwise.test"), (b"content-type", b"application/json"), (b"content-length", b"100"), (b"x-request-id", b"gone-1")],
        "client": ("127.0.0.1", 50000), "server": ("127.0.0.1", 8000),
    }
    caplog.set_level(logging.INFO, logger="bandwise")
    before = api.service.metrics.registry.get_sample_value("bandwise_requests_total", {"route": "/v1/smooth", "method": "POST", "status": "499"}) or 0.0
    api.run(api.app(scope, receive, send))
    assert sent == []  # nothing can reach a client that has gone
    assert not [r for r in caplog.records if r.name == "bandwise.error"]
    after = api.service.metrics.registry.get_sample_value("bandwise_requests_total", {"route": "/v1/smooth", "method": "POST", "status": "499"})
    assert after == before + 1
    assert api.post("/v1/smooth", json=BODY).status_code == 200
