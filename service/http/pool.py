"""Bounded pool of worker processes for the numerical work.

Why processes and not threads: parsing a large JSON body, validating it and
the Python-level loops of a fit all hold the GIL for long stretches, so in a
thread they would stall the event loop and ``/healthz`` (see
``tests/bench/bench_service.py`` for the measurement).  In a separate process
they cannot, and a job that runs past its deadline can be stopped for real:
the process is killed and replaced.

The pool has ``size`` workers and a waiting room of ``queue_size`` requests.
A request that finds both full is refused at once (503 with Retry-After)
rather than queued without limit.  Each request has a deadline covering its
wait and its work.  A worker that finishes is handed the longest-waiting job
at once, written to its socket before the event loop goes on to answer the
request just finished, so workers do not sit idle while the loop is busy.

The HTTP process talks to each worker over a Unix socket pair with the
event loop's own non-blocking I/O (no thread hop per request, so no wait for
the GIL to change hands); the worker side uses the blocking
:class:`multiprocessing.connection.Connection`, whose framing (a 4-byte
big-endian length, or -1 and an 8-byte length for huge messages, then a
pickle) this module speaks.  Workers are forked from a forkserver that has
already imported numpy and ``estimators``, so replacing one takes
milliseconds, not the import time.  Only starting and stopping processes
happens in helper threads.
"""

from __future__ import annotations

import asyncio
import collections
import logging
import multiprocessing
import os
import pickle
import signal
import socket
import struct
import sys
import threading
import time
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Any

from service.contract.jobs import Job, Outcome, WorkerEntry

log = logging.getLogger("bandwise.pool")

STARTUP_TIMEOUT = 60.0
#: seconds a worker has to leave on its own at shutdown before it is killed
SHUTDOWN_GRACE = 1.0
_SMALL = struct.Struct("!i")
_LARGE = struct.Struct("!Q")
_STREAM_LIMIT = 1 << 20
_JOIN_LIMIT = 1 << 20  # jobs up to this size are framed by copying (cheaper than a second system call)
_SOCKET_BUFFER = 4 << 20
_BLAS_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


class PoolError(Exception):
    """Base of the pool's refusals."""


class Overloaded(PoolError):
    """All workers busy and the waiting room full."""


class DeadlineExceeded(PoolError):
    """The request ran out of time, waiting or working."""


class PoolClosed(PoolError):
    """The pool is shutting down."""


class WorkerLost(PoolError):
    """The worker process died while working on the job.

    ``killed`` is true when SIGKILL ended it from outside (the kernel's
    out-of-memory killer at the container's memory limit, most often).
    """

    def __init__(self, message: str, killed: bool = False) -> None:
        super().__init__(message)
        self.killed = killed


def _widen_buffers(fd: int, size: int = _SOCKET_BUFFER) -> None:
    """Ask for ``size``-byte send and receive buffers on a socket (the kernel caps them at its maximum).

    With the usual 208 KiB a 2.4 MB body crosses in a dozen fill-and-wake
    rounds; measured on a host whose cap is 4 MiB, one round trip of 2.4 MB
    took 1.43 ms with the default and 0.46 ms with 4 MiB buffers.  Where the
    kernel caps lower (``net.core.wmem_max``) the request is silently reduced.
    """
    sock = socket.socket(fileno=os.dup(fd))
    try:
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_SNDBUF, size)
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, size)
    except OSError:
        pass
    finally:
        sock.close()


def _frame(payload: bytes) -> bytes:
    if len(payload) <= 0x7FFFFFFF:
        return _SMALL.pack(len(payload))
    return _SMALL.pack(-1) + _LARGE.pack(len(payload))


class _Worker:
    """One worker process and the HTTP process's end of its socket."""

    def __init__(self, process: multiprocessing.process.BaseProcess, reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        self.process = process
        self.reader = reader
        self.writer = writer
        self.killed_for: str | None = None
        self.unwatch: Callable[[], object] = lambda: None

    @property
    def pid(self) -> int | None:
        return self.process.pid

    def send(self, job: Job) -> None:
        """Queue one framed job on the socket (non-blocking; the transport sends what it can now)."""
        payload = pickle.dumps(job, protocol=pickle.HIGHEST_PROTOCOL)
        if len(payload) <= _JOIN_LIMIT:
            # one write: the worker wakes to a whole message, not to a header it must then wait behind
            self.writer.write(_frame(payload) + payload)
        else:
            self.writer.write(_frame(payload))
            self.writer.write(payload)

    async def receive(self) -> Outcome:
        """Wait for the answer to the job last sent (flow control first, then the framed outcome)."""
        await self.writer.drain()
        (size,) = _SMALL.unpack(await self.reader.readexactly(_SMALL.size))
        if size == -1:
            (size,) = _LARGE.unpack(await self.reader.readexactly(_LARGE.size))
        outcome = pickle.loads(await self.reader.readexactly(size))
        if not isinstance(outcome, Outcome):
            raise RuntimeError(f"worker sent {type(outcome).__name__} instead of an outcome")
        return outcome

    def kill(self, reason: str) -> None:
        """Stop the process now (non-blocking) and close the socket."""
        self.killed_for = self.killed_for or reason
        if self.process.is_alive():
            self.process.kill()
        self.writer.close()


def _same_packages_in_forkserver() -> None:
    """Make the forkserver import this ``service`` and ``estimators``, not namesakes in the current directory.

    The forkserver is started as ``python -c ...``, which puts the current
    directory first on its ``sys.path``, and Python 3.11's forkserver does not
    adopt the parent's path; started from a project with a ``service/``
    directory, the workers would import that one and never become ready.
    ``PYTHONSAFEPATH`` (Python 3.11) drops that entry; the directory holding
    these packages goes on ``PYTHONPATH`` unless the parent finds them on a
    path entry other than its first (its script's or the current directory).
    Read when the forkserver starts, inherited by every worker.
    """
    os.environ.setdefault("PYTHONSAFEPATH", "1")
    root = str(Path(__file__).resolve().parents[2])
    current = os.environ.get("PYTHONPATH", "")
    found = {str(Path(p).resolve()) for p in [*sys.path[1:], *current.split(os.pathsep)] if p}
    if root not in found:
        os.environ["PYTHONPATH"] = root + os.pathsep + current if current else root


def _context(preload: tuple[str, ...]) -> multiprocessing.context.ForkServerContext | multiprocessing.context.SpawnContext:
    try:
        ctx = multiprocessing.get_context("forkserver")
    except ValueError:  # pragma: no cover - platforms without fork
        return multiprocessing.get_context("spawn")
    ctx.set_forkserver_preload(list(preload))
    return ctx


class WorkerPool:
    """Run :class:`Job` objects in worker processes, at most ``size`` at a time.

    Parameters
    ----------
    size : int
        Number of worker processes.
    queue_size : int
        Requests allowed to wait for a worker.
    config : dict
        Handed to the worker entry's target.
    entry : WorkerEntry
        The worker side's entry point and the modules its forkserver preloads.
    on_event : callable, optional
        Called with ``(name, label)`` for countable events: ``("restart",
        reason)``.  Must be thread-safe.
    """

    def __init__(self, size: int, queue_size: int, config: dict[str, Any], entry: WorkerEntry, on_event: Callable[[str, str], None] | None = None) -> None:
        self.size = size
        self.queue_size = queue_size
        self._config = config
        self._on_event = on_event or (lambda name, label: None)
        self._entry = entry
        self._ctx = _context(entry.preload)
        self._threads = ThreadPoolExecutor(max_workers=size + 2, thread_name_prefix="bandwise-pool")
        self._idle: list[_Worker] = []
        self._all: set[_Worker] = set()
        self._waiters: collections.deque[tuple[asyncio.Future[_Worker], Job]] = collections.deque()
        self._loop: asyncio.AbstractEventLoop | None = None
        self._closed = False
        self._starting = 0
        self._lock = threading.Lock()
        self.waiting = 0
        self.busy = 0

    # ------------------------------------------------------------ lifecycle

    async def start(self) -> None:
        """Start the workers in the background; returns at once."""
        self._loop = asyncio.get_running_loop()
        for name in _BLAS_THREAD_VARIABLES:
            # Parallelism comes from the worker count; one BLAS thread per worker avoids
            # oversubscribing the cores.  Read when the forkserver starts, inherited by every worker.
            os.environ.setdefault(name, "1")
        _same_packages_in_forkserver()
        for _ in range(self.size):
            self._spawn_later()

    async def wait_ready(self, timeout: float = STARTUP_TIMEOUT, count: int | None = None) -> bool:
        """Wait until ``count`` workers (default: all) are ready; False on timeout."""
        want = self.size if count is None else count
        deadline = time.monotonic() + timeout
        while self.ready_count < want:
            if time.monotonic() > deadline or self._closed:
                return False
            await asyncio.sleep(0.02)
        return True

    @property
    def ready_count(self) -> int:
        return len(self._all)

    @property
    def closed(self) -> bool:
        return self._closed

    async def close(self) -> None:
        """Refuse new work, fail waiting requests, stop every worker."""
        if self._closed:
            return
        self._closed = True
        while self._waiters:
            fut, _ = self._waiters.popleft()
            if not fut.done():
                fut.set_exception(PoolClosed())
        workers, self._all, self._idle = list(self._all), set(), []
        loop = asyncio.get_running_loop()
        # Closing its socket ends an idle worker's loop, so it exits as a process should (and
        # flushes what it holds). A worker still computing is killed at once by the request
        # waiting on it (its read fails); one that has not left within the grace is killed here.
        for w in workers:
            w.unwatch()
            w.killed_for = w.killed_for or "shutdown"
            w.writer.close()
        await asyncio.gather(*(loop.run_in_executor(self._threads, w.process.join, SHUTDOWN_GRACE) for w in workers), return_exceptions=True)
        for w in workers:
            w.kill("shutdown")
        await asyncio.gather(*(loop.run_in_executor(self._threads, w.process.join, 5.0) for w in workers), return_exceptions=True)
        self._threads.shutdown(wait=False, cancel_futures=True)

    # ------------------------------------------------------------ spawning

    def _spawn_later(self) -> None:
        if self._closed:
            return
        try:
            self._threads.submit(self._spawn_in_thread)
        except RuntimeError:  # executor already shut down
            pass

    def _spawn_in_thread(self) -> None:
        """Start one process (blocking), then hand its socket to the event loop."""
        delay = 0.5
        while not self._closed:
            try:
                process, sock = self._start_process()
                break
            except Exception as exc:  # noqa: BLE001 - keep trying, with backoff
                log.error("worker failed to start", extra={"fields": {"error": repr(exc)}})
                time.sleep(delay)
                delay = min(delay * 2, 10.0)
        else:
            return
        loop = self._loop
        try:
            assert loop is not None
            asyncio.run_coroutine_threadsafe(self._adopt(process, sock), loop)
        except (RuntimeError, AssertionError):
            process.kill()
            sock.close()

    def _start_process(self) -> tuple[multiprocessing.process.BaseProcess, socket.socket]:
        parent, child = self._ctx.Pipe(duplex=True)
        for end in (parent, child):
            _widen_buffers(end.fileno())
        process = self._ctx.Process(target=self._entry.target, args=(child, self._config), name="bandwise-worker", daemon=True)
        process.start()
        child.close()
        if not parent.poll(STARTUP_TIMEOUT):
            process.kill()
            parent.close()
            raise RuntimeError("worker did not start in time")
        message = parent.recv()
        if not (isinstance(message, tuple) and message and message[0] == "ready"):
            process.kill()
            parent.close()
            raise RuntimeError(f"worker sent {message!r} instead of ready")
        sock = socket.socket(fileno=os.dup(parent.fileno()))
        parent.close()
        sock.setblocking(False)
        return process, sock

    async def _adopt(self, process: multiprocessing.process.BaseProcess, sock: socket.socket) -> None:
        reader, writer = await asyncio.open_unix_connection(sock=sock, limit=_STREAM_LIMIT)
        worker = _Worker(process, reader, writer)
        if self._closed:
            worker.kill("shutdown")
            return
        self._all.add(worker)
        self._watch_exit(worker)
        self._release(worker)

    def _watch_exit(self, worker: _Worker) -> None:
        """Notice at once when an idle worker's process ends (killed from outside), so it is not counted ready."""
        assert self._loop is not None
        sentinel = worker.process.sentinel
        worker.unwatch = lambda: self._loop.remove_reader(sentinel) if self._loop is not None else None
        self._loop.add_reader(sentinel, self._exited, worker)

    def _exited(self, worker: _Worker) -> None:
        worker.unwatch()
        if worker in self._idle:
            self._idle.remove(worker)
            self._replace(worker, "died")
        # a busy worker's end is noticed by the request waiting on its socket

    def _replace(self, worker: _Worker, reason: str) -> None:
        worker.unwatch()
        worker.kill(reason)
        self._all.discard(worker)
        if self._closed:
            return  # not replaced, and close() reaps it: a second join from another thread would race that one
        self._on_event("restart", worker.killed_for or reason)
        log.warning("worker replaced", extra={"fields": {"pid": worker.pid, "reason": worker.killed_for or reason}})
        try:
            self._threads.submit(worker.process.join, 5.0)
        except RuntimeError:
            pass
        self._spawn_later()

    # ------------------------------------------------------------ running

    def _release(self, worker: _Worker) -> None:
        """Give a free worker to the longest-waiting request, or park it.

        The waiting request's job is written to the worker here and now, not
        when that request's task next runs: the worker starts computing while
        the event loop is still busy answering the request it just finished.
        """
        if self._closed:
            worker.kill("shutdown")
            return
        while self._waiters:
            fut, job = self._waiters.popleft()
            if not fut.done():
                worker.send(job)
                fut.set_result(worker)
                return
        self._idle.append(worker)

    def _pop_idle(self) -> _Worker | None:
        """An idle worker that is still alive; dead ones (killed while idle) are replaced on the way."""
        while self._idle:
            worker = self._idle.pop()
            if worker.process.is_alive():
                return worker
            self._replace(worker, "died")
        return None

    async def _acquire(self, job: Job, timeout: float) -> _Worker:
        """A worker that has been sent ``job``: an idle one at once, else the next one released."""
        worker = self._pop_idle()
        if worker is not None:
            worker.send(job)
            return worker
        assert self._loop is not None
        fut: asyncio.Future[_Worker] = self._loop.create_future()
        self._waiters.append((fut, job))
        self.waiting += 1
        try:
            async with asyncio.timeout(timeout):
                await asyncio.shield(fut)
        except TimeoutError:
            if fut.done() and not fut.cancelled() and fut.exception() is None:
                return fut.result()
            fut.cancel()
            raise DeadlineExceeded() from None
        except asyncio.CancelledError:
            if fut.done() and not fut.cancelled() and fut.exception() is None:
                # the job is already on its way to this worker: its answer would
                # arrive out of step with the next job, so the worker is replaced
                self._replace(fut.result(), "cancelled")
            else:
                fut.cancel()
            raise
        finally:
            self.waiting -= 1
        return fut.result()

    async def run(self, job: Job, timeout: float, *, admitted: bool = False) -> Outcome:
        """Run ``job`` in a worker within ``timeout`` seconds.

        ``admitted`` jobs belong to a request already let in (the groups of a
        split batch): they wait their turn even when the waiting room is full.

        Raises
        ------
        Overloaded
            No worker free and the waiting room full (raised at once).
        DeadlineExceeded
            Waiting plus work took longer than ``timeout``; a worker that was
            still computing has been killed and is being replaced.
        PoolClosed
            The pool is shutting down.
        WorkerLost
            The worker died during the job.
        """
        if self._closed or self._loop is None:
            raise PoolClosed()
        if not admitted and not self._idle and self.waiting >= self.queue_size:
            raise Overloaded()
        started = time.monotonic()
        worker = await self._acquire(job, timeout)
        remaining = max(timeout - (time.monotonic() - started), 0.0)
        self.busy += 1
        try:
            async with asyncio.timeout(remaining):
                outcome = await worker.receive()
        except TimeoutError:
            self._replace(worker, "deadline")
            raise DeadlineExceeded() from None
        except asyncio.CancelledError:
            # Cancelled mid-conversation: the worker's answer would arrive out of
            # step with the next job, so this worker is replaced.
            self._replace(worker, "cancelled")
            raise
        except (OSError, EOFError, asyncio.IncompleteReadError, RuntimeError, pickle.UnpicklingError) as exc:
            worker.process.join(0.2)  # its socket closed: it has exited or is about to; read how
            killed = worker.process.exitcode == -signal.SIGKILL
            self._replace(worker, "died")
            if self._closed:
                raise PoolClosed() from None
            raise WorkerLost(repr(exc), killed=killed) from None
        finally:
            self.busy -= 1
        self._release(worker)
        return outcome
