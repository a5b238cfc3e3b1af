"""Failover through the gateway: no client request is lost when replicas die or stop.

Three real replicas (``bandwise serve --host 127.0.0.1 --port P``, the README's
run command) sit behind the system's nginx running ``deploy/gateway/nginx.conf``
rendered to loopback ports. Eight clients send ``POST /v1/smooth`` for about
15 s; meanwhile one replica is killed (SIGKILL) and another is stopped (SIGTERM)
while a request sent to it directly is still arriving (its client sends the rest
of the body only after the signal). Every client request must succeed, that
in-flight request must be answered, and the stopped replica must exit 0.

Each client connects from its own loopback address (127.0.0.11 .. 127.0.0.18),
so the gateway's per-client rate limit applies to each one separately, as it
would to separate machines. Each client also paces itself below that limit.
All traffic stays on 127.0.0.0/8; every loop is bounded in count and time.
"""

from __future__ import annotations

import json
import os
import re
import signal
import subprocess
import threading
import time
from collections import Counter
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import httpx
import pytest

from estimators.demo import cold_store
from tests.conftest import require_program
from tests.deploy.support import free_port, start_gateway, start_replica, stop, wait_until_ok

CLIENTS = 8
LOAD_SECONDS = 15.0
KILL_AT = 4.0  # seconds into the load
TERM_AT = 7.0
MAX_REQUESTS_PER_CLIENT = 1_000
PAUSE_BETWEEN_REQUESTS = 0.04  # at most 25 requests/s per client; the gateway allows 50
DRAIN_SECONDS = 15.0
REPLICA_ENV = {
    "BANDWISE_WORKERS": "1",
    # Room for every client to wait at the last replica standing instead of being shed.
    "BANDWISE_QUEUE_SIZE": str(2 * CLIENTS),
    "BANDWISE_DRAIN_SECONDS": str(DRAIN_SECONDS),
    "BANDWISE_ACCESS_LOG": "false",
}


@dataclass
class ClientLog:
    """What one client saw."""

    statuses: Counter[int] = field(default_factory=Counter)
    errors: list[str] = field(default_factory=list)
    bad_bodies: int = 0


def smooth_request(seed: int) -> dict[str, Any]:
    """A small cold-store series: compressor kW against outdoor °C, every 20th reading."""
    demo = cold_store(seed=seed)
    return {
        "x": demo.x[::20].round(2).tolist(),
        "y": demo.y[::20].round(3).tolist(),
        "kernel": "epanechnikov",
        "degree": 1,
        "bandwidth": "auto",
        "curve": {"points": 40},
        "predict_at": [5.0, 15.0, 25.0],
    }


def long_request() -> dict[str, Any]:
    """A large request: twenty cold-store logs end to end (about 39,000 points),
    a local quadratic fit and leave-one-out selection over 200 candidate bandwidths."""
    series = [cold_store(seed=seed) for seed in range(20)]
    return {
        "x": [v for s in series for v in s.x.round(2).tolist()],
        "y": [v for s in series for v in s.y.round(3).tolist()],
        "kernel": "epanechnikov",
        "degree": 2,
        "engine": "exact",
        "bandwidth": "auto",
        "selector": "loocv",
        "candidate_count": 200,
        "curve": {"points": 2000},
    }


def run_client(index: int, gateway: str, stop_at: float, log: ClientLog) -> None:
    body = smooth_request(seed=index)
    transport = httpx.HTTPTransport(local_address=f"127.0.0.{11 + index}")
    with httpx.Client(base_url=gateway, transport=transport, timeout=30.0) as client:
        for _ in range(MAX_REQUESTS_PER_CLIENT):
            if time.monotonic() >= stop_at:
                return
            try:
                response = client.post("/v1/smooth", json=body)
            except httpx.HTTPError as exc:
                log.errors.append(repr(exc))
                continue
            log.statuses[response.status_code] += 1
            if response.status_code == 200:
                if len(response.json()["curve"]["estimate"]) != 40:
                    log.bad_bodies += 1
            elif len(log.errors) < 20:
                log.errors.append(f"{response.status_code}: {response.text[:200]}")
            time.sleep(PAUSE_BETWEEN_REQUESTS)


def upstreams_in_access_log(path: Path) -> list[list[str]]:
    """The upstream address list of every proxied request in the gateway's access log."""
    found = []
    for line in path.read_text(encoding="utf-8", errors="replace").splitlines():
        match = re.search(r'upstream="([^"]*)"', line)
        if match and match.group(1) != "-":
            found.append([a.strip() for a in re.split(r"[,:]\s", match.group(1))])
    return found


def kill_group(process: subprocess.Popen[bytes]) -> None:
    """Kill what is left of a process group this test started (e.g. worker processes)."""
    try:
        os.killpg(process.pid, signal.SIGKILL)
    except ProcessLookupError:
        pass


@pytest.mark.system
def test_no_request_is_lost_when_one_replica_dies_and_another_stops(tmp_path: Path) -> None:
    nginx = require_program("nginx")
    ports = [free_port() for _ in range(3)]
    gateway_port = free_port()
    replicas = [start_replica(port, tmp_path / f"replica-{port}.log", REPLICA_ENV) for port in ports]
    gateway_proc = None
    try:
        for port, proc in zip(ports, replicas, strict=False):
            wait_until_ok(f"http://127.0.0.1:{port}/readyz", proc)
        gateway_proc = start_gateway(nginx, tmp_path / "gateway", gateway_port, ports)
        wait_until_ok(f"http://127.0.0.1:{gateway_port}/gateway/healthz", gateway_proc, timeout=10.0)
        gateway = f"http://127.0.0.1:{gateway_port}"
        killed, stopped, survivor = replicas
        killed_port, stopped_port, _ = ports

        long_body_bytes = json.dumps(long_request()).encode()
        logs = [ClientLog() for _ in range(CLIENTS)]
        start = time.monotonic()
        threads = [
            threading.Thread(target=run_client, args=(i, gateway, start + LOAD_SECONDS, logs[i]), daemon=True)
            for i in range(CLIENTS)
        ]
        for thread in threads:
            thread.start()

        time.sleep(max(0.0, start + KILL_AT - time.monotonic()))
        requests_before_kill = upstreams_in_access_log(tmp_path / "gateway" / "access.log")
        killed.send_signal(signal.SIGKILL)

        # A request straight to the replica about to stop, in flight when SIGTERM comes:
        # its client sends the first part of the body, waits until the signal has been
        # sent, then sends the rest. Only a draining replica can still answer it.
        long_result: dict[str, Any] = {}
        upload_started = threading.Event()
        signal_sent = threading.Event()

        def slow_body() -> Iterator[bytes]:
            half = len(long_body_bytes) // 2
            yield long_body_bytes[:half]
            upload_started.set()
            signal_sent.wait(timeout=30.0)
            time.sleep(0.5)
            yield long_body_bytes[half:]

        def send_long_request() -> None:
            try:
                response = httpx.post(
                    f"http://127.0.0.1:{stopped_port}/v1/smooth",
                    content=slow_body(),
                    headers={"content-type": "application/json", "content-length": str(len(long_body_bytes))},
                    timeout=60.0,
                )
                long_result["status"] = response.status_code
                long_result["body"] = response.text[:300]
            except httpx.HTTPError as exc:
                long_result["error"] = repr(exc)
            long_result["done"] = time.monotonic()

        long_thread = threading.Thread(target=send_long_request, daemon=True)
        time.sleep(max(0.0, start + TERM_AT - 1.0 - time.monotonic()))
        long_thread.start()
        assert upload_started.wait(timeout=10.0), "the request to the replica could not be started"
        time.sleep(1.0)  # the replica has read the headers and is reading the body
        term_sent = time.monotonic()
        stopped.send_signal(signal.SIGTERM)
        signal_sent.set()

        stopped_exit = stopped.wait(timeout=DRAIN_SECONDS + 15.0)
        long_thread.join(timeout=60.0)
        for thread in threads:
            thread.join(timeout=LOAD_SECONDS + 60.0)
        assert not any(t.is_alive() for t in threads), "a client did not finish"
        assert killed.wait(timeout=10.0) == -signal.SIGKILL
        assert survivor.poll() is None, "the last replica must still be running"

        total = Counter[int]()
        for log in logs:
            total.update(log.statuses)
        errors = [e for log in logs for e in log.errors]
        print(f"gateway answers: {dict(total)}; client errors: {len(errors)}")
        assert not errors, errors[:10]
        assert set(total) == {200}, dict(total)
        assert sum(log.bad_bodies for log in logs) == 0
        assert total[200] >= CLIENTS * 10, "the clients hardly sent anything"

        # The load really was spread over all three replicas before the kill ...
        first_tries = Counter(entry[0] for entry in requests_before_kill)
        assert set(first_tries) == {f"127.0.0.1:{p}" for p in ports}, first_tries
        # ... and the gateway had to retry requests on another replica afterwards.
        all_requests = upstreams_in_access_log(tmp_path / "gateway" / "access.log")
        retried = [entry for entry in all_requests if len(entry) > 1]
        assert any(f"127.0.0.1:{killed_port}" in entry for entry in retried), "no request met the dead replica"

        # The stopped replica drained: its in-flight request was answered, then it exited 0.
        assert long_result.get("status") == 200, long_result
        assert long_result["done"] > term_sent
        assert stopped_exit == 0
    finally:
        for proc in replicas:
            stop(proc)
            kill_group(proc)
        if gateway_proc is not None:
            stop(gateway_proc)
