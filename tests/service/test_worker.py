"""Worker process pieces that are not reached through HTTP."""

from __future__ import annotations

import ctypes.util
import os
import sys

import pytest

from service.runtime.allocator import tune_allocator


@pytest.mark.skipif(not sys.platform.startswith("linux") or ctypes.util.find_library("c") is None, reason="glibc mallopt only")
def test_allocator_tuning_is_accepted_by_glibc() -> None:
    # mallopt returns 1 on success (glibc manual, "Malloc Tunable Parameters").
    assert tune_allocator() is True


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="SCHED_BATCH is Linux scheduling")
@pytest.mark.parametrize("nice", [0, 5])
def test_workers_run_as_batch_tasks_behind_the_http_process(nice: int) -> None:
    # sched(7): SCHED_BATCH threads are "mildly disfavored in scheduling decisions" on wakeup;
    # setpriority(2): raising one's own niceness needs no privilege.
    from .conftest import Harness

    h = Harness(workers=1, worker_nice=nice)
    try:
        pids = [w.pid for w in h.service.pool._all]
        assert len(pids) == 1
        expected_policy = os.SCHED_BATCH if nice else os.SCHED_OTHER
        assert os.sched_getscheduler(pids[0]) == expected_policy
        assert os.getpriority(os.PRIO_PROCESS, pids[0]) - os.getpriority(os.PRIO_PROCESS, 0) == nice
        assert os.sched_getscheduler(0) == os.SCHED_OTHER  # the HTTP side keeps the default policy
        assert h.post("/v1/smooth", json={"x": [1, 2, 3, 4], "y": [1, 3, 2, 4], "bandwidth": 1.5}).status_code == 200
    finally:
        h.close()


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="net.core.wmem_max is a Linux setting")
def test_worker_sockets_ask_for_buffers_a_large_body_fits_in() -> None:
    # socket(7): SO_SNDBUF/SO_RCVBUF are capped at net.core.wmem_max/rmem_max, and Linux reports
    # twice the value set (room for bookkeeping). The default (net.core.wmem_default) is what
    # a socket pair gets without asking.
    import socket
    from pathlib import Path

    from service.http.pool import _SOCKET_BUFFER

    from .conftest import Harness

    caps = {name: int(Path(f"/proc/sys/net/core/{name}").read_text()) for name in ("wmem_max", "rmem_max", "wmem_default")}
    h = Harness(workers=1)
    try:
        worker = next(iter(h.service.pool._all))
        sock = worker.writer.get_extra_info("socket")
        sent = sock.getsockopt(socket.SOL_SOCKET, socket.SO_SNDBUF)
        received = sock.getsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF)
        assert sent >= 2 * min(_SOCKET_BUFFER, caps["wmem_max"])
        assert received >= 2 * min(_SOCKET_BUFFER, caps["rmem_max"])
        if caps["wmem_max"] > caps["wmem_default"]:
            assert sent > 2 * caps["wmem_default"]  # asked for more than the default, and got it
    finally:
        h.close()


def test_idle_workers_leave_on_their_own_at_shutdown_and_a_busy_one_is_stopped() -> None:
    # multiprocessing.Process.exitcode: 0 after a normal return from the target, -N when ended by
    # signal N. Closing the pool closes every worker's socket; an idle worker's loop then ends and it
    # returns (0); one still computing is killed (-SIGKILL).
    import asyncio
    import signal
    import time

    import orjson

    from service.contract.jobs import Job

    from .conftest import Harness

    n = 200_000  # with 5,000 bootstrap replicates: about 10^9 point-replicates, still running at shutdown
    heavy = orjson.dumps({"x": list(range(n)), "y": [i % 2 for i in range(n)], "bandwidth": 50.0, "kernel": "epanechnikov", "bands": {"replicates": 5000}})
    h = Harness(workers=2)
    pool = h.service.pool
    processes = [w.process for w in pool._all]
    running = asyncio.run_coroutine_threadsafe(pool.run(Job("smooth", heavy), 120.0), h.loop)
    try:
        stop = time.monotonic() + 30
        while pool.busy != 1:
            assert time.monotonic() < stop, "the heavy job never started"
            time.sleep(0.01)
    finally:
        h.close()
    try:
        running.result(30)
    except Exception:  # noqa: BLE001 - the job's own fate at shutdown is not what this test checks
        pass
    codes = sorted(p.exitcode for p in processes)
    assert codes == [-signal.SIGKILL, 0]
