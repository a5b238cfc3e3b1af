"""A real ``bandwise serve`` process tried as a hostile or careless client would try it.

Each test names the defect it guards against: unbounded metric labels,
invented rate-limit identities, bodies in flight without a budget, connections
that never finish their headers or never read their answer, work for clients
that have gone away, and the smaller ones (compression negotiation, redirects,
API keys outside ASCII, workers that die).  Everything talks to 127.0.0.1;
every loop is bounded in count and time, and every held connection is closed
by the test at the end.
"""

from __future__ import annotations

import json
import secrets
import socket
import time
from collections.abc import Iterator

import httpx
import pytest

from tests.system.test_serve_process import Server, bandwise_executable

pytestmark = pytest.mark.system


def start(env: dict[str, str], workers: int = 1) -> Server:
    server = Server([bandwise_executable(), "serve", "--host", "127.0.0.1", "--port", "0", "--workers", str(workers)], env=env)
    try:
        server.wait_ok("/readyz", timeout=300.0)
    except BaseException:
        server.kill()
        raise
    return server


MIB = 1024 * 1024
PLAIN_ENV = {"BANDWISE_MAX_BODY_BYTES": str(8 * MIB), "BANDWISE_BODY_BYTES_IN_FLIGHT": str(16 * MIB)}


@pytest.fixture(scope="module")
def plain() -> Iterator[Server]:
    """A server with the default settings but small body limits (one worker)."""
    server = start(PLAIN_ENV)
    try:
        yield server
    finally:
        server.terminate()


def log_records(server: Server) -> list[dict[str, object]]:
    """The JSON log lines the server has written so far (stdout and stderr)."""
    out = []
    for line in [*server.stdout_lines, *server.stderr_lines]:
        if line.startswith("{"):
            try:
                out.append(json.loads(line))
            except ValueError:
                pass
    return out


def address(server: Server) -> tuple[str, int]:
    host, port = server.base.removeprefix("http://").rsplit(":", 1)
    return host, int(port)


# ------------------------------------------------------------------ metrics


def test_random_methods_and_paths_add_no_metric_series(plain: Server) -> None:
    """200 requests with invented methods and paths add fewer than 100 lines to /metrics (issue target)."""
    before = httpx.get(plain.base + "/metrics", timeout=10).text.count("\n")
    with httpx.Client(base_url=plain.base, timeout=10) as client:
        for _ in range(200):
            method = "X" + secrets.token_hex(40).upper()
            client.request(method, "/" + secrets.token_hex(8))
    after = httpx.get(plain.base + "/metrics", timeout=10).text
    assert after.count("\n") - before < 100
    assert 'method="OTHER"' in after


# ------------------------------------------------------------------ rate-limit identity

NON_ASCII_KEY = "Hafenstraße-Kühlhaus-ключ"


def test_invented_identities_gain_nothing_against_the_rate_limit() -> None:
    """Keys off: a new Bearer token and a new X-Forwarded-For on every request still share one bucket (burst 5)."""
    server = start({"BANDWISE_RATE_LIMIT_PER_MINUTE": "20", "BANDWISE_RATE_LIMIT_BURST": "5"})
    try:
        statuses = []
        with httpx.Client(base_url=server.base, timeout=10) as client:
            for i in range(40):
                headers = {"Authorization": "Bearer " + secrets.token_hex(16), "X-Forwarded-For": f"10.{i}.{i}.{i}"}
                statuses.append(client.get("/v1/kernels", headers=headers).status_code)
        assert statuses.count(200) <= 5, statuses
        assert statuses.count(429) >= 35
    finally:
        server.terminate()


def test_failed_authentications_are_braked_and_utf8_keys_match() -> None:
    """Keys on: after 10 wrong keys from one address, even the right key gets 429 until the bucket refills."""
    import hashlib

    digest = hashlib.sha256(NON_ASCII_KEY.encode("utf-8")).hexdigest()
    server = start({"BANDWISE_API_KEYS": digest})
    try:
        with httpx.Client(base_url=server.base, timeout=10) as client:
            good = {"Authorization": b"Bearer " + NON_ASCII_KEY.encode("utf-8")}
            assert client.get("/v1/kernels", headers=good).status_code == 200  # a UTF-8 key matches its digest
            statuses = [client.get("/v1/kernels", headers={"Authorization": "Bearer " + secrets.token_hex(16)}).status_code for _ in range(30)]
            assert statuses[:10] == [401] * 10
            assert set(statuses[10:]) == {429}
            refused = client.get("/v1/kernels", headers=good)
            assert refused.status_code == 429 and int(refused.headers["Retry-After"]) >= 1
    finally:
        server.terminate()


# ------------------------------------------------------------------ bodies in flight


def held_upload(server: Server, declared: int, sent: int) -> socket.socket:
    """A connection that declares ``declared`` body bytes, sends ``sent`` of them and then holds."""
    sock = socket.create_connection(address(server), timeout=10)
    head = f"POST /v1/smooth HTTP/1.1\r\nHost: replica\r\nContent-Type: application/json\r\nContent-Length: {declared}\r\n\r\n"
    sock.sendall(head.encode("ascii") + b" " * sent)
    return sock


def read_status(sock: socket.socket, timeout: float) -> tuple[int, bytes]:
    """Status and head of the answer on ``sock`` (0 if none within ``timeout``)."""
    sock.settimeout(timeout)
    data = b""
    try:
        while b"\r\n\r\n" not in data and len(data) < 65536:
            part = sock.recv(4096)
            if not part:
                break
            data += part
    except (TimeoutError, OSError):
        pass
    if not data.startswith(b"HTTP/1.1 "):
        return 0, data
    return int(data[9:12]), data


def test_bodies_in_flight_have_a_byte_budget(plain: Server) -> None:
    """Six held 6 MiB uploads against a 16 MiB budget: two are taken, four get 503 + Retry-After at once."""
    held = [held_upload(plain, 6 * MIB, MIB) for _ in range(2)]
    try:
        time.sleep(0.5)
        refused = [held_upload(plain, 6 * MIB, 0) for _ in range(4)]
        for sock in refused:
            status, head = read_status(sock, 5.0)
            assert status == 503, head
            assert b"retry-after:" in head.lower()
            sock.close()
        assert httpx.get(plain.base + "/healthz", timeout=5).status_code == 200
        metrics = httpx.get(plain.base + "/metrics", timeout=5).text
        assert 'bandwise_requests_shed_total{reason="bodies_in_flight"} 4.0' in metrics
    finally:
        for sock in held:
            sock.close()
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline:  # the held reservations are returned once their clients have gone
        sock = held_upload(plain, 6 * MIB, 0)
        status, _ = read_status(sock, 0.5)
        sock.close()
        if status == 0:
            break
        time.sleep(0.2)
    assert status == 0, "a 6 MiB body should be admitted (and awaited) once the held ones are gone"


# ------------------------------------------------------------------ connection timeouts


def closed_by_server(sock: socket.socket, until: float) -> bool:
    """True once the server has closed ``sock`` (EOF or reset), False if still open at ``until``."""
    while time.monotonic() < until:
        sock.settimeout(max(0.05, min(1.0, until - time.monotonic())))
        try:
            if sock.recv(4096) == b"":
                return True
        except TimeoutError:
            continue
        except OSError:
            return True
    return False


def test_idle_and_slow_header_connections_are_closed(plain: Server) -> None:
    """20 connections, half silent and half with partial headers, are closed by the server within 20 s (default timeouts)."""
    socks = []
    try:
        for i in range(20):
            sock = socket.create_connection(address(plain), timeout=10)
            if i % 2:
                sock.sendall(b"GET /healthz HTTP/1.1\r\nHost: replica\r\nX-Slow: ")
            socks.append(sock)
        until = time.monotonic() + 20.0
        assert all(closed_by_server(sock, until) for sock in socks)
    finally:
        for sock in socks:
            sock.close()


def test_a_client_that_never_reads_its_answer_is_disconnected() -> None:
    """An answer of several MB to a client that reads nothing is dropped after the send timeout (2 s here)."""
    server = start({"BANDWISE_SEND_TIMEOUT_SECONDS": "2"})
    try:
        n = 2000
        body = json.dumps({"x": list(range(n)), "y": [i % 7 for i in range(n)], "bandwidth": 30.0, "curve": {"points": 10000}, "predict_at": [i * 0.02 for i in range(100000)]}).encode()
        sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, 4096)
        sock.settimeout(30)
        sock.connect(address(server))
        try:
            head = f"POST /v1/smooth HTTP/1.1\r\nHost: replica\r\nContent-Type: application/json\r\nContent-Length: {len(body)}\r\n\r\n"
            sock.sendall(head.encode("ascii") + body)
            time.sleep(8.0)  # the work takes a moment, then the answer waits on a client that reads nothing
            received = b""
            sock.settimeout(5)
            try:
                while len(received) < 64 * MIB:
                    part = sock.recv(1 << 20)
                    if not part:
                        break
                    received += part
            except OSError:
                pass
            head_end = received.find(b"\r\n\r\n")
            assert received.startswith(b"HTTP/1.1 200"), received[:200]
            length = int(next(line.split(b":")[1] for line in received[:head_end].split(b"\r\n") if line.lower().startswith(b"content-length")))
            assert len(received) - head_end - 4 < length, "the whole answer arrived: the server kept it for a client that read nothing"
        finally:
            sock.close()
    finally:
        server.terminate()


# ------------------------------------------------------------------ clients that leave


def heavy_body() -> bytes:
    n = 60_000
    return json.dumps(
        {"x": [i * 0.001 for i in range(n)], "y": [(i * 7919) % 101 * 0.01 for i in range(n)], "curve": {"points": 5000}, "bands": {"replicates": 5000}}
    ).encode()


def long_body() -> bytes:
    """A request that runs for tens of seconds: exact windows of about 10,000 readings at 10,000 points, 5,000 draws."""
    n = 60_000
    return json.dumps(
        {"x": [i * 0.001 for i in range(n)], "y": [(i * 7919) % 101 * 0.01 for i in range(n)], "kernel": "epanechnikov", "bandwidth": 5.0,
         "engine": "exact", "curve": {"points": 10_000}, "bands": {"method": "residual_bootstrap", "replicates": 5000}}
    ).encode()


def test_work_for_clients_that_left_is_stopped(plain: Server) -> None:
    """Three heavy requests dropped by their clients free the one worker at once; the log and metrics say 499."""
    def gone() -> int:
        return sum(1 for r in log_records(plain) if r.get("status") == 499 and r.get("route") == "/v1/smooth")

    def gone_counted() -> float:
        line = 'bandwise_requests_total{method="POST",route="/v1/smooth",status="499"} '
        text = httpx.get(plain.base + "/metrics", timeout=5).text
        return sum(float(row.removeprefix(line)) for row in text.splitlines() if row.startswith(line))

    time.sleep(0.3)
    logged, counted = gone(), gone_counted()
    body = heavy_body()
    head = f"POST /v1/smooth HTTP/1.1\r\nHost: replica\r\nContent-Type: application/json\r\nContent-Length: {len(body)}\r\n\r\n".encode("ascii")
    dropped = []
    for _ in range(3):
        sock = socket.create_connection(address(plain), timeout=10)
        sock.sendall(head + body)
        dropped.append(sock)
    time.sleep(1.0)
    for sock in dropped:
        sock.close()
    # Without cancellation these three hold the only worker up to the 30 s deadline each; the client gives up after 10 s.
    small = {"x": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0], "y": [1.0, 3.0, 2.0, 5.0, 4.0, 6.0], "bandwidth": 1.5}
    answer = httpx.post(plain.base + "/v1/smooth", json=small, timeout=10.0)
    assert answer.status_code == 200, answer.text
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline and gone() < logged + 3:
        time.sleep(0.1)
    assert gone() == logged + 3
    assert gone_counted() == counted + 3
    assert not any("traceback" in r for r in log_records(plain))


# ------------------------------------------------------------------ smaller defects


def large_answer_body() -> dict[str, object]:
    """A small request whose answer is well above the 64 KiB gzip threshold."""
    return {"x": [float(i) for i in range(50)], "y": [float(i % 4) for i in range(50)], "bandwidth": 4.0, "curve": {"points": 5000}}


@pytest.mark.parametrize(("accept", "gzipped"), [("gzip", True), ("gzip;q=0", False), ("identity", False), ("*;q=0.5", True), ("br, gzip;q=0, *", False)])
def test_gzip_only_when_the_client_accepts_it(plain: Server, accept: str, gzipped: bool) -> None:
    answer = httpx.post(plain.base + "/v1/smooth", json=large_answer_body(), headers={"Accept-Encoding": accept}, timeout=30)
    assert answer.status_code == 200
    assert (answer.headers.get("content-encoding") == "gzip") is gzipped


def test_host_header_never_reaches_a_location(plain: Server) -> None:
    answer = httpx.get(plain.base + "/healthz/", headers={"Host": "evil.example"}, timeout=10, follow_redirects=False)
    assert "evil.example" not in answer.headers.get("location", "")
    assert answer.status_code == 404


def test_subnormal_x_is_a_client_error_without_traceback(plain: Server) -> None:
    body = {"x": [i * 5e-324 for i in range(12)], "y": [float(i % 3) for i in range(12)]}
    answer = httpx.post(plain.base + "/v1/bandwidth", json=body, timeout=30)
    assert answer.status_code == 422 and "rescale x" in answer.json()["detail"]
    time.sleep(0.2)
    assert not any("traceback" in r for r in log_records(plain))


def worker_pids(server: Server) -> list[int]:
    """Worker processes: grandchildren of the server (through the fork server)."""
    import psutil

    return [p.pid for p in psutil.Process(server.process.pid).children(recursive=True) if p.ppid() != server.process.pid]


def test_a_worker_killed_while_idle_is_replaced_at_once(plain: Server) -> None:
    import os
    import signal

    before = httpx.get(plain.base + "/metrics", timeout=5).text
    assert 'bandwise_worker_restarts_total{reason="died"} 0.0' in before
    pids = worker_pids(plain)
    assert len(pids) == 1
    os.kill(pids[0], signal.SIGKILL)
    deadline = time.monotonic() + 5
    metrics = before
    while time.monotonic() < deadline and 'restarts_total{reason="died"} 1.0' not in metrics:  # no request is sent meanwhile
        time.sleep(0.1)
        metrics = httpx.get(plain.base + "/metrics", timeout=5).text
    assert 'bandwise_worker_restarts_total{reason="died"} 1.0' in metrics
    plain.wait_ok("/readyz", timeout=30)


def test_a_worker_killed_mid_job_gives_a_retryable_answer(plain: Server) -> None:
    import os
    import signal
    import threading

    plain.wait_ok("/readyz", timeout=30)
    result: dict[str, httpx.Response] = {}
    thread = threading.Thread(target=lambda: result.setdefault("r", httpx.post(plain.base + "/v1/smooth", content=heavy_body(), headers={"Content-Type": "application/json"}, timeout=60)))
    thread.start()
    time.sleep(2.0)
    for pid in worker_pids(plain):
        os.kill(pid, signal.SIGTERM)  # not SIGKILL: that one is read as the memory limit (503 out-of-memory)
    thread.join(60)
    answer = result["r"]
    assert answer.status_code == 500
    assert int(answer.headers["Retry-After"]) >= 1


def test_drain_time_running_out_answers_in_flight_work_with_a_problem() -> None:
    import signal
    import threading

    server = start({"BANDWISE_DRAIN_SECONDS": "1"})
    try:
        result: dict[str, httpx.Response] = {}
        thread = threading.Thread(target=lambda: result.setdefault("r", httpx.post(server.base + "/v1/smooth", content=long_body(), headers={"Content-Type": "application/json"}, timeout=60)))
        thread.start()
        time.sleep(2.0)
        server.process.send_signal(signal.SIGTERM)
        thread.join(60)
        answer = result["r"]
        assert answer.status_code == 503 and answer.headers["content-type"] == "application/problem+json", answer.text
        assert answer.json()["type"] == "/problems/shutting-down" and "Retry-After" in answer.headers
        assert server.process.wait(30) == 0
        time.sleep(0.3)
        assert not any("Traceback" in line or "CancelledError" in line for line in server.stderr_lines), server.stderr_lines[-10:]
        assert not any(r.get("msg", r.get("message", "")) == "worker replaced" for r in log_records(server))
    finally:
        server.kill()
