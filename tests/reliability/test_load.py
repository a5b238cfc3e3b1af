"""Bounded load against a real server process (``bandwise serve``), from an asyncio httpx generator.

Three bursts of about 5.5 s each (about 20 s with the pauses), 32 concurrent
clients, two worker processes. Each client sends a mix of

* small series (60 cold-store readings, automatic bandwidth),
* medium series (4,000 readings, automatic bandwidth, predictions),
* series with bands (300 readings, 200 wild-bootstrap replicates),
* invalid bodies (broken JSON, a NaN token, unequal lengths, a misspelt field).

Expected answers: 200 for valid bodies, a 4xx problem for invalid ones; the
only other answer allowed is 503 carrying ``Retry-After`` (load shed by the
bounded worker pool). Any other status, a missing ``Retry-After``, a timeout
or a connection error is a failure. After a 503 a client waits a short
jittered moment (shorter than ``Retry-After``, to keep the pressure on).

Reported: p99 latency of small requests, the answer mix, peak RSS of the
server process tree (psutil, sampled every 100 ms). Checked: peak RSS under
``PEAK_RSS_BOUND_MIB``, and RSS after the third burst within 10 % of RSS after
the first (no growth from burst to burst). Every loop is bounded in count and
time; all traffic goes to 127.0.0.1.
"""

from __future__ import annotations

import asyncio
import json
import random
import time
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

import httpx
import psutil
import pytest

from estimators.demo import cold_store
from tests.deploy.support import free_port, start_replica, stop, wait_until_ok

from .figures import record

pytestmark = pytest.mark.system

CLIENTS = 32
BURSTS = 3
BURST_SECONDS = 5.5
PAUSE_SECONDS = 1.5
MAX_REQUESTS_PER_CLIENT_PER_BURST = 400
REQUEST_TIMEOUT = 60.0
KEEPALIVE_EXPIRY = 2.0  # below the server's keep-alive timeout (uvicorn: 5 s)
WORKERS = 2
PEAK_RSS_BOUND_MIB = 1024
LEAK_TOLERANCE = 0.10
MIB = 1024 * 1024
JSON = {"content-type": "application/json"}


def _series(n: int, seed: int) -> dict[str, list[float]]:
    demo = cold_store(seed=seed)
    reps = -(-n // len(demo.x))
    x = [float(v) for _ in range(reps) for v in demo.x][:n]
    y = [float(v) for _ in range(reps) for v in demo.y][:n]
    return {"x": [round(v, 3) for v in x], "y": [round(v, 3) for v in y]}


def _bodies() -> dict[str, list[bytes]]:
    small = [{**_series(60, s), "kernel": "epanechnikov", "curve": {"points": 50}} for s in range(4)]
    medium = [{**_series(4000, s), "kernel": "gaussian", "curve": {"points": 200}, "predict_at": [-5.0, 10.0, 30.0]} for s in range(2)]
    bands = [{**_series(300, s), "kernel": "biweight", "bandwidth": 3.0, "bands": {"method": "wild_bootstrap", "replicates": 200, "seed": s}} for s in range(2)]
    good = _series(30, 9)
    invalid = [
        b'{"x": [1, 2, 3], "y": [1, 2',
        b'{"x": [1, NaN, 3], "y": [1, 2, 3]}',
        json.dumps({"x": good["x"], "y": good["y"][:-3]}).encode(),
        json.dumps({**good, "bandwith": 2.0}).encode(),
    ]
    return {
        "small": [json.dumps(b).encode() for b in small],
        "medium": [json.dumps(b).encode() for b in medium],
        "bands": [json.dumps(b).encode() for b in bands],
        "invalid": invalid,
    }


MIX = ["small"] * 4 + ["medium"] * 2 + ["bands"] * 2 + ["invalid"] * 2


@dataclass
class Log:
    answers: Counter[tuple[str, int]] = field(default_factory=Counter)
    latencies: dict[str, list[float]] = field(default_factory=lambda: {k: [] for k in ("small", "medium", "bands", "invalid")})
    failures: list[str] = field(default_factory=list)


def _judge(kind: str, response: httpx.Response) -> str | None:
    """None when the answer is allowed, else what is wrong with it."""
    status = response.status_code
    if status == 503:
        return None if response.headers.get("retry-after") else "503 without Retry-After"
    if kind == "invalid":
        if status in (400, 422) and response.headers.get("content-type", "").startswith("application/problem+json"):
            return None
        return f"invalid body answered {status}: {response.text[:200]}"
    if status == 200:
        return None
    return f"{kind} answered {status}: {response.text[:200]}"


async def _client(index: int, url: str, client: httpx.AsyncClient, bodies: dict[str, list[bytes]], until: float, log: Log) -> None:
    rng = random.Random(index)
    for _ in range(MAX_REQUESTS_PER_CLIENT_PER_BURST):
        if time.monotonic() >= until:
            return
        kind = rng.choice(MIX)
        body = rng.choice(bodies[kind])
        started = time.perf_counter()
        try:
            response = await client.post(url, content=body, headers=JSON)
        except httpx.HTTPError as exc:
            log.failures.append(f"{kind}: {exc!r}")
            continue
        elapsed = time.perf_counter() - started
        log.answers[(kind, response.status_code)] += 1
        if response.status_code != 503:
            log.latencies[kind].append(elapsed)
        wrong = _judge(kind, response)
        if wrong:
            log.failures.append(wrong)
        if response.status_code == 503:
            await asyncio.sleep(rng.uniform(0.1, 0.4))


def _tree_rss(process: psutil.Process) -> int:
    total = 0
    for proc in [process, *process.children(recursive=True)]:
        try:
            total += proc.memory_info().rss
        except psutil.NoSuchProcess:
            pass
    return total


async def _sample_rss(process: psutil.Process, stop_event: asyncio.Event, peak: list[int]) -> None:
    while not stop_event.is_set():
        peak[0] = max(peak[0], _tree_rss(process))
        try:
            await asyncio.wait_for(stop_event.wait(), 0.1)
        except TimeoutError:
            pass


async def _load(base: str, process: psutil.Process) -> tuple[Log, list[int], int]:
    bodies = _bodies()
    log = Log()
    after_burst: list[int] = []
    peak = [0]
    stop_event = asyncio.Event()
    # RFC 9112, 9.6: either side may close an idle connection at any time, so a POST sent on a
    # connection the server is closing at that moment fails without an answer. The server closes
    # connections idle for uvicorn's keep-alive timeout (5 s); idle ones between bursts can reach
    # it when a burst's last slow request finishes late. The client gives up its idle connections
    # first, as clients behind a keep-alive server should, so such a race cannot occur here.
    limits = httpx.Limits(max_connections=CLIENTS, max_keepalive_connections=CLIENTS, keepalive_expiry=KEEPALIVE_EXPIRY)
    async with httpx.AsyncClient(timeout=REQUEST_TIMEOUT, limits=limits) as client:
        sampler = asyncio.create_task(_sample_rss(process, stop_event, peak))
        for _ in range(BURSTS):
            until = time.monotonic() + BURST_SECONDS
            await asyncio.gather(*(_client(i, f"{base}/v1/smooth", client, bodies, until, log) for i in range(CLIENTS)))
            await asyncio.sleep(PAUSE_SECONDS)
            after_burst.append(_tree_rss(process))
        stop_event.set()
        await sampler
    return log, after_burst, peak[0]


def _percentile(values: list[float], q: float) -> float:
    ordered = sorted(values)
    rank = max(0, min(len(ordered) - 1, int(round(q * (len(ordered) - 1)))))
    return ordered[rank]


def test_bounded_load_sheds_cleanly_and_does_not_grow(tmp_path: Path) -> None:
    port = free_port()
    env = {"BANDWISE_WORKERS": str(WORKERS), "BANDWISE_ACCESS_LOG": "false", "BANDWISE_LOG_LEVEL": "warning"}
    server = start_replica(port, tmp_path / "server.log", env)
    base = f"http://127.0.0.1:{port}"
    try:
        wait_until_ok(f"{base}/readyz", server, timeout=90.0)
        log, after_burst, peak = asyncio.run(_load(base, psutil.Process(server.pid)))
        alive = server.poll() is None
    finally:
        code = stop(server)

    small = log.latencies["small"]
    answered = sum(log.answers.values())
    shed = sum(n for (_, status), n in log.answers.items() if status == 503)
    record("load: requests", f"{answered} answered in {BURSTS} bursts of {BURST_SECONDS} s, {CLIENTS} clients, {WORKERS} workers; {shed} shed with 503 + Retry-After; {len(log.failures)} failures")
    record("load: answers", json.dumps({f"{kind} {status}": n for (kind, status), n in sorted(log.answers.items())}))
    if small:
        record("load: small-request latency", f"p50 {1000 * _percentile(small, 0.50):.0f} ms, p99 {1000 * _percentile(small, 0.99):.0f} ms over {len(small)} answered small requests")
    record("load: server RSS (process tree)", f"peak {peak / MIB:.0f} MiB; after bursts 1/2/3: " + " / ".join(f"{v / MIB:.0f}" for v in after_burst) + " MiB")

    assert alive, f"server exited during the load (exit code {code})"
    assert not log.failures, f"{len(log.failures)} failures, e.g. {Counter(log.failures).most_common(5)}"
    for kind in ("small", "medium", "bands"):
        assert log.answers[(kind, 200)] > 0, f"no {kind} request was answered 200: {dict(log.answers)}"
    assert any(log.answers[("invalid", s)] for s in (400, 422)), "no invalid body reached validation"
    assert peak < PEAK_RSS_BOUND_MIB * MIB, f"peak RSS {peak / MIB:.0f} MiB over the {PEAK_RSS_BOUND_MIB} MiB bound"
    assert after_burst[-1] <= (1 + LEAK_TOLERANCE) * after_burst[0], f"RSS grew from {after_burst[0] / MIB:.0f} MiB after burst 1 to {after_burst[-1] / MIB:.0f} MiB after burst {BURSTS}"
