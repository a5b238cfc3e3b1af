"""In-process harness: the real app (with its real worker processes) driven through httpx's ASGI transport.

The app runs on an event loop in a background thread, with its lifespan
entered, so tests stay plain synchronous functions and several differently
configured apps can live side by side.
"""

from __future__ import annotations

import asyncio
import hashlib
import threading
from collections.abc import Iterator
from typing import Any

import httpx
import pytest

from service.app import create_app
from service.runtime.settings import Settings

TEST_KEY = "harbour-street-test-key"
DASHBOARD_ORIGIN = "http://dashboard.harbour.test"


class Harness:
    """One app instance with its pool, and a synchronous client for it."""

    def __init__(self, **overrides: Any) -> None:
        overrides.setdefault("workers", 2)
        self.settings = Settings(**overrides)
        self.app = create_app(self.settings)
        self.service = self.app.state.service
        self.loop = asyncio.new_event_loop()
        self._thread = threading.Thread(target=self.loop.run_forever, name="harness-loop", daemon=True)
        self._thread.start()
        self._lifespan = self.app.router.lifespan_context(self.app)
        self.run(self._lifespan.__aenter__())
        assert self.run(self.service.pool.wait_ready(60.0)), "workers did not start"
        self.client = httpx.AsyncClient(transport=httpx.ASGITransport(app=self.app), base_url="http://bandwise.test", timeout=60.0)

    def run(self, coro: Any, timeout: float = 120.0) -> Any:
        return asyncio.run_coroutine_threadsafe(coro, self.loop).result(timeout)

    def submit(self, method: str, url: str, **kwargs: Any) -> Any:
        """Start a request without waiting; returns a concurrent future."""
        return asyncio.run_coroutine_threadsafe(self.client.request(method, url, **kwargs), self.loop)

    def request(self, method: str, url: str, **kwargs: Any) -> httpx.Response:
        return self.run(self.client.request(method, url, **kwargs))

    def get(self, url: str, **kwargs: Any) -> httpx.Response:
        return self.request("GET", url, **kwargs)

    def post(self, url: str, **kwargs: Any) -> httpx.Response:
        return self.request("POST", url, **kwargs)

    def close(self) -> None:
        try:
            self.run(self.client.aclose())
            self.run(self._lifespan.__aexit__(None, None, None))
        finally:
            self.loop.call_soon_threadsafe(self.loop.stop)
            self._thread.join(10)


@pytest.fixture(scope="session")
def api() -> Iterator[Harness]:
    """Default settings, two workers."""
    h = Harness()
    yield h
    h.close()


@pytest.fixture(scope="session")
def small() -> Iterator[Harness]:
    """Tiny limits, so every limit can be hit with small bodies."""
    h = Harness(
        workers=1,
        max_body_bytes=4096,
        max_points=50,
        max_predict_points=5,
        max_curve_points=20,
        max_replicates=30,
        max_batch_series=3,
        max_batch_points=100,
        max_candidates=10,
        default_curve_points=15,
    )
    yield h
    h.close()


@pytest.fixture(scope="session")
def secured() -> Iterator[Harness]:
    """API keys on, CORS allow-list for one dashboard origin, a per-client rate limit."""
    h = Harness(
        workers=1,
        api_keys=[hashlib.sha256(TEST_KEY.encode()).hexdigest(), hashlib.sha256(b"another-key").hexdigest()],
        cors_origins=[DASHBOARD_ORIGIN],
    )
    yield h
    h.close()


def problem_ok(response: httpx.Response, status: int) -> dict[str, Any]:
    """Assert an RFC 9457 problem with ``status``; return the document."""
    assert response.status_code == status, (response.status_code, response.text[:500])
    assert response.headers["content-type"].startswith("application/problem+json"), response.headers["content-type"]
    doc = response.json()
    for key in ("type", "title", "status", "detail"):
        assert key in doc, (key, doc)
    assert doc["status"] == status
    assert doc["type"].startswith("/problems/")
    assert "Traceback" not in response.text
    assert doc.get("request_id") == response.headers["x-request-id"]
    return doc
