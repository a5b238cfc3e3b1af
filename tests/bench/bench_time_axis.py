"""Cost of the time axis, as ratios to a baseline measured in the same run: ``python -m tests.bench.bench_time_axis``.

1. Reading a request whose x holds n RFC 3339 date-times against the same request with n JSON numbers
   (epoch ms): the worker's whole reading step, JSON text to validated request to numeric arrays
   (``SmoothRequest.model_validate_json`` then ``time_axis.prepare``). Target: at most 2x at n = 1e6.
2. Gap detection (sorted-order check, median spacing, the spacings over the limit, curve points inside gaps)
   against the fixed-bandwidth fit it accompanies (``estimators.fit``, a 200-point curve, and the diagnostics
   every answer carries: effective degrees of freedom and residual scale). Target: < 5 %.

Rounds alternate between the measured and the baseline work; the table gives the range of the ratios over
the rounds (the machine is shared, so single runs move by 20 %).
"""

from __future__ import annotations

import argparse
import math
from collections.abc import Sequence

import numpy as np
import orjson

from estimators import KERNELS, fit
from estimators.gaps import auto_max_gap, find_gaps, inside_gaps
from service.contract.models import SmoothRequest
from service.worker import time_axis

from .timing import best_of

HOUR_MS = 3_600_000
START_MS = 1_748_822_400_000  # 2025-06-02T00:00:00Z, the demo parcel depot's first hour


def _bodies(n: int) -> tuple[bytes, bytes]:
    rng = np.random.default_rng(0)
    ms = START_MS + np.arange(n, dtype=np.int64) * 60_000  # one reading a minute
    y = (40 + rng.normal(0, 3, n)).round(3).tolist()
    stamps = np.datetime_as_string(ms.astype("datetime64[ms]"), unit="s", timezone="UTC").tolist()
    numbers = orjson.dumps({"x": ms.astype(float).tolist(), "y": y, "bandwidth": 30 * 60_000})
    text = orjson.dumps({"x": stamps, "y": y, "bandwidth": "PT30M"})
    return numbers, text


def _read(body: bytes) -> None:
    req = SmoothRequest.model_validate_json(body, context={"limits": {}})
    time_axis.prepare(req)


def _gap_work(x: np.ndarray, curve: np.ndarray, bandwidth: float) -> None:
    xs = x if bool(np.all(x[1:] >= x[:-1])) else np.sort(x)
    starts, ends = find_gaps(xs, auto_max_gap(xs, float(KERNELS["epanechnikov"].support), bandwidth))
    inside_gaps(curve, starts, ends)


def main(argv: Sequence[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--n", type=float, default=1e6)
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args(argv)
    n = int(args.n)

    numbers, text = _bodies(n)
    _read(numbers), _read(text)  # compile and warm both paths
    reading = []
    for _ in range(args.rounds):
        base = best_of(lambda: _read(numbers), 2)
        reading.append((base, best_of(lambda: _read(text), 2)))

    rng = np.random.default_rng(1)
    hours = np.arange(n, dtype=float) / 60.0
    hours[n // 2 :] += 30.0  # a 30-hour hole in the middle
    x = START_MS + hours * HOUR_MS
    y = 40 + 10 * np.sin(hours / 24.0) + rng.normal(0, 3, n)
    bandwidth = 2.0 * HOUR_MS
    curve = np.linspace(x[0], x[-1], 200)

    def fitted() -> None:  # what the service computes for every fixed-bandwidth request: curve and diagnostics
        s = fit(x, y, kernel="epanechnikov", bandwidth=bandwidth, engine="exact")
        s.predict(curve)
        _ = (s.effective_df, s.residual_scale)

    fitted(), _gap_work(x, curve, bandwidth)
    gaps = []
    for _ in range(args.rounds):
        gaps.append((best_of(fitted, 2), best_of(lambda: _gap_work(x, curve, bandwidth), 3)))

    print(f"### Time axis (n = {n:,})\n")
    print("| step | baseline (s) | measured (s) | ratio, range over rounds | target |")
    print("|---|---|---|---|---|")
    r = [m / b for b, m in reading]
    print(f"| read x as RFC 3339 date-times vs JSON numbers | {min(b for b, _ in reading):.3f} | {min(m for _, m in reading):.3f} | {min(r):.2f}-{max(r):.2f}x | <= 2x |")
    g = [m / b for b, m in gaps]
    print(f"| gap detection vs fixed-bandwidth fit (epanechnikov) | {min(b for b, _ in gaps):.3f} | {min(m for _, m in gaps):.4f} | {100 * min(g):.2f}-{100 * max(g):.2f} % | < 5 % |")
    assert all(math.isfinite(v) for v in r + g)


if __name__ == "__main__":
    main()
