"""``smooth_many`` through the gateway to three replicas, one killed mid-run: every series answered exactly once.

Three real replicas (``bandwise serve --host 127.0.0.1 --port P``) sit behind
the system's nginx running ``deploy/gateway/nginx.conf`` rendered to loopback
ports. The client fans a fleet of cold-store series out over several
connections; once a quarter of the answers are in, one replica and its workers
are killed (SIGKILL). Batches in flight there are resent by the gateway or by
the client. Every series must come back exactly once, with its fit, and the
gateway's access log must show batches answered by every replica before the
kill. All traffic stays on 127.0.0.0/8; loops are bounded by the series count.
"""

from __future__ import annotations

import re
from collections import Counter
from pathlib import Path
from typing import Any

import pytest

from estimators.demo import cold_store
from service.client import BandwiseClient, RetryPolicy, SlotAnswer
from tests.conftest import require_program
from tests.deploy.support import free_port, start_gateway, start_replica, stop, wait_until_ok
from tests.system.test_failover import kill_group

SERIES = 180
KILL_AFTER = SERIES // 4  # answers received before the kill
REPLICA_ENV = {"BANDWISE_WORKERS": "1", "BANDWISE_ACCESS_LOG": "false", "BANDWISE_DRAIN_SECONDS": "2"}


def fleet() -> list[dict[str, Any]]:
    """Cold-store logs from differently seeded days: automatic bandwidth, a 60-point curve each."""
    series = []
    for seed in range(SERIES):
        day = cold_store(seed=seed)
        series.append({"x": day.x[::2].round(2), "y": day.y[::2].round(3), "curve": {"points": 60}})
    return series


def upstreams(access_log: Path) -> list[list[str]]:
    """For every proxied request in the gateway's access log, the replicas it tried, in order."""
    found: list[list[str]] = []
    for line in access_log.read_text(encoding="utf-8", errors="replace").splitlines():
        match = re.search(r'upstream="([^"]*)"', line)
        if match and match.group(1) != "-":
            found.append([a.strip() for a in re.split(r"[,:]\s", match.group(1))])
    return found


@pytest.mark.system
def test_every_series_is_answered_once_when_a_replica_dies_mid_run(tmp_path: Path) -> None:
    nginx = require_program("nginx")
    ports = [free_port() for _ in range(3)]
    gateway_port = free_port()
    replicas = [start_replica(port, tmp_path / f"replica-{port}.log", REPLICA_ENV) for port in ports]
    gateway_proc = None
    try:
        for port, proc in zip(ports, replicas, strict=True):
            wait_until_ok(f"http://127.0.0.1:{port}/readyz", proc, timeout=60.0)
        gateway_proc = start_gateway(nginx, tmp_path / "gateway", gateway_port, ports)
        wait_until_ok(f"http://127.0.0.1:{gateway_port}/gateway/healthz", gateway_proc, timeout=10.0)
        series = fleet()
        answers: list[SlotAnswer] = []
        before_kill: list[list[str]] = []
        retry = RetryPolicy(attempts=6, backoff=0.2, max_backoff=2.0, total=60.0)
        with BandwiseClient(f"http://127.0.0.1:{gateway_port}", retry=retry, timeout=60.0) as bw:
            for answer in bw.smooth_many(series, connections=6, batch_series=6):
                answers.append(answer)
                if len(answers) == KILL_AFTER:
                    before_kill = upstreams(tmp_path / "gateway" / "access.log")
                    replicas[0].kill()
                    kill_group(replicas[0])
        seen = Counter(a.index for a in answers)
        assert sorted(seen) == list(range(SERIES)), "every series answered"
        assert max(seen.values()) == 1, "no series answered twice"
        failed = [(a.index, a.error) for a in answers if not a.ok]
        assert not failed, failed[:3]
        assert {f"127.0.0.1:{p}" for p in ports} <= {u for tried in before_kill for u in tried}, "every replica took batches before the kill"
        dead = f"127.0.0.1:{ports[0]}"
        after = upstreams(tmp_path / "gateway" / "access.log")[len(before_kill) :]
        assert any(dead in tried[:-1] for tried in after), "some batch met the dead replica and went on to another"
        assert replicas[0].wait(10) is not None
        after_kill = len(answers) - KILL_AFTER
        assert after_kill > 0
        print(f"\n{SERIES} series in batches of 6 over 6 connections; {KILL_AFTER} answered before the kill, {after_kill} after")
    finally:
        if gateway_proc is not None:
            stop(gateway_proc)
        for proc in replicas:
            stop(proc)
            kill_group(proc)
