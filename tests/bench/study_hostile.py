"""Measured figures of the reliability table (docs/reliability.md): a real server tried as a hostile client would.

``python -m tests.bench.study_hostile`` starts ``bandwise serve`` on 127.0.0.1 with its default
settings (2 workers) and prints one line per target:

- 48 connections holding 60 MB uploads: growth of the whole process tree's resident memory
  (the largest sum seen, sampled every 50 ms) and /healthz latency meanwhile (p50, p99, max);
- six heavy requests dropped by their clients: how long small requests from others then take;
- 200 requests with invented methods and paths: lines added to /metrics;
- 20 idle or slow-header connections: when the server has closed them all.

Everything stays on loopback; every loop is bounded in count and time.
"""

from __future__ import annotations

import json
import os
import re
import secrets
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import httpx
import psutil

MB = 1_000_000
MIB = 1024 * 1024


def start() -> tuple[subprocess.Popen[bytes], str]:
    exe = str(Path(sys.executable).with_name("bandwise"))
    proc = subprocess.Popen([exe, "serve", "--host", "127.0.0.1", "--port", "0", "--workers", "2"], stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, start_new_session=True)
    assert proc.stdout is not None
    base = ""
    deadline = time.monotonic() + 120
    while not base and time.monotonic() < deadline:
        line = proc.stdout.readline().decode()
        match = re.search(r"listening on (http://127\.0\.0\.1:\d+)", line)
        base = match.group(1) if match else ""
    threading.Thread(target=lambda: [None for _ in iter(proc.stdout.readline, b"")], daemon=True).start()  # type: ignore[union-attr]
    while time.monotonic() < deadline:
        try:
            if httpx.get(base + "/readyz", timeout=2).status_code == 200:
                return proc, base
        except httpx.TransportError:
            pass
        time.sleep(0.1)
    raise RuntimeError("server did not become ready")


def tree_rss(pid: int) -> int:
    root = psutil.Process(pid)
    total = 0
    for p in [root, *root.children(recursive=True)]:
        try:
            total += p.memory_info().rss
        except psutil.Error:
            pass
    return total


def addr(base: str) -> tuple[str, int]:
    host, port = base.removeprefix("http://").rsplit(":", 1)
    return host, int(port)


def held_uploads(proc: subprocess.Popen[bytes], base: str, count: int = 48, size: int = 60 * MB) -> None:
    time.sleep(1.0)
    rest = tree_rss(proc.pid)
    peak = rest
    stop = threading.Event()

    def sample() -> None:
        nonlocal peak
        while not stop.is_set():
            peak = max(peak, tree_rss(proc.pid))
            time.sleep(0.05)

    socks: list[socket.socket] = []

    def upload() -> None:
        sock = socket.create_connection(addr(base), timeout=60)
        socks.append(sock)
        head = f"POST /v1/smooth HTTP/1.1\r\nHost: replica\r\nContent-Type: application/json\r\nContent-Length: {size}\r\n\r\n".encode()
        chunk = b" " * MIB
        try:
            sock.sendall(head)
            for _ in range(size // MIB - 1):  # all but the last MiB: the upload is then held
                sock.sendall(chunk)
        except OSError:
            pass

    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    threads = [threading.Thread(target=upload, daemon=True) for _ in range(count)]
    for t in threads:
        t.start()
    latencies = []
    with httpx.Client(base_url=base, timeout=10) as client:
        for _ in range(200):
            t0 = time.perf_counter()
            client.get("/healthz")
            latencies.append(time.perf_counter() - t0)
            time.sleep(0.05)
    for t in threads:
        t.join(30)
    stop.set()
    sampler.join()
    for sock in socks:
        sock.close()
    latencies.sort()
    print(
        f"{count} held uploads of {size / MB:.0f} MB: process tree {rest / MIB:.0f} MiB at rest, peak {peak / MIB:.0f} MiB (growth {(peak - rest) / MIB:.0f} MiB); "
        f"/healthz p50 {latencies[100] * 1e3:.1f} ms, p99 {latencies[197] * 1e3:.1f} ms, max {latencies[-1] * 1e3:.1f} ms"
    )


def dropped_heavy(base: str) -> None:
    n = 60_000
    body = json.dumps({"x": [i * 0.001 for i in range(n)], "y": [(i * 7919) % 101 * 0.01 for i in range(n)], "curve": {"points": 5000}, "bands": {"replicates": 5000}}).encode()
    head = f"POST /v1/smooth HTTP/1.1\r\nHost: replica\r\nContent-Type: application/json\r\nContent-Length: {len(body)}\r\n\r\n".encode()
    socks = []
    for _ in range(6):
        sock = socket.create_connection(addr(base), timeout=10)
        sock.sendall(head + body)
        socks.append(sock)
    time.sleep(1.0)
    for sock in socks:
        sock.close()
    small = {"x": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0], "y": [1.0, 3.0, 2.0, 5.0, 4.0, 6.0], "bandwidth": 1.5}
    times, statuses = [], []
    with httpx.Client(base_url=base, timeout=60) as client:
        for _ in range(10):
            t0 = time.perf_counter()
            statuses.append(client.post("/v1/smooth", json=small).status_code)
            times.append(time.perf_counter() - t0)
    print(f"6 heavy requests dropped by their clients: the next 10 small requests answered {statuses.count(200)}/10 with 200, slowest {max(times):.2f} s, first {times[0]:.2f} s")


def metric_lines(base: str) -> None:
    before = httpx.get(base + "/metrics").text.count("\n")
    with httpx.Client(base_url=base, timeout=10) as client:
        for _ in range(200):
            client.request("X" + secrets.token_hex(40).upper(), "/" + secrets.token_hex(8))
    after = httpx.get(base + "/metrics").text.count("\n")
    print(f"200 requests with invented methods and paths: /metrics grew by {after - before} lines")


def idle_connections(base: str) -> None:
    socks = []
    for i in range(20):
        sock = socket.create_connection(addr(base), timeout=30)
        if i % 2:
            sock.sendall(b"GET /healthz HTTP/1.1\r\nHost: replica\r\nX-Slow: ")
        socks.append(sock)
    t0 = time.monotonic()
    closed_at = []
    for sock in socks:
        sock.settimeout(max(0.1, 30 - (time.monotonic() - t0)))
        try:
            while sock.recv(4096):
                pass
        except OSError:
            pass
        closed_at.append(time.monotonic() - t0)
        sock.close()
    print(f"20 idle or slow-header connections: all closed by the server after {max(closed_at):.1f} s (first {min(closed_at):.1f} s)")


def main(argv: list[str] | None = None) -> int:
    proc, base = start()
    try:
        metric_lines(base)
        idle_connections(base)
        dropped_heavy(base)
        held_uploads(proc, base)
    finally:
        os.killpg(proc.pid, signal.SIGTERM)
        try:
            proc.wait(30)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
    return 0


if __name__ == "__main__":
    sys.exit(main())
