"""Batches over every worker: cut a large batch into groups of slots, run them side by side, join the answers.

A batch body below :data:`SPLIT_MIN_BYTES`, or a pool of one worker, runs
whole in one worker, as a single job (a split costs a round trip and a scan
of the body, which a small batch would notice). A larger one goes first to a
worker that finds the byte range of every series (``batch_plan``); the HTTP
process then cuts the body into contiguous groups of about equal size by
slicing bytes (no parse here), at most :data:`GROUPS_PER_WORKER` groups per
worker, and runs at most one group per worker at a time, in order, so a
worker that finishes early takes the next group. Each group answers a JSON
array of its slots; the arrays are joined in slot order.

Deadline: every batch job carries a soft deadline a little before the hard
one. A worker starts no slot it does not expect to finish by then; it marks
the rest ``deadline-exceeded`` and answers, so finished slots are kept and
the batch answers 200. A group that still overruns is stopped at the hard
deadline and only its slots are marked. Slots marked this way, or lost with
a worker, are counted in ``bandwise_batch_slots_unfinished_total{reason}``.
"""

from __future__ import annotations

import asyncio
import gzip
import time
from dataclasses import dataclass, replace

import orjson

from service.contract.errors import PROBLEM_MEDIA_TYPE, problem_bytes, problem_document
from service.contract.jobs import Job, Outcome
from service.http.metrics import Metrics
from service.http.pool import DeadlineExceeded, PoolClosed, WorkerLost, WorkerPool

#: batch bodies smaller than this run whole in one worker
SPLIT_MIN_BYTES = 256 * 1024
#: smallest group worth a job of its own
GROUP_MIN_BYTES = 64 * 1024
#: groups per worker: enough for a worker that finishes early to take more, few enough to keep per-job costs small
GROUPS_PER_WORKER = 4

_LOST_DETAIL = {
    "deadline-exceeded": "This series was not computed before the batch's deadline; the other slots are kept. "
    "Send the series marked deadline-exceeded again, in a smaller batch or to another replica.",
    "shutting-down": "This replica began shutting down before the series was computed; send it again to another replica.",
    "out-of-memory": "The worker computing this group of series was killed by the system, most likely at the replica's memory limit; "
    "send these series again in smaller batches.",
    "internal-error": "The worker computing this group of series stopped unexpectedly. It has been logged; quote the request id when reporting it.",
}


def soft_deadline(started: float, deadline_seconds: float) -> float:
    """When batch workers stop starting slots: the hard deadline less 5 % of it (0.1 s to 1 s)."""
    margin = min(max(0.05 * deadline_seconds, 0.1), 1.0)
    return started + deadline_seconds - margin


def group_bounds(sizes: list[int], groups: int) -> list[int]:
    """Slot indices cutting ``sizes`` into ``groups`` contiguous runs of about equal total size.

    Returns the start of each group and, last, ``len(sizes)``; every group holds at least one slot.
    """
    total = sum(sizes)
    bounds = [0]
    running = 0
    for index, size in enumerate(sizes[:-1]):
        running += size
        wanted = len(bounds)
        if wanted < groups and running * groups >= wanted * total and index + 1 > bounds[-1]:
            bounds.append(index + 1)
    bounds.append(len(sizes))
    return bounds


@dataclass(frozen=True)
class BatchPlan:
    """How one batch runs.

    Attributes
    ----------
    spans : list of int
        Start and stop byte of every series, flattened; empty when the batch runs whole.
    bounds : list of int
        First slot of every group, then the number of slots; empty when the batch runs whole.
    soft, hard_end : float
        ``time.monotonic()`` instants: when workers stop starting slots, and when groups are stopped.
    """

    spans: list[int]
    bounds: list[int]
    soft: float
    hard_end: float

    @property
    def split(self) -> bool:
        """True when the batch runs as several groups."""
        return len(self.bounds) >= 3

    @property
    def groups(self) -> int:
        """Number of groups (0 when the batch runs whole)."""
        return max(len(self.bounds) - 1, 0)

    def slots(self, k: int) -> range:
        """Slot indices of group ``k``."""
        return range(self.bounds[k], self.bounds[k + 1])


class BatchRunner:
    """Runs batch jobs on a pool, split over its workers when the batch is large.

    Parameters
    ----------
    pool : WorkerPool
        The service's worker pool.
    metrics : Metrics
        Where unfinished slots are counted.
    max_batch_points : int
        The whole batch's point limit (groups are checked against it jointly).
    gzip_min_bytes, gzip_level : int
        Response compression settings (a joined answer is compressed here).
    """

    def __init__(self, pool: WorkerPool, metrics: Metrics, max_batch_points: int, gzip_min_bytes: int, gzip_level: int) -> None:
        self.pool = pool
        self.metrics = metrics
        self.max_batch_points = max_batch_points
        self.gzip_min_bytes = gzip_min_bytes
        self.gzip_level = gzip_level

    async def plan(self, job: Job, deadline_seconds: float, groups_per_worker: int = GROUPS_PER_WORKER) -> BatchPlan:
        """Decide how ``job`` runs: whole in one worker, or cut into groups (a ``batch_plan`` job finds the slots).

        ``groups_per_worker`` bounds the number of groups (a streamed answer asks for more, smaller
        groups, so its first lines come sooner).

        Raises the pool's errors (overloaded, deadline, shutting down) for the whole batch.
        """
        started = time.monotonic()
        hard_end = started + deadline_seconds
        soft = soft_deadline(started, deadline_seconds)
        spans: list[int] = []
        if len(job.body) >= SPLIT_MIN_BYTES and self.pool.size > 1:
            plan = await self.pool.run(Job("batch_plan", job.body, job.request_id, job.path), deadline_seconds)
            if plan.status == 200:
                spans = orjson.loads(plan.body).get("spans") or []
        bounds: list[int] = []
        if spans:
            starts, stops = spans[0::2], spans[1::2]
            sizes = [b - a for a, b in zip(starts, stops, strict=True)]
            groups = min(self.pool.size * groups_per_worker, sum(sizes) // GROUP_MIN_BYTES, len(sizes))
            if groups >= 2:
                bounds = group_bounds(sizes, groups)
        if len(bounds) < 3:
            return BatchPlan([], [], soft, hard_end)
        return BatchPlan(spans, bounds, soft, hard_end)

    async def run_whole(self, job: Job, plan: BatchPlan) -> Outcome:
        """Run the batch as one job in one worker (raises the pool's errors)."""
        whole = replace(job, params={**job.params, "soft_deadline": plan.soft})
        outcome = await self.pool.run(whole, max(plan.hard_end - time.monotonic(), 0.0))
        self._count("deadline-exceeded", outcome.unfinished)
        return outcome

    async def run(self, job: Job, deadline_seconds: float) -> Outcome:
        """Answer a batch job; raises the pool's errors only for what concerns the whole batch."""
        plan = await self.plan(job, deadline_seconds)
        if not plan.split:
            return await self.run_whole(job, plan)
        gate = asyncio.Semaphore(self.pool.size)
        answers = await asyncio.gather(*(self.run_group(job, gate, plan, k) for k in range(plan.groups)))
        listed = sum(a.listed for _, a in answers)
        if listed > self.max_batch_points:
            body = problem_bytes("validation-error", "Too many points in one batch.", instance=job.path, request_id=job.request_id, errors=[self.points_error(listed)])
            return Outcome(422, body, PROBLEM_MEDIA_TYPE, None, 0, "validation-error")
        payload = b'{"results":[' + b",".join(inner for inner, _ in answers) + b"]}"
        encoding = None
        if job.accept_gzip and len(payload) >= self.gzip_min_bytes:
            payload = await asyncio.to_thread(gzip.compress, payload, self.gzip_level, mtime=0)
            encoding = "gzip"
        points = sum(a.points for _, a in answers)
        seconds = sum(a.seconds for _, a in answers)
        return Outcome(200, payload, "application/json", encoding, points, None, seconds, unfinished=sum(a.unfinished for _, a in answers), listed=listed)

    def points_error(self, listed: int) -> dict[str, str]:
        """The ``errors`` entry of a batch over the point limit."""
        return {"field": "series", "message": f"at most {self.max_batch_points} points over all series are allowed (BANDWISE_MAX_BATCH_POINTS), got {listed}; split the batch", "type": "too_long"}

    async def run_group(self, job: Job, gate: asyncio.Semaphore, plan: BatchPlan, k: int) -> tuple[bytes, Outcome]:
        """Run group ``k`` of ``plan`` once ``gate`` lets it; the inner bytes of its JSON array of slots and its outcome.

        Never raises the pool's errors: a group that gives no answer has each of its slots marked with the problem.
        """
        first, stop = plan.bounds[k], plan.bounds[k + 1]
        begin, end = plan.spans[2 * first], plan.spans[2 * stop - 1]
        async with gate:
            remaining = plan.hard_end - time.monotonic()
            if remaining <= 0:
                return self._lost(job, "deadline-exceeded", first, stop)
            part = Job("batch", b'{"series":[' + job.body[begin:end] + b"]}", job.request_id, job.path, {"offset": first, "part": True, "soft_deadline": plan.soft})
            try:
                outcome = await self.pool.run(part, remaining, admitted=True)
            except DeadlineExceeded:
                return self._lost(job, "deadline-exceeded", first, stop)
            except PoolClosed:
                return self._lost(job, "shutting-down", first, stop)
            except WorkerLost as exc:
                return self._lost(job, "out-of-memory" if exc.killed else "internal-error", first, stop)
        if outcome.status != 200:
            return self._failed(job, outcome, first, stop)
        self._count("deadline-exceeded", outcome.unfinished)
        return outcome.body[1:-1], outcome

    def _lost(self, job: Job, slug: str, first: int, stop: int) -> tuple[bytes, Outcome]:
        """A group that gave no answer: each of its slots carries the problem, so the caller resends just those."""
        self._count(slug, stop - first)
        slots = [orjson.dumps({"problem": problem_document(slug, _LOST_DETAIL[slug], instance=f"{job.path}#series[{i}]")}) for i in range(first, stop)]
        return b",".join(slots), Outcome(200, b"", unfinished=stop - first if slug == "deadline-exceeded" else 0)

    def _failed(self, job: Job, outcome: Outcome, first: int, stop: int) -> tuple[bytes, Outcome]:
        """A group answered with one problem (its envelope was refused): each slot carries that problem."""
        document = orjson.loads(outcome.body)
        document.pop("request_id", None)
        slots = [orjson.dumps({"problem": {**document, "instance": f"{job.path}#series[{i}]"}}) for i in range(first, stop)]
        return b",".join(slots), Outcome(200, b"", listed=0)

    def _count(self, slug: str, count: int) -> None:
        if count:
            self.metrics.batch_unfinished.labels(slug).inc(count)
