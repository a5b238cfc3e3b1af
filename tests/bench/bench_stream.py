"""A fleet of series three ways over real HTTP: one JSON batch, the streamed batch, and the client's fan-out.

One ``bandwise serve`` process on loopback with two workers. The baseline is the same batch answered as
one JSON document, in the same run: the table gives the streamed form's time to its first line and to its
last, and ``smooth_many``'s total, each as a ratio to the baseline (lower is better; the first line is what
a dashboard waits for before it draws). Each series has 2,000 points and all defaults.

Run: ``python -m tests.bench.bench_stream [--series 200] [--rounds 2]``.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np

from service.client import BandwiseClient
from tests.deploy.support import free_port, start_replica, stop, wait_until_ok

from .machine import describe

N = 2_000
WORKERS = 2


def _series(count: int) -> list[dict[str, Any]]:
    rng = np.random.default_rng(2026)
    out = []
    for _ in range(count):
        x = np.sort(rng.uniform(0.0, 100.0, N))
        out.append({"x": x, "y": np.sin(x / 4.0) + rng.normal(0.0, 0.3, N)})
    return out


def run(count: int, rounds: int) -> dict[str, list[float]]:
    """Seconds per round: JSON batch, first streamed line, last streamed line, fan-out."""
    series = _series(count)
    port = free_port()
    times: dict[str, list[float]] = {"json": [], "first": [], "last": [], "fan_out": []}
    with tempfile.TemporaryDirectory() as tmp:
        process = start_replica(port, Path(tmp) / "bandwise.log", {"BANDWISE_WORKERS": str(WORKERS), "BANDWISE_ACCESS_LOG": "false", "BANDWISE_DEADLINE_SECONDS": "600"})
        try:
            wait_until_ok(f"http://127.0.0.1:{port}/readyz", process, timeout=60.0)
            with BandwiseClient(f"http://127.0.0.1:{port}", timeout=600.0) as bw:
                bw.smooth_batch(series[: 2 * WORKERS])  # warm both workers
                for _ in range(rounds):
                    started = time.perf_counter()
                    assert bw.smooth_batch(series).ok
                    times["json"].append(time.perf_counter() - started)
                    started = time.perf_counter()
                    answers = 0
                    for answer in bw.stream_batch(series):
                        assert answer.ok
                        if answers == 0:
                            times["first"].append(time.perf_counter() - started)
                        answers += 1
                    times["last"].append(time.perf_counter() - started)
                    started = time.perf_counter()
                    assert sum(1 for answer in bw.smooth_many(series, connections=WORKERS) if answer.ok) == count
                    times["fan_out"].append(time.perf_counter() - started)
        finally:
            stop(process)
    return times


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=200)
    parser.add_argument("--rounds", type=int, default=2)
    args = parser.parse_args(argv)
    print(f"## A fleet of {args.series} series x {N} points over HTTP, {WORKERS} workers ({describe()})")
    print("Baseline: the same series as one JSON batch answer, same server, same run.\n")
    times = run(args.series, args.rounds)
    base = times["json"]
    print("| form | seconds (range) | ratio to the JSON batch (range) |")
    print("|---|---|---|")
    print(f"| one JSON batch (baseline) | {min(base):.2f} - {max(base):.2f} | 1 |")
    for key, label in (("first", "streamed: first line"), ("last", "streamed: last line"), ("fan_out", f"smooth_many, {WORKERS} connections")):
        ratios = [t / b for t, b in zip(times[key], base, strict=True)]
        print(f"| {label} | {min(times[key]):.2f} - {max(times[key]):.2f} | {min(ratios):.2f} - {max(ratios):.2f} |")


if __name__ == "__main__":
    main()
