"""Servers for the client tests, all real and all on loopback.

* :class:`InProcessApp`: the real app (``create_app(settings)``, with its real
  worker processes) on an event loop in a background thread.  The async
  client reaches it through :class:`httpx.ASGITransport`; the sync client
  through :class:`LoopTransport`, which runs that transport on the app's loop.
* :class:`ScriptedServer`: a small ``http.server`` on 127.0.0.1 in a thread
  that answers from a script (e.g. 503 with ``Retry-After`` twice, then 200)
  and records when and what it was sent.  For retries, timeouts and answers
  the real service never gives.
* :func:`live_server`: ``bandwise serve --host 127.0.0.1 --port <free>`` as a
  separate process (system tests).
"""

from __future__ import annotations

import asyncio
import hashlib
import os
import socket
import subprocess
import sys
import threading
import time
from collections.abc import Awaitable, Callable, Iterator
from dataclasses import dataclass, field
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Any, TypeVar

import httpx
import pytest

from service.app import create_app
from service.client import AsyncBandwiseClient, BandwiseClient, RetryPolicy
from service.runtime.settings import Settings

T = TypeVar("T")

API_KEY = "harbour-street-client-key"
OTHER_KEY = "parcel-depot-client-key"
FAST_RETRY = RetryPolicy(attempts=4, backoff=0.02, max_backoff=0.1, total=10.0)


def digest(key: str) -> str:
    return hashlib.sha256(key.encode()).hexdigest()


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


# ---------------------------------------------------------------- in-process


class LoopTransport(httpx.BaseTransport):
    """Synchronous transport into an ASGI app that lives on another thread's event loop."""

    def __init__(self, app: Any, loop: asyncio.AbstractEventLoop) -> None:
        self._inner = httpx.ASGITransport(app=app)
        self._loop = loop

    def handle_request(self, request: httpx.Request) -> httpx.Response:
        body = request.read()

        async def forward() -> tuple[int, list[tuple[bytes, bytes]], bytes]:
            inner = httpx.Request(request.method, request.url, headers=request.headers, content=body)
            response = await self._inner.handle_async_request(inner)
            raw = b"".join([chunk async for chunk in response.stream])  # type: ignore[union-attr]
            return response.status_code, response.headers.raw, raw

        status, headers, raw = asyncio.run_coroutine_threadsafe(forward(), self._loop).result(120)
        return httpx.Response(status, headers=headers, content=raw)


class InProcessApp:
    """One configured app with its worker pool, started and stopped with its lifespan."""

    def __init__(self, **overrides: Any) -> None:
        overrides.setdefault("workers", 1)
        overrides.setdefault("access_log", False)
        self.settings = Settings(**overrides)
        self.app = create_app(self.settings)
        self.loop = asyncio.new_event_loop()
        self._thread = threading.Thread(target=self.loop.run_forever, name="client-test-app", daemon=True)
        self._thread.start()
        self._lifespan = self.app.router.lifespan_context(self.app)
        self.run(self._lifespan.__aenter__())
        assert self.run(self.app.state.service.pool.wait_ready(60.0)), "worker processes did not start"

    def run(self, coro: Awaitable[T], timeout: float = 120.0) -> T:
        """Run a coroutine on the app's loop and wait for it."""
        return asyncio.run_coroutine_threadsafe(coro, self.loop).result(timeout)  # type: ignore[arg-type]

    def client(self, **kwargs: Any) -> BandwiseClient:
        """A sync client talking to this app."""
        kwargs.setdefault("retry", FAST_RETRY)
        return BandwiseClient("http://bandwise.test", transport=LoopTransport(self.app, self.loop), **kwargs)

    def run_async(self, work: Callable[[AsyncBandwiseClient], Awaitable[T]], **kwargs: Any) -> T:
        """Run ``work(client)`` with an async client on the app's loop."""
        kwargs.setdefault("retry", FAST_RETRY)

        async def main() -> T:
            async with AsyncBandwiseClient("http://bandwise.test", transport=httpx.ASGITransport(app=self.app), **kwargs) as client:
                return await work(client)

        return self.run(main())

    def raw(self, method: str, path: str, **kwargs: Any) -> httpx.Response:
        """A plain httpx request to the app (no client library involved)."""

        async def main() -> httpx.Response:
            async with httpx.AsyncClient(transport=httpx.ASGITransport(app=self.app), base_url="http://bandwise.test") as http:
                return await http.request(method, path, **kwargs)

        return self.run(main())

    def close(self) -> None:
        try:
            self.run(self._lifespan.__aexit__(None, None, None))
        finally:
            self.loop.call_soon_threadsafe(self.loop.stop)
            self._thread.join(10)


@pytest.fixture(scope="session")
def app() -> Iterator[InProcessApp]:
    """API keys on and a 256 KiB body limit; otherwise default limits."""
    instance = InProcessApp(api_keys=[digest(API_KEY), digest(OTHER_KEY)], max_body_bytes=256 * 1024)
    yield instance
    instance.close()


@pytest.fixture(scope="session")
def limited_app() -> Iterator[InProcessApp]:
    """One request per minute per client: the second answer is a 429 with Retry-After."""
    instance = InProcessApp(rate_limit_per_minute=1, rate_limit_burst=1)
    yield instance
    instance.close()


# ---------------------------------------------------------------- scripted


@dataclass(frozen=True)
class Reply:
    """One scripted answer."""

    status: int = 200
    body: bytes = b"{}"
    headers: dict[str, str] = field(default_factory=lambda: {"Content-Type": "application/json"})
    delay: float = 0.0


@dataclass(frozen=True)
class Seen:
    """One request as the scripted server received it."""

    at: float  # time.monotonic() on arrival
    answered_at: float
    method: str
    path: str
    headers: dict[str, str]
    body: bytes


Script = list[Reply | Callable[[], Reply]]


class ScriptedServer:
    """``http.server`` on 127.0.0.1 answering each request with the next :class:`Reply` (the last one repeats).

    An entry may be a function returning the reply, called when the request arrives.
    """

    def __init__(self, script: Script) -> None:
        assert script, "a script needs at least one reply"
        self.script = list(script)
        self.seen: list[Seen] = []
        self._lock = threading.Lock()
        server = self

        class Handler(BaseHTTPRequestHandler):
            def log_message(self, format: str, *args: Any) -> None:  # noqa: A002 - stdlib signature
                pass

            def _answer(self) -> None:
                arrived = time.monotonic()
                length = int(self.headers.get("Content-Length") or 0)
                body = self.rfile.read(length) if length else b""
                with server._lock:
                    entry = server.script[min(len(server.seen), len(server.script) - 1)]
                    reply = entry if isinstance(entry, Reply) else entry()
                    server.seen.append(Seen(arrived, arrived + reply.delay, self.command, self.path, {k.lower(): v for k, v in self.headers.items()}, body))
                if reply.delay:
                    time.sleep(reply.delay)
                try:
                    self.send_response(reply.status)
                    for name, value in reply.headers.items():
                        self.send_header(name, value)
                    self.send_header("Content-Length", str(len(reply.body)))
                    self.end_headers()
                    self.wfile.write(reply.body)
                except (BrokenPipeError, ConnectionResetError):
                    pass  # the client gave up (timeout tests)

            do_GET = _answer
            do_POST = _answer

        self._httpd = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self._httpd.daemon_threads = True
        self.url = f"http://127.0.0.1:{self._httpd.server_address[1]}"
        self._thread = threading.Thread(target=self._httpd.serve_forever, kwargs={"poll_interval": 0.05}, daemon=True)
        self._thread.start()

    def close(self) -> None:
        self._httpd.shutdown()
        self._httpd.server_close()
        self._thread.join(5)


@pytest.fixture
def scripted() -> Iterator[Callable[[Script], ScriptedServer]]:
    """Factory of scripted servers, all closed after the test."""
    servers: list[ScriptedServer] = []

    def make(script: Script) -> ScriptedServer:
        server = ScriptedServer(script)
        servers.append(server)
        return server

    yield make
    for server in servers:
        server.close()


# ---------------------------------------------------------------- live


@dataclass(frozen=True)
class LiveServer:
    url: str
    api_key: str
    max_body_bytes: int
    process: subprocess.Popen[bytes]


def bandwise_executable() -> str:
    beside = Path(sys.executable).with_name("bandwise")
    if beside.exists():
        return str(beside)
    pytest.fail("no `bandwise` console script beside the interpreter; install the project (pip install -e .)")


@pytest.fixture(scope="session")
def live_server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[LiveServer]:
    """``bandwise serve`` on a free loopback port, with an API key and a 1 MiB body limit."""
    port = free_port()
    max_body = 1024 * 1024
    env = dict(os.environ)
    env.update(
        BANDWISE_WORKERS="1",
        BANDWISE_API_KEYS=digest(API_KEY),
        BANDWISE_MAX_BODY_BYTES=str(max_body),
        BANDWISE_ACCESS_LOG="false",
        BANDWISE_DRAIN_SECONDS="1",
    )
    log_path = tmp_path_factory.mktemp("live") / "bandwise.log"
    with open(log_path, "wb") as log_file:
        process = subprocess.Popen([bandwise_executable(), "serve", "--host", "127.0.0.1", "--port", str(port)], stdout=log_file, stderr=subprocess.STDOUT, env=env)
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 60.0
        while True:
            if process.poll() is not None:
                pytest.fail(f"bandwise serve exited with {process.returncode}: {log_path.read_text()[-2000:]}")
            try:
                if httpx.get(f"{url}/readyz", timeout=2.0).status_code == 200:
                    break
            except httpx.TransportError:
                pass
            if time.monotonic() > deadline:
                pytest.fail(f"bandwise serve not ready within 60 s: {log_path.read_text()[-2000:]}")
            time.sleep(0.1)
        yield LiveServer(url, API_KEY, max_body, process)
    finally:
        process.terminate()
        try:
            process.wait(15)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(5)
