"""A batch of many series through the service: split over the workers vs run whole in one worker.

The baseline is the same batch run whole in one worker (the path small batches take), in the same
run and on the same pool, so the ratio is the split's speed-up; parallel efficiency is the speed-up
divided by the worker count (target >= 0.8, bar 0.6). Each series has 2,000 points and all defaults
(automatic bandwidth, 200-point curve). Rounds alternate between the two forms; the range is shown.

Run: ``python -m tests.bench.bench_batch [--series 400] [--workers 2] [--rounds 3]``.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from service.http import batching
from tests.service.conftest import Harness

from .machine import describe

N = 2_000


def _body(series: int) -> dict[str, list[dict[str, list[float]]]]:
    rng = np.random.default_rng(2026)
    out = []
    for _ in range(series):
        x = np.sort(rng.uniform(0.0, 100.0, N))
        y = np.sin(x / 4.0) + rng.normal(0.0, 0.3, N)
        out.append({"x": x.tolist(), "y": y.tolist()})
    return {"series": out}


def run(series: int, workers: int, rounds: int) -> tuple[list[float], list[float]]:
    """Seconds per round for the whole form and the split form."""
    body = _body(series)
    h = Harness(workers=workers, deadline_seconds=600.0, max_body_bytes=256 << 20)
    whole: list[float] = []
    split: list[float] = []
    threshold = batching.SPLIT_MIN_BYTES
    try:
        h.post("/v1/smooth/batch", json={"series": body["series"][: 2 * workers]})  # warm both workers
        for _ in range(rounds):
            for form, times in (("whole", whole), ("split", split)):
                batching.SPLIT_MIN_BYTES = 1 << 62 if form == "whole" else threshold
                started = time.perf_counter()
                response = h.post("/v1/smooth/batch", json=body)
                times.append(time.perf_counter() - started)
                assert response.status_code == 200, response.text[:300]
                assert all("curve" in r for r in response.json()["results"]), "every slot should be computed"
    finally:
        batching.SPLIT_MIN_BYTES = threshold
        h.close()
    return whole, split


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=400)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args(argv)
    print(f"## Batch of {args.series} series x {N} points over {args.workers} workers ({describe()})")
    print("Baseline: the same batch run whole in one worker, same pool, same run, rounds alternating.\n")
    whole, split = run(args.series, args.workers, args.rounds)
    speedups = [w / s for w, s in zip(whole, split, strict=True)]
    print("| form | seconds (range) | speed-up (range) | parallel efficiency (range) |")
    print("|---|---|---|---|")
    print(f"| whole, one worker | {min(whole):.2f} - {max(whole):.2f} | 1 | - |")
    print(
        f"| split over {args.workers} | {min(split):.2f} - {max(split):.2f} | {min(speedups):.2f} - {max(speedups):.2f} | "
        f"{min(speedups) / args.workers:.2f} - {max(speedups) / args.workers:.2f} |"
    )


if __name__ == "__main__":
    main()
