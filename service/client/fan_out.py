"""Fan-out of many series over concurrent batch requests, with the series that may be sent again sent again.

:class:`FanOut` is the bookkeeping, free of I/O: it cuts the series into
batches that respect the service's limits (:class:`BatchLimits`), hands them
out, and settles each batch's answer: finished series are given back once,
series that failed for a reason sending again may cure (deadline, overload,
shutdown, a lost connection) go back into the queue after a backoff of
:class:`~service.client.retry.RetryPolicy`, and a batch refused as too large
is halved. :func:`run_threads` and :func:`run_tasks` drive it with threads
(the blocking client) or asyncio tasks (the asyncio client).
"""

from __future__ import annotations

import asyncio
import math
import random
import time
from collections import deque
from collections.abc import AsyncIterator, Awaitable, Callable, Iterator
from concurrent.futures import FIRST_COMPLETED, Future, ThreadPoolExecutor, wait
from dataclasses import dataclass

from service.client.errors import BandwiseError, error_from_problem
from service.client.results import BatchResult, SmoothResult
from service.client.retry import RetryPolicy
from service.client.stream import RETRYABLE_SLOT_PROBLEMS, SlotAnswer
from service.contract.models import ProblemSlot

__all__ = ["BatchLimits", "FanOut", "default_batch_series", "run_tasks", "run_threads"]

#: bytes of the batch envelope and separators, added to the series' own bytes
_ENVELOPE_BYTES = 64


@dataclass(frozen=True)
class BatchLimits:
    """The service's batch limits, which every batch sent stays within.

    The defaults are the service's defaults; give the values of a service
    configured otherwise (``BANDWISE_MAX_BATCH_SERIES``,
    ``BANDWISE_MAX_BATCH_POINTS``, ``BANDWISE_MAX_BODY_BYTES``). A batch the
    service still refuses as too large (413, or 422 naming the batch limits)
    is halved and sent again.

    Parameters
    ----------
    max_series : int, default 1000
        Most series in one batch.
    max_points : int, default 2,000,000
        Most data points over all series of one batch.
    max_body_bytes : int, default 128 MiB
        Largest request body.
    """

    max_series: int = 1_000
    max_points: int = 2_000_000
    max_body_bytes: int = 128 * 1024 * 1024

    def __post_init__(self) -> None:
        if min(self.max_series, self.max_points, self.max_body_bytes) < 1:
            raise ValueError("BatchLimits values must be >= 1")


@dataclass
class _Series:
    index: int
    body: bytes
    points: int
    attempts: int = 0
    not_before: float = 0.0


def _too_large(error: BandwiseError) -> bool:
    """True when the service refused the batch as a whole for its size."""
    if error.status == 413:
        return True
    return error.status == 422 and any(e.field == "series" and e.type == "too_long" for e in error.errors)


def _retryable(error: BandwiseError) -> bool:
    return error.status is None or error.status in (429, 502, 503) or error.slug in RETRYABLE_SLOT_PROBLEMS


class FanOut:
    """Which series go in the next batch, and what a batch's answer means for each of its series.

    Parameters
    ----------
    bodies : list of bytes
        The JSON body of each series, in the caller's order (index = position).
    points : list of int
        The number of data points of each series.
    limits : BatchLimits
        What one batch may hold.
    batch_series : int
        Most series per batch (at most ``limits.max_series``).
    policy : RetryPolicy
        ``attempts`` bounds the requests that carry any one series; the
        backoff spaces them.
    rng : random.Random
        Source of the backoff jitter.
    """

    def __init__(self, bodies: list[bytes], points: list[int], limits: BatchLimits, batch_series: int, policy: RetryPolicy, rng: random.Random) -> None:
        self.limits = limits
        self.batch_series = max(1, min(batch_series, limits.max_series))
        self.policy = policy
        self.rng = rng
        self._queue: deque[_Series] = deque(_Series(i, b, p) for i, (b, p) in enumerate(zip(bodies, points, strict=True)))
        self._open = len(bodies)

    @property
    def done(self) -> bool:
        """True when every series has been given back."""
        return self._open == 0

    def wait_seconds(self, now: float) -> float | None:
        """Seconds until a queued series may be sent; None when nothing is queued."""
        if not self._queue:
            return None
        return max(0.0, min(s.not_before for s in self._queue) - now)

    def next_batch(self, now: float) -> list[_Series]:
        """The series of the next batch (in queue order, those whose backoff is over); empty when none is ready."""
        batch: list[_Series] = []
        points = 0
        size = _ENVELOPE_BYTES
        kept: deque[_Series] = deque()
        while self._queue:
            item = self._queue.popleft()
            fits = (
                len(batch) < self.batch_series
                and item.not_before <= now
                and (not batch or (points + item.points <= self.limits.max_points and size + len(item.body) + 1 <= self.limits.max_body_bytes))
            )
            if fits:
                batch.append(item)
                points += item.points
                size += len(item.body) + 1
            else:
                kept.append(item)
            if len(batch) >= self.batch_series:
                break
        kept.extend(self._queue)
        self._queue = kept
        return batch

    @staticmethod
    def body(batch: list[_Series]) -> bytes:
        """The request body of a batch."""
        return b'{"series":[' + b",".join(s.body for s in batch) + b"]}"

    def settle(self, batch: list[_Series], answer: BatchResult | BandwiseError, now: float) -> list[SlotAnswer]:
        """Take a batch's answer (or the error of the whole call); the series answers to give back now."""
        if isinstance(answer, BandwiseError):
            if _too_large(answer) and len(batch) > 1:
                half = len(batch) // 2
                self.batch_series = max(1, min(self.batch_series, half))
                self._queue.extendleft(reversed(batch))
                return []
            return [a for item in batch if (a := self._failed(item, answer, now)) is not None]
        given: list[SlotAnswer] = []
        for item, slot in zip(batch, answer.results, strict=True):
            if isinstance(slot, SmoothResult):
                given.append(SlotAnswer(item.index, result=slot))
                self._open -= 1
                continue
            assert isinstance(slot, ProblemSlot)
            problem = slot.problem.model_dump(exclude_none=True)
            problem["instance"] = f"/v1/smooth/batch#series[{item.index}]"
            error = error_from_problem(problem, slot.problem.status, series=item.index, request_id=answer.request_id)
            if (a := self._failed(item, error, now)) is not None:
                given.append(a)
        return given

    def _failed(self, item: _Series, error: BandwiseError, now: float) -> SlotAnswer | None:
        item.attempts += 1
        if _retryable(error) and item.attempts < self.policy.attempts:
            item.not_before = now + self.policy.delay(item.attempts - 1, self.rng) + (error.retry_after or 0.0)
            self._queue.append(item)
            return None
        self._open -= 1
        return SlotAnswer(item.index, error=error)


def default_batch_series(count: int, connections: int, limits: BatchLimits) -> int:
    """Series per batch when the caller does not say: about two batches per connection, within the limits."""
    return max(1, min(limits.max_series, math.ceil(count / max(1, 2 * connections))))


def _wake(plan: FanOut, running: int, connections: int) -> float | None:
    """How long to wait for a batch in flight: until a queued series' backoff ends, if a connection is free for it."""
    return None if running >= connections else plan.wait_seconds(time.monotonic())


def run_threads(plan: FanOut, send: Callable[[bytes], BatchResult], connections: int) -> Iterator[SlotAnswer]:
    """Drive ``plan`` with up to ``connections`` batches in flight on threads; yield answers as batches settle.

    ``send`` posts one batch body and returns its answer, raising :class:`BandwiseError` when the call fails.
    """
    with ThreadPoolExecutor(max_workers=max(1, connections), thread_name_prefix="bandwise-fan-out") as pool:
        running: dict[Future[BatchResult], list[_Series]] = {}
        while not plan.done:
            while len(running) < connections:
                batch = plan.next_batch(time.monotonic())
                if not batch:
                    break
                running[pool.submit(send, FanOut.body(batch))] = batch
            if not running:
                time.sleep(plan.wait_seconds(time.monotonic()) or 0.0)
                continue
            finished, _ = wait(running, timeout=_wake(plan, len(running), connections), return_when=FIRST_COMPLETED)
            for future in finished:
                batch = running.pop(future)
                error = future.exception()
                if error is not None and not isinstance(error, BandwiseError):
                    raise error
                yield from plan.settle(batch, error if isinstance(error, BandwiseError) else future.result(), time.monotonic())


async def run_tasks(plan: FanOut, send: Callable[[bytes], Awaitable[BatchResult]], connections: int) -> AsyncIterator[SlotAnswer]:
    """:func:`run_threads` for the asyncio client: batches in flight as tasks."""
    running: dict[asyncio.Task[BatchResult], list[_Series]] = {}
    try:
        while not plan.done:
            while len(running) < connections:
                batch = plan.next_batch(time.monotonic())
                if not batch:
                    break
                running[asyncio.ensure_future(send(FanOut.body(batch)))] = batch
            if not running:
                await asyncio.sleep(plan.wait_seconds(time.monotonic()) or 0.0)
                continue
            finished, _ = await asyncio.wait(running, timeout=_wake(plan, len(running), connections), return_when=asyncio.FIRST_COMPLETED)
            for task in finished:
                batch = running.pop(task)
                error = task.exception()
                if error is not None and not isinstance(error, BandwiseError):
                    raise error
                for answer in plan.settle(batch, error if isinstance(error, BandwiseError) else task.result(), time.monotonic()):
                    yield answer
    finally:
        for task in running:
            task.cancel()
        if running:
            await asyncio.gather(*running, return_exceptions=True)
