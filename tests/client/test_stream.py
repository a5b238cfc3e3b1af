"""``stream_batch``: each series' answer as the service finishes it (NDJSON lines), sync and async.

In process for the logic; against a real ``bandwise serve`` with two workers
on loopback for the stream as it travels over HTTP/1.1 chunked transfer
(RFC 9112, section 7.1).
"""

from __future__ import annotations

import asyncio
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import httpx
import pytest

from estimators.demo import cold_store
from service.client import AsyncBandwiseClient, BandwiseClient, SlotAnswer, UnexpectedResponse, ValidationFailed
from service.client.stream import read_line
from tests.deploy.support import free_port, start_replica, stop, wait_until_ok

from .conftest import API_KEY, InProcessApp

DEMO = cold_store()
X, Y = DEMO.x[::20].tolist(), DEMO.y[::20].tolist()


def fleet(count: int) -> list[dict[str, Any]]:
    """``count`` cold-store series (each shifted); the third names a kernel the service does not have
    (sent by clients made with ``validate=False``, so the service answers it)."""
    series: list[dict[str, Any]] = [{"x": X, "y": [v + i for v in Y], "curve": {"points": 20}} for i in range(count)]
    series[2] = {"x": X, "y": Y, "kernel": "harbour"}
    return series


def check_one_per_series(answers: list[SlotAnswer], count: int) -> dict[int, SlotAnswer]:
    indices = [a.index for a in answers]
    assert sorted(indices) == list(range(count)), "one answer per series, none missing or repeated"
    return {a.index: a for a in answers}


def test_read_line_keeps_the_index_and_refuses_lines_outside_the_contract() -> None:
    problem = read_line(b'{"index": 3, "problem": {"type": "/problems/deadline-exceeded", "title": "Service Unavailable", "status": 503, "detail": "later"}}', offset=10)
    assert problem.index == 13 and not problem.ok and problem.retryable
    assert problem.error is not None and problem.error.slug == "deadline-exceeded"
    refused = read_line(b'{"index": 0, "problem": {"type": "/problems/validation-error", "title": "Unprocessable Content", "status": 422, "detail": "no"}}')
    assert not refused.retryable
    for line in (b"not json", b'{"problem": {}}', b'{"index": "0"}', b"[1, 2]"):
        with pytest.raises(UnexpectedResponse):
            read_line(line)


def test_sync_stream_gives_each_series_the_answer_smooth_batch_gives(app: InProcessApp) -> None:
    series = fleet(6)
    with app.client(api_key=API_KEY, validate=False) as bw:
        answers = check_one_per_series(list(bw.stream_batch(series)), len(series))
        batch = bw.smooth_batch(series)  # reference: the same series as one JSON answer
    for i, slot in enumerate(batch.results):
        answer = answers[i]
        if i == 2:
            assert answer.error is not None and answer.result is None
            assert answer.error.slug == batch.errors()[2].slug == "validation-error"
        else:
            assert answer.result == slot


def test_async_stream_gives_each_series_once(app: InProcessApp) -> None:
    series = fleet(5)

    async def work(bw: AsyncBandwiseClient) -> list[SlotAnswer]:
        return [answer async for answer in bw.stream_batch(series)]

    answers = check_one_per_series(app.run_async(work, api_key=API_KEY, validate=False), len(series))
    assert [i for i, a in answers.items() if not a.ok] == [2]


def test_stream_refuses_invalid_input_before_sending(app: InProcessApp) -> None:
    with app.client(api_key=API_KEY) as bw, pytest.raises(ValidationFailed):
        list(bw.stream_batch([{"x": X}]))


# ---------------------------------------------------------------- over real HTTP


@pytest.fixture(scope="module")
def two_workers(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """``bandwise serve`` with two workers on a free loopback port."""
    port = free_port()
    log = Path(tmp_path_factory.mktemp("stream")) / "bandwise.log"
    process = start_replica(port, log, {"BANDWISE_WORKERS": "2", "BANDWISE_ACCESS_LOG": "false", "BANDWISE_DRAIN_SECONDS": "1"})
    url = f"http://127.0.0.1:{port}"
    try:
        wait_until_ok(f"{url}/readyz", process, timeout=60.0)
        yield url
    finally:
        stop(process)


def heavy_fleet(count: int) -> list[dict[str, Any]]:
    """Cold-store series with simultaneous bootstrap bands: seconds of work over the batch, so its groups finish apart."""
    full_x, full_y = DEMO.x.tolist(), DEMO.y.tolist()
    return [{"x": full_x, "y": [v + i for v in full_y], "bands": {"method": "wild_bootstrap", "replicates": 300, "simultaneous": True, "seed": i}} for i in range(count)]


@pytest.mark.system
def test_first_answers_arrive_while_the_batch_is_still_computing(two_workers: str) -> None:
    series = heavy_fleet(24)
    answers: list[SlotAnswer] = []
    busy_at_first = -1.0
    with BandwiseClient(two_workers) as bw:
        for answer in bw.stream_batch(series):
            if not answers:
                metrics = httpx.get(f"{two_workers}/metrics", timeout=10.0).text
                busy_at_first = float(next(line for line in metrics.splitlines() if line.startswith("bandwise_work_in_flight")).split()[-1])
            answers.append(answer)
    check_one_per_series(answers, len(series))
    assert all(a.ok for a in answers), [a.error for a in answers if a.error][:2]
    assert busy_at_first > 0, "the first answers came before the last group was computed"


@pytest.mark.system
def test_async_stream_over_http_gives_each_series_once(two_workers: str) -> None:
    series = fleet(8)

    async def main() -> list[SlotAnswer]:
        async with AsyncBandwiseClient(two_workers, validate=False) as bw:
            return [answer async for answer in bw.stream_batch(series)]

    answers = check_one_per_series(asyncio.run(main()), len(series))
    assert [i for i, a in answers.items() if not a.ok] == [2]


def _metric(url: str, prefix: str) -> float:
    text = httpx.get(f"{url}/metrics", timeout=10.0).text
    return float(next(line for line in text.splitlines() if line.startswith(prefix)).split()[-1])


@pytest.mark.system
def test_a_reader_that_leaves_stops_the_groups_still_computing(two_workers: str) -> None:
    cancelled = 'bandwise_worker_restarts_total{reason="cancelled"}'
    before = _metric(two_workers, cancelled)
    with httpx.stream("POST", f"{two_workers}/v1/smooth/batch", json={"series": heavy_fleet(24)}, headers={"accept": "application/x-ndjson"}, timeout=120.0) as response:
        assert response.status_code == 200
        first = next(line for line in response.iter_lines() if line)
        assert "index" in first
    # the connection is closed: the groups still computing are stopped, their workers replaced
    for _ in range(200):  # at most about 20 s
        if _metric(two_workers, cancelled) > before:
            break
        time.sleep(0.1)
    assert _metric(two_workers, cancelled) > before
    for _ in range(600):  # the replaced workers start again, for the tests after this one (at most about 60 s)
        if _metric(two_workers, "bandwise_workers_ready") == 2:
            break
        time.sleep(0.1)
