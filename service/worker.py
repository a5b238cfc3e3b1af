"""Worker process: receives :class:`~service.jobs.Job` objects, sends back :class:`~service.jobs.Outcome`.

Each worker owns one end of a pipe.  It parses, validates and computes in its
own interpreter, so a heavy fit holds neither the event loop nor the GIL of
the HTTP process.  This module stays light (the HTTP process imports it to
name the target); the forkserver preloads :mod:`service.handlers` (and with it
numpy and ``estimators``) once, so new workers fork in milliseconds.
"""

from __future__ import annotations

import os
import signal
from multiprocessing.connection import Connection
from typing import Any

from .jobs import Job


_M_TRIM_THRESHOLD = -1
_M_MMAP_THRESHOLD = -3
_MMAP_THRESHOLD = 64 * 1024 * 1024
_TRIM_THRESHOLD = 256 * 1024 * 1024


def tune_allocator() -> bool:
    """Keep freed array memory for reuse instead of unmapping it after every request (glibc only).

    By default glibc hands large blocks (an array of 100,000 doubles is one) to
    ``mmap`` and returns them on ``free``, so every request pays page faults to
    get zeroed pages again: about a fifth of the time of a 1e5-point fit.  With
    blocks up to 64 MiB served from the heap and the heap trimmed only beyond
    256 MiB of free space, a worker reuses its memory from one request to the
    next.  Returns False where ``mallopt`` is not available.
    """
    try:
        import ctypes

        libc = ctypes.CDLL("libc.so.6")
        ok = libc.mallopt(_M_MMAP_THRESHOLD, _MMAP_THRESHOLD) == 1
        ok = libc.mallopt(_M_TRIM_THRESHOLD, _TRIM_THRESHOLD) == 1 and ok
        return ok
    except (OSError, AttributeError):
        return False


def worker_main(conn: Connection, config: dict[str, Any]) -> None:
    """Serve jobs on ``conn`` until it closes or a ``None`` message arrives.

    Parameters
    ----------
    conn : Connection
        Pipe end shared with the HTTP process.
    config : dict
        ``limits``, ``gzip_min_bytes``, ``gzip_level`` and ``log_level``.
    """
    # Ctrl+C in a terminal reaches the whole process group; the HTTP process
    # decides when workers stop (it drains first), so ignore SIGINT here.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    tune_allocator()
    from . import handlers
    from .logs import configure_logging

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
