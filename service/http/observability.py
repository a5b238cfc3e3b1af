"""Request ids, one JSON log line per request, request metrics, and the last-resort 500.

A plain ASGI middleware (no per-request task or body copying) so its cost on
small requests stays in the microseconds.
"""

from __future__ import annotations

import itertools
import logging
import re
import secrets
import time
import traceback
from typing import Any

from starlette.requests import ClientDisconnect
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from service.contract.errors import PROBLEM_MEDIA_TYPE, problem_bytes
from service.http.metrics import Metrics
from service.runtime import logs

access_log = logging.getLogger("bandwise.access")
error_log = logging.getLogger("bandwise.error")

_REQUEST_ID = re.compile(r"^[A-Za-z0-9._:-]{1,128}$")
CLIENT_CLOSED = 499


class _RequestIds:
    """New request ids: 32 hex digits, a random per-process prefix and a counter (unique, no system call each)."""

    def __init__(self) -> None:
        self._prefix = secrets.token_hex(8)
        self._count = itertools.count(1)

    def __call__(self) -> str:
        return f"{self._prefix}{next(self._count):016x}"


new_request_id = _RequestIds()


def request_id_of(scope: Scope) -> str:
    """The request id stored for this request (empty string outside a request)."""
    state = scope.get("state") or {}
    return str(state.get("request_id", ""))


class ServiceCounters:
    """Live counts the drain logic reads."""

    def __init__(self) -> None:
        self.active = 0
        self.active_api = 0


class ObservabilityMiddleware:
    """Accept or create ``X-Request-ID``, echo it, log and count every request.

    An incoming ``X-Request-ID`` is kept if it is 1-128 characters of
    ``[A-Za-z0-9._:-]``; otherwise a new id is made (a random per-process prefix and a counter).  An exception
    that escapes the app is logged with its traceback and answered with a
    500 problem carrying the request id (never the trace).  A client that
    disconnects before its body has arrived is logged and counted with status
    499 (no answer can reach it) rather than as an internal error.
    """

    def __init__(self, app: ASGIApp, metrics: Metrics, counters: ServiceCounters, access: bool = True) -> None:
        self.app = app
        self.metrics = metrics
        self.counters = counters
        self.access = access

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        started = time.perf_counter()
        request_id = ""
        for name, value in scope.get("headers", ()):
            if name == b"x-request-id":
                candidate = value.decode("latin-1")
                if _REQUEST_ID.match(candidate):
                    request_id = candidate
                break
        if not request_id:
            request_id = new_request_id()
        state = scope.setdefault("state", {})
        state["request_id"] = request_id
        header = (b"x-request-id", request_id.encode("latin-1"))
        path: str = scope.get("path", "")
        is_api = path.startswith("/v1/")
        status = 500
        response_started = False

        async def send_with_id(message: Message) -> None:
            nonlocal status, response_started
            if message["type"] == "http.response.start":
                response_started = True
                status = int(message["status"])
                message["headers"] = [*message.get("headers", []), header]
            await send(message)

        self.counters.active += 1
        if is_api:
            self.counters.active_api += 1
        try:
            await self.app(scope, receive, send_with_id)
        except ClientDisconnect:
            # The client went away before its body arrived: nobody to answer, nothing to fix here.
            # Counted and logged as 499, the status gateways use for "client closed request".
            status = CLIENT_CLOSED
            state["problem"] = "client-disconnected"
        except Exception as exc:  # noqa: BLE001 - the last resort: log it, answer 500 without the trace
            error_log.error(
                "unhandled exception",
                extra={"fields": {"request_id": request_id, "path": path, "error": repr(exc), "traceback": traceback.format_exc()}},
            )
            if not response_started:
                body = problem_bytes(
                    "internal-error",
                    "An unexpected error occurred. It has been logged; quote the request id when reporting it.",
                    instance=path,
                    request_id=request_id,
                )
                await send_with_id(
                    {
                        "type": "http.response.start",
                        "status": 500,
                        "headers": [(b"content-type", PROBLEM_MEDIA_TYPE.encode()), (b"content-length", str(len(body)).encode())],
                    }
                )
                await send({"type": "http.response.body", "body": body})
            status = 500
        finally:
            self.counters.active -= 1
            if is_api:
                self.counters.active_api -= 1
            elapsed = time.perf_counter() - started
            route = scope.get("route")
            template = getattr(route, "path", None) or "unmatched"
            method = scope.get("method", "")
            self.metrics.observe_request(template, method, str(status), elapsed)
            if self.access:
                fields: dict[str, Any] = {
                    "request_id": request_id,
                    "method": method,
                    "route": template,
                    "path": path,
                    "status": status,
                    "duration_ms": round(elapsed * 1000.0, 3),
                    "points": int(state.get("points", 0)),
                }
                work = state.get("work_seconds")
                if work is not None:
                    fields["work_ms"] = round(work * 1000.0, 3)
                problem = state.get("problem")
                if problem:
                    fields["problem"] = problem
                sink = logs.access_sink
                if sink is not None:
                    sink(fields)
                else:
                    access_log.info("request", extra={"fields": fields})
