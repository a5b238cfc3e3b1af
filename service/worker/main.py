"""Worker process: receives :class:`~service.contract.jobs.Job` objects, sends back :class:`~service.contract.jobs.Outcome`.

Each worker owns one end of a pipe.  It parses, validates and computes in its
own interpreter, so a heavy fit holds neither the event loop nor the GIL of
the HTTP process.  This module stays light (the composition root imports it
to name the target); the forkserver preloads :mod:`service.worker.handlers`
(and with it numpy and ``estimators``) once, so new workers fork in milliseconds.
"""

from __future__ import annotations

import os
import signal
from multiprocessing.connection import Connection
from typing import Any

from service.contract.jobs import Job
from service.runtime.allocator import tune_allocator


def yield_to_http(nice: int) -> bool:
    """Let the HTTP process run first when the CPU is short: batch scheduling and ``nice`` more niceness.

    A worker woken by a new job would otherwise preempt the HTTP process on
    its core (measured: 0.6 involuntary switches per small request, 0.06
    after), and under load the event loop would get an equal share with each
    worker.  As a batch task (Linux ``SCHED_BATCH``) with lower priority a
    worker takes the CPU the HTTP process leaves; with spare cores nothing
    changes.  Neither needs privileges.  ``nice == 0`` leaves scheduling as
    it is.  Returns whether both settings took effect.
    """
    if nice <= 0:
        return False
    try:
        os.sched_setscheduler(0, os.SCHED_BATCH, os.sched_param(0))
        os.nice(nice)
        return True
    except (AttributeError, OSError):
        return False


def worker_main(conn: Connection, config: dict[str, Any]) -> None:
    """Serve jobs on ``conn`` until it closes or a ``None`` message arrives.

    Parameters
    ----------
    conn : Connection
        Pipe end shared with the HTTP process.
    config : dict
        ``limits``, ``gzip_min_bytes``, ``gzip_level``, ``log_level`` and ``worker_nice``.
    """
    # Ctrl+C in a terminal reaches the whole process group; the HTTP process
    # decides when workers stop (it drains first), so ignore SIGINT here.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    tune_allocator()
    yield_to_http(int(config.get("worker_nice", 0)))
    from service.runtime.logs import configure_logging
    from service.worker import handlers

    configure_logging(config.get("log_level", "info"))
    ctx = handlers.JobContext(config["limits"], config["gzip_min_bytes"], config["gzip_level"])
    conn.send(("ready", os.getpid()))
    while True:
        try:
            job = conn.recv()
        except (EOFError, OSError):
            break
        if not isinstance(job, Job):
            break
        outcome = handlers.run_job(job, ctx)
        try:
            conn.send(outcome)
        except (BrokenPipeError, OSError):
            break
    conn.close()
