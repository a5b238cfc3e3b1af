"""Bounded pool: queue full -> 503 at once; deadline -> work stopped, 503; service recovers.

One worker, a waiting room of one, and a short deadline.  The heavy job is
two million points with 5,000 bootstrap replicates: at least 10^10 kernel
evaluations, so it cannot finish within the deadline on any machine.
"""

from __future__ import annotations

import os
import signal
import time
from collections.abc import Iterator

import orjson
import pytest

from .conftest import Harness, problem_ok

SMALL = {"x": [1.0, 2.0, 3.0, 4.0, 5.0], "y": [2.0, 1.0, 2.0, 3.0, 2.0], "bandwidth": 1.0}
N_HEAVY = 2_000_000


@pytest.fixture(scope="module")
def tight() -> Iterator[Harness]:
    h = Harness(workers=1, queue_size=1, deadline_seconds=2.0, retry_after_seconds=3)
    yield h
    h.close()


@pytest.fixture(scope="module")
def heavy_body() -> bytes:
    x = list(range(N_HEAVY))
    y = [i % 2 for i in range(N_HEAVY)]
    return orjson.dumps({"x": x, "y": y, "bandwidth": 50.0, "engine": "exact", "bands": {"replicates": 5000}})


def _value(metrics: str, name: str) -> float:
    for line in metrics.splitlines():
        if line.startswith(name + " "):
            return float(line.rsplit(" ", 1)[1])
    raise AssertionError(f"{name} not in metrics")


def _wait_for(predicate, limit: float = 30.0) -> None:  # type: ignore[no-untyped-def]
    stop = time.monotonic() + limit
    while not predicate():
        assert time.monotonic() < stop, "condition not reached"
        time.sleep(0.005)


def test_queue_full_is_refused_at_once_and_deadline_stops_the_work(tight: Harness, heavy_body: bytes) -> None:
    pool = tight.service.pool
    heavy = tight.submit("POST", "/v1/smooth", content=heavy_body, headers={"content-type": "application/json"})
    _wait_for(lambda: pool.busy == 1)
    queued = tight.submit("POST", "/v1/smooth", json=SMALL)
    _wait_for(lambda: pool.waiting == 1)

    # Worker busy, waiting room full: the next request is refused without waiting.
    refused = tight.post("/v1/smooth", json=SMALL)
    doc = problem_ok(refused, 503)
    assert doc["type"] == "/problems/overloaded"
    assert refused.headers["retry-after"] == "3"
    assert not heavy.done()  # refused while the heavy job was still running

    # Liveness does not depend on the workers.
    assert tight.get("/healthz").status_code == 200

    heavy_response = heavy.result(60)
    doc = problem_ok(heavy_response, 503)
    assert doc["type"] == "/problems/deadline-exceeded"
    assert heavy_response.headers["retry-after"] == "3"
    assert queued.result(60).status_code in (200, 503)

    # The stuck worker was killed and replaced; the service answers again.
    assert tight.run(pool.wait_ready(30.0))
    assert tight.post("/v1/smooth", json=SMALL).status_code == 200
    metrics = tight.get("/metrics").text
    # The heavy job was stopped; the queued one may have run out of time too.
    assert _value(metrics, 'bandwise_worker_restarts_total{reason="deadline"}') >= 1
    assert _value(metrics, 'bandwise_requests_shed_total{reason="queue_full"}') == 1
    assert _value(metrics, 'bandwise_requests_shed_total{reason="deadline"}') >= 1


def test_worker_that_dies_while_idle_is_replaced_before_use(tight: Harness) -> None:
    pool = tight.service.pool
    assert tight.run(pool.wait_ready(30.0))
    before = _value(tight.get("/metrics").text, 'bandwise_worker_restarts_total{reason="died"}')
    victim = pool._idle[0]
    victim.process.kill()
    victim.process.join(5)
    # The request waits for the replacement instead of failing on the dead worker.
    assert tight.post("/v1/smooth", json=SMALL).status_code == 200
    after = _value(tight.get("/metrics").text, 'bandwise_worker_restarts_total{reason="died"}')
    assert after == before + 1


@pytest.mark.parametrize(
    ("sig", "status", "problem"),
    [
        (signal.SIGABRT, 500, "internal-error"),  # the worker crashed: a bug
        (signal.SIGKILL, 503, "out-of-memory"),  # killed from outside, as by the out-of-memory killer at a memory limit
    ],
)
def test_worker_that_dies_during_a_job_gives_a_problem_with_the_request_id(tight: Harness, sig: int, status: int, problem: str) -> None:
    import threading

    pool = tight.service.pool
    assert tight.run(pool.wait_ready(30.0))
    victim = pool._idle[0]
    body = {"x": [float(i) for i in range(200_000)], "y": [float(i % 7) for i in range(200_000)], "bandwidth": 30.0, "bands": {"replicates": 5000}}
    pending = tight.submit("POST", "/v1/smooth", json=body, headers={"x-request-id": "lost-1"})
    _wait_for(lambda: pool.busy == 1)
    threading.Timer(0.05, os.kill, (victim.process.pid, sig)).start()
    response = pending.result(60)
    doc = problem_ok(response, status)
    assert doc["request_id"] == "lost-1" and doc["type"] == f"/problems/{problem}"
    assert int(response.headers["retry-after"]) >= 1  # the job changed nothing, so a retry is safe
    assert tight.run(pool.wait_ready(30.0))
    assert tight.post("/v1/smooth", json=SMALL).status_code == 200


def test_cancelled_request_does_not_leak_its_worker(tight: Harness, heavy_body: bytes) -> None:
    pool = tight.service.pool
    assert tight.run(pool.wait_ready(30.0))
    before = tight.get("/metrics").text
    job = tight.run(_start_heavy(tight, heavy_body))
    _wait_for(lambda: pool.busy == 1)
    tight.loop.call_soon_threadsafe(job.cancel)
    _wait_for(lambda: pool.busy == 0)
    # The worker was in the middle of a job: it is replaced, never handed out again half-way.
    assert tight.run(pool.wait_ready(30.0))
    assert tight.post("/v1/smooth", json=SMALL).status_code == 200
    after = tight.get("/metrics").text
    name = 'bandwise_worker_restarts_total{reason="cancelled"}'
    assert _value(after, name) == _value(before, name) + 1


async def _start_heavy(h: Harness, body: bytes):  # type: ignore[no-untyped-def]
    import asyncio

    return asyncio.ensure_future(h.client.post("/v1/smooth", content=body, headers={"content-type": "application/json"}))


def test_requests_queued_on_one_worker_each_get_their_own_answer() -> None:
    # One worker and a waiting room of eight: each released worker is handed the next
    # waiting job at once, so answers must still match their requests one for one.
    h = Harness(workers=1, queue_size=8, deadline_seconds=30.0)
    try:
        sizes = [5 + i for i in range(8)]
        bodies = [{"x": [float(j) for j in range(n)], "y": [float(j % 3) for j in range(n)], "bandwidth": 1.5} for n in sizes]
        futures = [h.submit("POST", "/v1/smooth", json=b) for b in bodies]
        answers = [f.result(60) for f in futures]
        assert [a.status_code for a in answers] == [200] * len(sizes)
        assert [a.json()["diagnostics"]["n"] for a in answers] == sizes
        assert h.service.pool.waiting == 0 and h.service.pool.busy == 0
    finally:
        h.close()
