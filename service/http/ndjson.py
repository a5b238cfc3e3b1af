"""The streamed batch answer: one NDJSON line per series, sent as its group finishes.

``POST /v1/smooth/batch`` with ``Accept: application/x-ndjson`` answers
newline-delimited JSON (one JSON text per line, each ended by ``\\n``, as in
the NDJSON specification). Each line is one slot, ``{"index": i, ...}`` with
either the fields of a smooth answer or ``"problem"`` (RFC 9457), in the
order the slots finish. A batch is planned and run as in
:mod:`service.http.batching`, in up to :data:`STREAM_GROUPS_PER_WORKER`
groups per worker; the lines of a group are sent when the group finishes (a
batch that runs whole sends all its lines at once).

What concerns the whole batch (a body that is not JSON, too many series, an
overloaded replica) is still answered with the usual status and problem
document, before the stream starts. Once streaming, every slot gets exactly
one line: slots not computed before the deadline or before the replica shut
down carry that problem, and the stream then ends normally. When the series
list more points than ``BANDWISE_MAX_BATCH_POINTS`` over all groups, the
slots of the groups finishing past the limit carry a ``validation-error``.
"""

from __future__ import annotations

import asyncio
from collections.abc import AsyncIterator, Iterable
from dataclasses import replace
from typing import Any

import orjson
from starlette.background import BackgroundTask
from starlette.responses import StreamingResponse

from service.contract.accept import names_media_type
from service.contract.errors import problem_document
from service.contract.jobs import Job, Outcome
from service.http.batching import BatchPlan, BatchRunner
from service.http.budget import Reservation

__all__ = ["NDJSON_MEDIA_TYPE", "accepts_ndjson", "ndjson_response", "open_batch_stream"]

NDJSON_MEDIA_TYPE = "application/x-ndjson"
#: groups per worker of a streamed batch: smaller groups than for one JSON answer, so lines start sooner
STREAM_GROUPS_PER_WORKER = 16


def accepts_ndjson(header: str | None) -> bool:
    """True when ``Accept`` names ``application/x-ndjson`` with a weight above 0 (RFC 9110, section 12.5.1).

    Wildcards (``*/*``, ``application/*``) do not ask for the stream: a client
    has to name it.
    """
    return names_media_type(header, NDJSON_MEDIA_TYPE)


def _line(index: int, slot: dict[str, Any]) -> bytes:
    return orjson.dumps({"index": index, **slot}, option=orjson.OPT_SERIALIZE_NUMPY) + b"\n"


def _lines(first: int, array: bytes) -> bytes:
    """NDJSON lines of a JSON array of slots whose first slot is ``first``."""
    return b"".join(_line(first + i, slot) for i, slot in enumerate(orjson.loads(array)))


def _problem_lines(path: str, slots: Iterable[int], slug: str, detail: str, errors: list[dict[str, str]] | None = None) -> bytes:
    return b"".join(_line(i, {"problem": problem_document(slug, detail, instance=f"{path}#series[{i}]", errors=errors)}) for i in slots)


async def open_batch_stream(runner: BatchRunner, job: Job, deadline_seconds: float) -> Outcome | AsyncIterator[bytes]:
    """Plan a batch and start its stream.

    Parameters
    ----------
    runner : BatchRunner
        The service's batch runner.
    job : Job
        The batch job (its answer is never compressed).
    deadline_seconds : float
        The batch's deadline, from now.

    Returns
    -------
    Outcome or AsyncIterator of bytes
        An outcome when the whole batch is answered at once with a problem;
        otherwise the stream's chunks, each one or more whole lines.

    Raises the pool's errors (overloaded, deadline, shutting down) while planning, as for any request.
    """
    job = replace(job, accept_gzip=False)
    plan = await runner.plan(job, deadline_seconds, STREAM_GROUPS_PER_WORKER)
    if not plan.split:
        outcome = await runner.run_whole(job, plan)
        if outcome.status != 200:
            return outcome
        return _whole(outcome)
    return _groups(runner, job, plan)


async def _whole(outcome: Outcome) -> AsyncIterator[bytes]:
    results = orjson.loads(outcome.body)["results"]
    yield b"".join(_line(i, slot) for i, slot in enumerate(results))


async def _groups(runner: BatchRunner, job: Job, plan: BatchPlan) -> AsyncIterator[bytes]:
    gate = asyncio.Semaphore(runner.pool.size)

    async def numbered(k: int) -> tuple[int, bytes, Outcome]:
        inner, outcome = await runner.run_group(job, gate, plan, k)
        return k, inner, outcome

    pending = {asyncio.ensure_future(numbered(k)): k for k in range(plan.groups)}
    listed = 0
    try:
        while pending:
            done, _ = await asyncio.wait(pending, return_when=asyncio.FIRST_COMPLETED)
            for task in done:
                k, inner, outcome = task.result()
                del pending[task]
                listed += outcome.listed
                if listed > runner.max_batch_points:
                    yield _problem_lines(job.path, plan.slots(k), "validation-error", "Too many points in one batch; send these series again in another batch.", [runner.points_error(listed)])
                else:
                    yield _lines(plan.bounds[k], b"[" + inner + b"]")
            if listed > runner.max_batch_points and pending:
                for task, k in list(pending.items()):
                    task.cancel()
                    yield _problem_lines(job.path, plan.slots(k), "validation-error", "Too many points in one batch; send these series again in another batch.", [runner.points_error(listed)])
                await asyncio.gather(*pending, return_exceptions=True)
                pending.clear()
    finally:
        for task in pending:
            task.cancel()
        if pending:
            await asyncio.gather(*pending, return_exceptions=True)


def ndjson_response(chunks: AsyncIterator[bytes], reservation: Reservation) -> StreamingResponse:
    """The streaming response for ``chunks``; the request body's bytes stay reserved until the stream ends.

    Parameters
    ----------
    chunks : AsyncIterator of bytes
        From :func:`open_batch_stream`.
    reservation : Reservation
        The request's body reservation; its bytes move to the response, which releases them.
    """
    held = Reservation(reservation.budget)
    held.held, reservation.held = reservation.held, 0

    async def body() -> AsyncIterator[bytes]:
        try:
            async for chunk in chunks:
                yield chunk
        finally:
            held.release()

    headers = {"X-Accel-Buffering": "no", "Cache-Control": "no-store", "Vary": "Accept"}
    return StreamingResponse(body(), media_type=NDJSON_MEDIA_TYPE, headers=headers, background=BackgroundTask(held.release))
