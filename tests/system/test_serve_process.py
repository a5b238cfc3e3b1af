"""A real ``bandwise serve`` process on a loopback port, spoken to over TCP.

The process is started with ``--port 0`` and the address it prints is read
back, so no port is guessed.  Covered: the start-up message, every contract
path, gzip and the body limit on the wire, ``python -m service``, graceful
shutdown on SIGTERM (``/readyz`` 503 at once, in-flight work finishes, new
work refused, exit status 0), and ``/docs`` in headless Chromium loading
nothing from outside loopback.
"""

from __future__ import annotations

import os
import re
import signal
import socket
import subprocess
import sys
import threading
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import orjson
import pytest

from tests.conftest import require_program

pytestmark = pytest.mark.system

REPO = Path(__file__).resolve().parents[2]
ARTIFACTS = REPO / "artifacts"
START_TIMEOUT = 60.0


def bandwise_executable() -> str:
    beside = Path(sys.executable).with_name("bandwise")
    if not beside.exists():
        pytest.fail(f"no bandwise executable beside {sys.executable}; install the package")
    return str(beside)


class Server:
    """One service process; reads its announced address from stdout."""

    def __init__(self, argv: list[str], env: dict[str, str] | None = None, cwd: Path = REPO) -> None:
        self.started = time.perf_counter()
        self.process = subprocess.Popen(
            argv,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            env={**os.environ, **(env or {})},
            cwd=cwd,
            start_new_session=True,
        )
        self.stdout_lines: list[str] = []
        self.stderr_lines: list[str] = []
        self._threads = [
            threading.Thread(target=self._pump, args=(self.process.stdout, self.stdout_lines), daemon=True),
            threading.Thread(target=self._pump, args=(self.process.stderr, self.stderr_lines), daemon=True),
        ]
        for t in self._threads:
            t.start()
        self.base = self._await_address()

    @staticmethod
    def _pump(stream: Any, sink: list[str]) -> None:
        for raw in iter(stream.readline, b""):
            sink.append(raw.decode("utf-8", "replace").rstrip("\n"))

    def _await_address(self) -> str:
        deadline = time.monotonic() + START_TIMEOUT
        while time.monotonic() < deadline:
            for line in self.stdout_lines:
                match = re.search(r"listening on (http://127\.0\.0\.1:\d+)", line)
                if match:
                    return match.group(1)
            if self.process.poll() is not None:
                break
            time.sleep(0.01)
        self.kill()
        pytest.fail(f"server did not announce its address; stdout={self.stdout_lines} stderr={self.stderr_lines[-20:]}")

    def wait_ok(self, path: str, timeout: float = START_TIMEOUT) -> float:
        """Poll ``path`` until 200 (bounded); return seconds since the process was started."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            try:
                if httpx.get(self.base + path, timeout=2.0).status_code == 200:
                    return time.perf_counter() - self.started
            except httpx.TransportError:
                pass
            assert self.process.poll() is None, self.stderr_lines[-20:]
            time.sleep(0.01)
        pytest.fail(f"{path} never answered 200")

    def terminate(self, timeout: float = 30.0) -> int:
        if self.process.poll() is None:
            self.process.send_signal(signal.SIGTERM)
        try:
            return self.process.wait(timeout)
        except subprocess.TimeoutExpired:
            self.kill()
            pytest.fail("server did not stop after SIGTERM")

    def kill(self) -> None:
        if self.process.poll() is None:
            os.killpg(self.process.pid, signal.SIGKILL)
            self.process.wait(10)


@pytest.fixture(scope="module")
def server() -> Iterator[Server]:
    s = Server([bandwise_executable(), "serve", "--host", "127.0.0.1", "--port", "0", "--workers", "2"], env={"BANDWISE_MAX_BODY_BYTES": str(2 * 1024 * 1024)})
    try:
        first_200 = s.wait_ok("/healthz")
        print(f"\nprocess start to first 200 on /healthz: {first_200:.3f} s")
        s.wait_ok("/readyz")
        yield s
    finally:
        code = s.terminate()
        assert code == 0, (code, s.stderr_lines[-20:])


def test_start_message_names_the_demo_page_and_the_docs(server: Server) -> None:
    text = "\n".join(server.stdout_lines)
    assert f"demo page: {server.base}/" in text
    assert f"API docs:  {server.base}/docs" in text


def test_every_contract_path_over_tcp(server: Server) -> None:
    body = {"x": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0], "y": [1.0, 3.0, 2.0, 5.0, 4.0, 6.0], "bandwidth": 1.5, "predict_at": [7.0]}
    with httpx.Client(base_url=server.base, timeout=30.0) as client:
        smooth = client.post("/v1/smooth", json=body)
        assert smooth.status_code == 200 and smooth.json()["predictions"][0]["extrapolated"] is True
        assert smooth.headers["x-request-id"]
        batch = client.post("/v1/smooth/batch", json={"series": [body, {"x": [1.0]}]})
        assert batch.status_code == 200
        assert "problem" in batch.json()["results"][1]
        bw = client.post("/v1/bandwidth", json={"x": [float(i) for i in range(20)], "y": [float(i % 4) for i in range(20)], "candidate_count": 5})
        assert bw.status_code == 200 and len(bw.json()["bandwidth"]["candidates"]) == 5
        assert client.get("/v1/kernels").status_code == 200
        assert client.get("/v1/demo/parcel_depot").status_code == 200
        assert client.get("/healthz").json() == {"status": "ok"}
        assert client.get("/readyz").status_code == 200
        assert "bandwise_requests_total" in client.get("/metrics").text
        assert client.get("/").headers["content-type"].startswith("text/html")
        assert client.get("/docs").status_code == 200
        assert "/v1/smooth" in client.get("/openapi.json").json()["paths"]
        bad = client.post("/v1/smooth", content=b"{", headers={"content-type": "application/json"})
        assert bad.status_code == 400 and bad.headers["content-type"] == "application/problem+json"


def test_gzip_on_the_wire(server: Server) -> None:
    n = 20_000
    body = {"x": [i * 0.01 for i in range(n)], "y": [(i % 17) * 0.1 for i in range(n)], "bandwidth": 0.5, "include_fitted": True}
    with httpx.Client(base_url=server.base, timeout=60.0) as client:
        with client.stream("POST", "/v1/smooth", json=body, headers={"accept-encoding": "gzip"}) as response:
            raw = b"".join(response.iter_raw())
            assert response.headers["content-encoding"] == "gzip"
        assert raw[:2] == b"\x1f\x8b"  # gzip magic number (RFC 1952)
        import gzip

        assert len(orjson.loads(gzip.decompress(raw))["fitted"]["estimate"]) == n


def test_body_limit_on_the_wire_is_answered_before_the_body(server: Server) -> None:
    host, port = server.base.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=10) as sock:
        head = f"POST /v1/smooth HTTP/1.1\r\nHost: {host}\r\nContent-Type: application/json\r\nContent-Length: {3 * 1024 * 1024}\r\n\r\n"
        sock.sendall(head.encode())
        reply = b""
        while b"\r\n\r\n" not in reply:
            chunk = sock.recv(4096)
            if not chunk:
                break
            reply += chunk
    assert reply.startswith(b"HTTP/1.1 413"), reply[:200]
    assert b"application/problem+json" in reply


def _minor_faults(pid: int) -> int:
    """Minor page faults of a process so far (``minflt``, field 10 of ``/proc/<pid>/stat``, proc(5))."""
    with open(f"/proc/{pid}/stat", encoding="ascii") as fh:
        return int(fh.read().rsplit(")", 1)[1].split()[7])


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="/proc and glibc's allocator")
def test_large_bodies_do_not_cost_the_http_process_fresh_pages_on_every_request(server: Server) -> None:
    # The HTTP process holds each body a few times over (read, joined, framed for the worker). With
    # glibc's defaults every such block is mmap'ed and unmapped again, so each request faults in
    # zeroed pages anew (measured: about 2,200 faults per 3 MB body, a quarter of the process's CPU).
    # Once the memory is kept for reuse, repeated requests of the same size fault in almost nothing.
    rng = np.random.default_rng(4)
    n = 100_000  # about 1.3 MB, under this server's 2 MiB body limit
    payload = {"x": np.round(rng.uniform(0.0, 100.0, n), 3).tolist(), "y": np.round(rng.normal(0.0, 1.0, n), 3).tolist(), "bandwidth": 2.0, "kernel": "epanechnikov"}
    body = orjson.dumps(payload)
    pages = len(body) // 4096
    assert pages > 200
    with httpx.Client(base_url=server.base, timeout=30.0) as client:
        def post() -> None:
            r = client.post("/v1/smooth", content=body, headers={"content-type": "application/json"})
            assert r.status_code == 200, r.text[:300]

        for _ in range(2):  # the heap grows to its working size
            post()
        before = _minor_faults(server.process.pid)
        for _ in range(4):
            post()
        per_request = (_minor_faults(server.process.pid) - before) / 4
    assert per_request < pages / 4, (per_request, pages)


def test_python_dash_m_service_runs_too() -> None:
    s = Server([sys.executable, "-m", "service", "--host", "127.0.0.1", "--port", "0", "--workers", "1"])
    try:
        s.wait_ok("/healthz")
        s.wait_ok("/readyz")
        r = httpx.post(s.base + "/v1/smooth", json={"x": [1, 2, 3, 4], "y": [1, 2, 1, 2], "bandwidth": 1.0}, timeout=30)
        assert r.status_code == 200
    finally:
        assert s.terminate() == 0


def test_packages_named_like_ours_in_the_start_directory_do_not_reach_the_workers(tmp_path: Path) -> None:
    # `service` is a common directory name: started from a project that has one, the workers
    # must still import Bandwise's packages, as the HTTP process does.
    for name in ("service", "estimators"):
        (tmp_path / name).mkdir()
        (tmp_path / name / "__init__.py").write_text("")
    s = Server([bandwise_executable(), "serve", "--host", "127.0.0.1", "--port", "0", "--workers", "1"], cwd=tmp_path)
    try:
        s.wait_ok("/readyz", timeout=30.0)
        r = httpx.post(s.base + "/v1/smooth", json={"x": [1, 2, 3, 4], "y": [1, 2, 1, 2], "bandwidth": 1.0}, timeout=30)
        assert r.status_code == 200, r.text[:300]
    finally:
        assert s.terminate() == 0, s.stderr_lines[-20:]


def test_a_port_in_use_is_one_line_and_exit_status_1() -> None:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen(1)
        port = busy.getsockname()[1]
        done = subprocess.run([bandwise_executable(), "serve", "--host", "127.0.0.1", "--port", str(port)], capture_output=True, text=True, timeout=60, cwd=REPO)
    assert done.returncode == 1
    assert f"bandwise: cannot listen on 127.0.0.1:{port}:" in done.stderr
    assert "Traceback" not in done.stderr


def test_a_misspelt_variable_is_logged_with_the_setting_it_resembles() -> None:
    s = Server([bandwise_executable(), "serve", "--host", "127.0.0.1", "--port", "0", "--workers", "1"], env={"BANDWISE_WORKRS": "3"})
    try:
        s.wait_ok("/healthz")
        warnings = [orjson.loads(line) for line in s.stderr_lines if "BANDWISE_WORKRS" in line]
        assert [(w["level"], w["variable"], w["did_you_mean"]) for w in warnings] == [("warning", "BANDWISE_WORKRS", "BANDWISE_WORKERS")]
    finally:
        assert s.terminate() == 0


def test_sigterm_drains_then_exits_zero() -> None:
    s = Server(
        [bandwise_executable(), "serve", "--host", "127.0.0.1", "--port", "0", "--workers", "1"],
        env={"BANDWISE_DRAIN_SECONDS": "60"},
    )
    try:
        s.wait_ok("/readyz")
        # A request that keeps the worker busy for a few seconds: 200 bootstrap refits of 100,000 points.
        n = 100_000
        slow_body = orjson.dumps({"x": list(range(n)), "y": [i % 5 for i in range(n)], "bandwidth": 40.0, "curve": {"points": 50}, "bands": {"replicates": 200}})
        result: dict[str, Any] = {}

        def slow() -> None:
            result["response"] = httpx.post(s.base + "/v1/smooth", content=slow_body, headers={"content-type": "application/json"}, timeout=120)

        worker = threading.Thread(target=slow)
        worker.start()
        deadline = time.monotonic() + 30
        while "bandwise_work_in_flight 1.0" not in httpx.get(s.base + "/metrics").text:
            assert time.monotonic() < deadline, "the slow request never reached a worker"
            time.sleep(0.01)
        s.process.send_signal(signal.SIGTERM)
        ready = httpx.get(s.base + "/readyz", timeout=5)
        assert ready.status_code == 503 and ready.json()["type"] == "/problems/shutting-down"
        refused = httpx.post(s.base + "/v1/smooth", json={"x": [1, 2, 3], "y": [1, 2, 3], "bandwidth": 1.0}, timeout=5)
        assert refused.status_code == 503 and "retry-after" in refused.headers
        assert httpx.get(s.base + "/healthz", timeout=5).status_code == 200
        worker.join(120)
        assert result["response"].status_code == 200, result["response"].text[:300]
        assert s.process.wait(30) == 0
    finally:
        s.kill()


def test_docs_in_chromium_load_nothing_from_outside(server: Server) -> None:
    executable = require_program("chromium")
    from playwright.sync_api import sync_playwright

    requested: list[str] = []
    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=executable, headless=True, args=["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update"])
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 1000})
            page.on("request", lambda request: requested.append(request.url))
            errors: list[str] = []
            page.on("pageerror", lambda exc: errors.append(str(exc)))
            page.route(re.compile(r"^(?!http://127\.0\.0\.1:\d+/).*"), lambda route: route.abort())
            page.goto(server.base + "/docs")
            page.wait_for_selector(".opblock-summary-path[data-path=\"/v1/smooth\"]", timeout=30_000)
            title = page.text_content(".info .title") or ""
            assert "Bandwise" in title
            ARTIFACTS.mkdir(exist_ok=True)
            page.screenshot(path=str(ARTIFACTS / "docs-page.png"), full_page=False)
            assert errors == []
        finally:
            browser.close()
    outside = [u for u in requested if not u.startswith(server.base) and not u.startswith("data:")]
    assert outside == [], outside
    assert any(u.endswith("/docs/assets/swagger-ui-bundle.js") for u in requested)
    assert any(u.endswith("/openapi.json") for u in requested)
