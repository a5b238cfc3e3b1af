"""Checks made before a body reaches a worker: media type and coding, client rate (sizes: service.http.budget)."""

from __future__ import annotations

import math
import threading
import time

from starlette.requests import Request

from service.contract.errors import ProblemError


def check_json_content_type(request: Request) -> None:
    """Refuse bodies that are not declared as JSON (415).

    Accepts ``application/json`` and ``application/<anything>+json``, with an
    optional ``charset`` of utf-8.  Compressed request bodies are refused too.
    """
    raw = request.headers.get("content-type")
    if raw is None:
        raise ProblemError("unsupported-media-type", "The request has no Content-Type; send the body as JSON with Content-Type: application/json.")
    media, _, params = raw.partition(";")
    media = media.strip().lower()
    main, _, sub = media.partition("/")
    if main != "application" or not (sub == "json" or sub.endswith("+json")):
        raise ProblemError("unsupported-media-type", f"Content-Type {media or raw!r} is not JSON; send Content-Type: application/json.")
    for param in params.split(";"):
        key, _, value = param.partition("=")
        if key.strip().lower() == "charset" and value.strip().strip('"').lower() not in ("utf-8", "utf8"):
            raise ProblemError("unsupported-media-type", "JSON bodies must be UTF-8.")
    check_uncompressed(request)


def check_uncompressed(request: Request) -> None:
    """Refuse a compressed request body (415): bodies are read as sent."""
    encoding = request.headers.get("content-encoding", "identity").strip().lower()
    if encoding not in ("", "identity"):
        # RFC 9110, 15.5.16: name the content codings that would have been accepted (only none)
        raise ProblemError(
            "unsupported-media-type",
            f"Content-Encoding {encoding!r} is not supported for request bodies; send them uncompressed.",
            headers={"Accept-Encoding": "identity"},
        )


class RateLimiter:
    """Token bucket per client: ``per_minute`` requests on average, bursts of ``burst``.

    Parameters
    ----------
    per_minute : int
        Sustained rate; 0 disables the limiter.
    burst : int
        Bucket size; 0 means ``per_minute``.
    max_clients : int
        Buckets kept; the least recently refilled are dropped beyond it.
    """

    def __init__(self, per_minute: int, burst: int = 0, max_clients: int = 10_000) -> None:
        self.rate = per_minute / 60.0
        self.capacity = float(burst or per_minute)
        self.max_clients = max_clients
        self._buckets: dict[str, tuple[float, float]] = {}
        self._lock = threading.Lock()

    @property
    def enabled(self) -> bool:
        return self.rate > 0

    def acquire(self, client: str, now: float | None = None) -> float:
        """Take one token for ``client``; return 0 if allowed, else seconds to wait."""
        if not self.enabled:
            return 0.0
        now = time.monotonic() if now is None else now
        with self._lock:
            tokens, stamp = self._buckets.pop(client, (self.capacity, now))
            tokens = min(self.capacity, tokens + (now - stamp) * self.rate)
            if tokens >= 1.0:
                self._buckets[client] = (tokens - 1.0, now)
                wait = 0.0
            else:
                self._buckets[client] = (tokens, now)
                wait = (1.0 - tokens) / self.rate
            while len(self._buckets) > self.max_clients:
                self._buckets.pop(next(iter(self._buckets)))
        return wait


    def pending(self, client: str, now: float | None = None) -> float:
        """Seconds until ``client`` may take a token again (0 if it may now); takes nothing."""
        if not self.enabled:
            return 0.0
        now = time.monotonic() if now is None else now
        with self._lock:
            tokens, stamp = self._buckets.get(client, (self.capacity, now))
        tokens = min(self.capacity, tokens + (now - stamp) * self.rate)
        return 0.0 if tokens >= 1.0 else (1.0 - tokens) / self.rate


def retry_after(seconds: float) -> dict[str, str]:
    """A Retry-After header of whole seconds, at least 1."""
    return {"Retry-After": str(max(1, math.ceil(seconds)))}
