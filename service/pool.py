"""Bounded pool of worker processes for the numerical work.

Why processes and not threads: parsing a large JSON body, validating it and
the Python-level loops of a fit all hold the GIL for long stretches, so in a
thread they would stall the event loop and ``/healthz`` for hundreds of
milliseconds.  In a separate process they cannot, and a job that runs past
its deadline can be stopped for real (the process is killed and replaced).

The pool has ``size`` workers and a waiting room of ``queue_size`` requests.
A request that finds both full is refused at once (503 with Retry-After)
rather than queued without limit.  Each request has a deadline covering its
wait and its work.

Workers are forked from a forkserver that has already imported numpy and
``estimators``, so replacing one takes milliseconds, not the import time.
"""

from __future__ import annotations

import asyncio
import collections
import logging
import multiprocessing
import os
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from multiprocessing.connection import Connection
from typing import Any, Callable

from .jobs import Job, Outcome

log = logging.getLogger("bandwise.pool")

STARTUP_TIMEOUT = 60.0
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
    """The worker process died while working on the job."""


class _Timeout(Exception):
    pass


class _Died(Exception):
    pass


class _Worker:
    """One worker process and the parent's end of its pipe."""

    def __init__(self, process: multiprocessing.process.BaseProcess, conn: Connection) -> None:
        self.process = process
        self.conn = conn

    @property
    def pid(self) -> int | None:
        return self.process.pid

    def call(self, job: Job, timeout: float) -> Outcome:
        try:
            self.conn.send(job)
            if not self.conn.poll(max(timeout, 0.0)):
                raise _Timeout()
            outcome = self.conn.recv()
        except (EOFError, OSError) as exc:
            raise _Died(repr(exc)) from None
        if not isinstance(outcome, Outcome):
            raise _Died(f"unexpected message {type(outcome).__name__}")
        return outcome

    def stop(self, timeout: float = 2.0) -> None:
        """Ask the worker to finish, then make sure it is gone."""
        try:
            self.conn.send(None)
        except (OSError, ValueError):
            pass
        self.process.join(timeout)
        self.kill()

    def kill(self) -> None:
        if self.process.is_alive():
            self.process.kill()
        self.process.join(5.0)
        try:
            self.conn.close()
        except OSError:
            pass


def _context() -> multiprocessing.context.BaseContext:
    try:
        ctx = multiprocessing.get_context("forkserver")
    except ValueError:  # pragma: no cover - platforms without fork
        return multiprocessing.get_context("spawn")
    ctx.set_forkserver_preload(["service.worker", "service.handlers", "service.warmup"])
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
        Handed to :func:`service.worker.worker_main`.
    on_event : callable, optional
        Called with ``(name, label)`` for countable events: ``("restart",
        reason)``.  Must be thread-safe.
    """

    def __init__(self, size: int, queue_size: int, config: dict[str, Any], on_event: Callable[[str, str], None] | None = None) -> None:
        self.size = size
        self.queue_size = queue_size
        self._config = config
        self._on_event = on_event or (lambda name, label: None)
        self._ctx = _context()
        self._threads = ThreadPoolExecutor(max_workers=2 * size + 2, thread_name_prefix="bandwise-pool")
        self._idle: list[_Worker] = []
        self._all: set[_Worker] = set()
        self._all_lock = threading.Lock()
        self._waiters: collections.deque[asyncio.Future[_Worker]] = collections.deque()
        self._loop: asyncio.AbstractEventLoop | None = None
        self._closed = False
        self.waiting = 0
        self.busy = 0
        self._ready_event: asyncio.Event | None = None

    # ------------------------------------------------------------ lifecycle

    async def start(self) -> None:
        """Start the workers in the background; returns at once."""
        self._loop = asyncio.get_running_loop()
        self._ready_event = asyncio.Event()
        for name in _BLAS_THREAD_VARIABLES:
            # Parallelism comes from the worker count; one BLAS thread each avoids oversubscription.
            os.environ.setdefault(name, "1")
        for _ in range(self.size):
            self._threads.submit(self._spawn_and_add)

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
        with self._all_lock:
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
            fut = self._waiters.popleft()
            if not fut.done():
                fut.set_exception(PoolClosed())
        idle, self._idle = self._idle, []
        with self._all_lock:
            busy = [w for w in self._all if w not in idle]
            self._all.clear()
        loop = asyncio.get_running_loop()
        await asyncio.gather(*(loop.run_in_executor(self._threads, w.stop) for w in idle), return_exceptions=True)
        for w in busy:
            await loop.run_in_executor(self._threads, w.kill)
        self._threads.shutdown(wait=False, cancel_futures=True)

    # ------------------------------------------------------------ spawning (threads)

    def _spawn(self) -> _Worker:
        parent, child = self._ctx.Pipe(duplex=True)
        from .worker import worker_main

        process = self._ctx.Process(target=worker_main, args=(child, self._config), name="bandwise-worker", daemon=True)
        process.start()
        child.close()
        worker = _Worker(process, parent)
        if not parent.poll(STARTUP_TIMEOUT):
            worker.kill()
            raise RuntimeError("worker did not start in time")
        message = parent.recv()
        if not (isinstance(message, tuple) and message and message[0] == "ready"):
            worker.kill()
            raise RuntimeError(f"worker sent {message!r} instead of ready")
        return worker

    def _spawn_and_add(self) -> None:
        delay = 0.5
        while not self._closed:
            try:
                worker = self._spawn()
            except Exception as exc:  # noqa: BLE001 - keep trying, with backoff
                log.error("worker failed to start", extra={"fields": {"error": repr(exc)}})
                time.sleep(delay)
                delay = min(delay * 2, 10.0)
                continue
            if self._closed or self._loop is None:
                worker.kill()
                return
            with self._all_lock:
                self._all.add(worker)
            try:
                self._loop.call_soon_threadsafe(self._release, worker)
            except RuntimeError:  # loop already closed
                worker.kill()
            return

    def _replace(self, worker: _Worker, reason: str) -> None:
        worker.kill()
        with self._all_lock:
            self._all.discard(worker)
        self._on_event("restart", reason)
        log.warning("worker replaced", extra={"fields": {"pid": worker.pid, "reason": reason}})
        if not self._closed:
            try:
                self._threads.submit(self._spawn_and_add)
            except RuntimeError:
                pass

    # ------------------------------------------------------------ running

    def _release(self, worker: _Worker) -> None:
        while self._waiters:
            fut = self._waiters.popleft()
            if not fut.done():
                fut.set_result(worker)
                return
        if self._closed:
            try:
                self._threads.submit(worker.stop)
            except RuntimeError:
                worker.kill()
            return
        self._idle.append(worker)

    async def _acquire(self, timeout: float) -> _Worker:
        if self._idle:
            return self._idle.pop()
        assert self._loop is not None
        fut: asyncio.Future[_Worker] = self._loop.create_future()
        self._waiters.append(fut)
        self.waiting += 1
        try:
            await asyncio.wait_for(asyncio.shield(fut), timeout)
        except asyncio.TimeoutError:
            if fut.done() and not fut.cancelled() and fut.exception() is None:
                return fut.result()
            fut.cancel()
            raise DeadlineExceeded() from None
        except asyncio.CancelledError:
            if fut.done() and not fut.cancelled() and fut.exception() is None:
                self._release(fut.result())
            else:
                fut.cancel()
            raise
        finally:
            self.waiting -= 1
        return fut.result()

    def _execute(self, worker: _Worker, job: Job, timeout: float) -> Outcome:
        try:
            outcome = worker.call(job, timeout)
        except _Timeout:
            self._replace(worker, "deadline")
            raise DeadlineExceeded() from None
        except _Died as exc:
            self._replace(worker, "died")
            raise WorkerLost(str(exc)) from None
        loop = self._loop
        if loop is not None:
            try:
                loop.call_soon_threadsafe(self._release, worker)
            except RuntimeError:
                worker.kill()
        return outcome

    async def run(self, job: Job, timeout: float) -> Outcome:
        """Run ``job`` in a worker within ``timeout`` seconds.

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
        if not self._idle and self.waiting >= self.queue_size:
            raise Overloaded()
        started = time.monotonic()
        worker = await self._acquire(timeout)
        remaining = timeout - (time.monotonic() - started)
        self.busy += 1
        try:
            return await self._loop.run_in_executor(self._threads, self._execute, worker, job, remaining)
        finally:
            self.busy -= 1
