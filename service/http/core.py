"""The running service: settings, worker pool, metrics and the path from request to worker."""

from __future__ import annotations

import asyncio
import logging
import time

from starlette.requests import Request
from starlette.responses import Response

from service.contract.arrow_layout import ARROW_KINDS, accepts_arrow
from service.contract.errors import PROBLEM_MEDIA_TYPE, ProblemError
from service.contract.jobs import Job, Outcome, WorkerEntry
from service.http.arrow_media import body_media_type
from service.http.auth import KeyChecker
from service.http.batching import BatchRunner
from service.http.budget import ByteBudget, Reservation, read_body_within
from service.http.disconnect import DisconnectWatch
from service.http.identity import Admission
from service.http.limits import RateLimiter, retry_after
from service.http.metrics import Metrics
from service.http.ndjson import accepts_ndjson, ndjson_response, open_batch_stream
from service.http.negotiation import accepts_gzip
from service.http.observability import ServiceCounters, request_id_of
from service.http.pool import DeadlineExceeded, Overloaded, PoolClosed, WorkerLost, WorkerPool
from service.runtime.settings import Settings

log = logging.getLogger("bandwise.service")

CACHEABLE = ("kernels", "demo_list", "demo")
#: paths whose answer's form depends on ``Accept`` (JSON or Arrow; JSON or NDJSON for batches)
_NEGOTIATED_PATHS = frozenset({"/v1/smooth", "/v1/bandwidth", "/v1/smooth/batch"})


class Service:
    """Everything one app instance owns.

    Parameters
    ----------
    settings : Settings
        Limits, pool size, security options.
    entry : WorkerEntry
        How to start a worker process (given by :func:`service.app.create_app`).
    """

    def __init__(self, settings: Settings, entry: WorkerEntry) -> None:
        self.settings = settings
        self.metrics = Metrics()
        self.counters = ServiceCounters()
        self.keys = KeyChecker(settings.api_keys)
        self.limiter = RateLimiter(settings.rate_limit_per_minute, settings.rate_limit_burst)
        self.admission = Admission(self.keys, self.limiter, RateLimiter(settings.auth_failures_per_minute), self.metrics, settings.rate_limit_per_minute)
        self.pool = WorkerPool(
            settings.workers,
            settings.effective_queue_size,
            {
                "limits": settings.limits(),
                "gzip_min_bytes": settings.gzip_min_bytes,
                "gzip_level": settings.gzip_level,
                "log_level": settings.log_level,
                "worker_nice": settings.worker_nice,
            },
            entry,
            on_event=self.metrics.on_pool_event,
        )
        self.batches = BatchRunner(self.pool, self.metrics, settings.max_batch_points, settings.gzip_min_bytes, settings.gzip_level)
        self.metrics.bind_pool(lambda: self.pool.busy, lambda: self.pool.waiting, lambda: self.pool.ready_count)
        self.bodies = ByteBudget(max(settings.body_bytes_in_flight, settings.max_body_bytes), settings.retry_after_seconds)
        self.draining = False
        self.drain_started: float | None = None
        self._cache: dict[str, Outcome] = {}

    async def start(self) -> None:
        await self.pool.start()

    async def stop(self) -> None:
        await self.pool.close()

    def begin_drain(self) -> None:
        """Turn /readyz to 503 and refuse new work; in-flight requests go on."""
        if not self.draining:
            self.draining = True
            self.drain_started = time.monotonic()
            log.info("draining", extra={"fields": {"in_flight": self.counters.active_api, "drain_seconds": self.settings.drain_seconds}})

    @property
    def ready(self) -> bool:
        return not self.draining and not self.pool.closed and self.pool.ready_count > 0

    # -------------------------------------------------------------- guards

    async def guard(self, request: Request) -> None:
        """API key and per-client rate limit (:class:`~service.http.identity.Admission`); every /v1 route awaits it first."""
        self.admission.admit(request)

    # -------------------------------------------------------------- work

    async def handle(self, request: Request, kind: str) -> Response:
        """What every numerical POST route does: guard, then hand the body to a worker."""
        await self.guard(request)
        return await self.submit(request, kind)

    async def submit(self, request: Request, kind: str, *, params: dict[str, str] | None = None, with_body: bool = True) -> Response:
        """Hand one request to a worker and turn its outcome into a response."""
        if self.draining:
            self.metrics.shed.labels("draining").inc()
            headers = retry_after(self.settings.retry_after_seconds)
            headers["Connection"] = "close"
            raise ProblemError("shutting-down", "This process is shutting down; retry on another replica.", headers=headers)
        cache_key = None
        if kind in CACHEABLE:
            cache_key = kind + ":" + ",".join(f"{k}={v}" for k, v in sorted((params or {}).items()))
            cached = self._cache.get(cache_key)
            if cached is not None:
                return self._response(request, cached)
        with self.bodies.reservation() as reservation:
            return await self._submit_body(request, kind, params, with_body, cache_key, reservation)

    async def _submit_body(self, request: Request, kind: str, params: dict[str, str] | None, with_body: bool, cache_key: str | None, reservation: Reservation) -> Response:
        body = b""
        content_type = "application/json"
        if with_body:
            content_type = body_media_type(request, kind)
            try:
                async with asyncio.timeout(self.settings.deadline_seconds):
                    body = await read_body_within(request, self.settings.max_body_bytes, reservation)
            except ProblemError as exc:
                if exc.slug == "receive-capacity-reached":
                    self.metrics.shed.labels("bodies_in_flight").inc()
                raise
            except TimeoutError:
                raise ProblemError("request-timeout", f"The body did not arrive within {self.settings.deadline_seconds:g} s.", headers={"Connection": "close"}) from None
        accept_gzip = cache_key is None and accepts_gzip(request.headers.get("accept-encoding", ""))
        accept_arrow = kind in ARROW_KINDS and accepts_arrow(request.headers.get("accept"))
        job = Job(kind, body, request_id_of(request.scope), request.scope["path"], dict(params or {}), accept_gzip, content_type, accept_arrow)
        stream = kind == "batch" and accepts_ndjson(request.headers.get("accept"))
        try:
            async with DisconnectWatch(request.receive):
                if stream:
                    opened = await open_batch_stream(self.batches, job, self.settings.deadline_seconds)
                    if not isinstance(opened, Outcome):
                        return ndjson_response(opened, reservation)
                    outcome = opened
                elif kind == "batch":
                    outcome = await self.batches.run(job, self.settings.deadline_seconds)
                else:
                    outcome = await self.pool.run(job, self.settings.deadline_seconds)
        except Overloaded:
            self.metrics.shed.labels("queue_full").inc()
            raise ProblemError(
                "overloaded",
                f"All {self.pool.size} workers are busy and {self.pool.queue_size} requests are already waiting.",
                headers=retry_after(self.settings.retry_after_seconds),
            ) from None
        except DeadlineExceeded:
            self.metrics.shed.labels("deadline").inc()
            raise ProblemError(
                "deadline-exceeded",
                f"The request did not finish within {self.settings.deadline_seconds:g} s and was stopped.",
                headers=retry_after(self.settings.retry_after_seconds),
            ) from None
        except PoolClosed:
            raise ProblemError("shutting-down", "This process is shutting down; retry on another replica.", headers=retry_after(self.settings.retry_after_seconds)) from None
        except WorkerLost as exc:
            if exc.killed:
                log.error("worker killed during a job (memory limit?)", extra={"fields": {"request_id": job.request_id, "kind": kind}})
                raise ProblemError(
                    "out-of-memory",
                    "The worker computing this request was killed by the system, most likely at this replica's memory limit. "
                    "Send fewer points, curve points or replicates, or use a replica with more memory.",
                    headers=retry_after(self.settings.retry_after_seconds),
                ) from None
            log.error("worker lost during a job", extra={"fields": {"request_id": job.request_id, "kind": kind, "error": str(exc)}})
            raise ProblemError(
                "internal-error",
                "The worker computing this request stopped unexpectedly; nothing was changed, so the request may be retried. It has been logged; quote the request id when reporting it.",
                headers=retry_after(self.settings.retry_after_seconds),
            ) from None
        if cache_key is not None and outcome.status == 200:
            self._cache[cache_key] = outcome
        return self._response(request, outcome)

    def _response(self, request: Request, outcome: Outcome) -> Response:
        state = request.state
        state.points = outcome.points
        state.work_seconds = outcome.seconds
        if outcome.problem:
            state.problem = outcome.problem
        if outcome.status == 200 and outcome.points:
            self.metrics.points.inc(outcome.points)
        headers: dict[str, str] = {}
        if outcome.encoding:
            headers["Content-Encoding"] = outcome.encoding
        # RFC 9110, section 12.5.5: name every request header the answer's form depended on, so caches keep them apart
        vary = []
        if request.method == "POST" and request.url.path in _NEGOTIATED_PATHS:
            vary.append("Accept")
        if outcome.encoding or len(outcome.body) >= self.settings.gzip_min_bytes:
            vary.append("Accept-Encoding")
        if vary:
            headers["Vary"] = ", ".join(vary)
        media = PROBLEM_MEDIA_TYPE if outcome.status >= 400 else outcome.media_type
        return Response(outcome.body, status_code=outcome.status, media_type=media, headers=headers)
