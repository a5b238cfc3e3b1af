"""Worker-side reading of a large request: JSON through the request model, a bare orjson parse, Arrow.

    python -m tests.bench.bench_wire [--n 1e6] [--repeat 5]

Each row is the time to turn one request body of n points (x, y as float64, a fixed
bandwidth, 200 curve points) into checked float64 arrays and a validated request,
as the worker does before fitting; ratios are to ``np.argsort(x)`` and to the model's
JSON path, all measured in one run (best of ``repeat``; the range over rounds is shown).
The bare orjson parse is a floor for any JSON path that builds Python floats.
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable

import numpy as np
import orjson

from service.contract.models import SmoothRequest
from service.worker import arrow_codec

LIMITS = {"max_points": 10_000_000, "max_curve_points": 10_000, "max_predict_points": 100_000}


def _model_path(body: bytes) -> object:
    req = SmoothRequest.model_validate_json(body, context={"limits": LIMITS})
    return np.fromiter(req.x, dtype=float, count=len(req.x)), np.fromiter(req.y, dtype=float, count=len(req.y))


def _times(fn: Callable[[], object], repeat: int) -> list[float]:
    out = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return out


def run(n: int, repeat: int) -> list[tuple[str, list[float]]]:
    rng = np.random.default_rng(0)
    x = rng.uniform(-5.0, 30.0, n)
    y = 40.0 + 0.08 * (x - 10.0) ** 2 + rng.normal(0.0, 1.5, n)
    fields = {"bandwidth": 1.0, "curve": {"points": 200}}
    json_body = orjson.dumps({"x": x, "y": y, **fields}, option=orjson.OPT_SERIALIZE_NUMPY)
    import pyarrow as pa

    table = pa.table({"x": x, "y": y}).replace_schema_metadata({"bandwise.request": orjson.dumps(fields)})
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    arrow_body = sink.getvalue().to_pybytes()
    context = {"limits": LIMITS}
    rows = [
        ("np.argsort(x) (baseline)", lambda: np.argsort(x)),
        ("JSON, request model (before)", lambda: _model_path(json_body)),
        ("JSON, orjson parse only (no checks)", lambda: orjson.loads(json_body)),
        ("Arrow IPC stream", lambda: arrow_codec.read_request(arrow_body, SmoothRequest, context)),
    ]
    results: dict[str, list[float]] = {name: [] for name, _ in rows}
    for _ in range(repeat):  # alternate rounds so a disturbance hits every row alike
        for name, fn in rows:
            results[name].extend(_times(fn, 1))
    print(f"bodies: JSON {len(json_body) / 2**20:.1f} MiB, Arrow {len(arrow_body) / 2**20:.1f} MiB")
    return [(name, results[name]) for name, _ in rows]


def table(rows: list[tuple[str, list[float]]]) -> str:
    base = min(rows[0][1])
    model = min(rows[1][1])
    lines = ["| path | best ms | range ms | × argsort | × model path |", "|---|---:|---:|---:|---:|"]
    for name, times in rows:
        best = min(times)
        lines.append(f"| {name} | {best * 1e3:.0f} | {min(times) * 1e3:.0f}–{max(times) * 1e3:.0f} | {best / base:.2f} | {best / model:.2f} |")
    return "\n".join(lines)


def crossover(sizes: list[int], repeat: int) -> str:
    """Client encoding plus worker reading, JSON against Arrow, by series size: where Arrow starts to pay."""
    from service.client import _dumps
    from service.client.arrow import request_stream

    lines = ["| n | JSON ms | Arrow ms | Arrow / JSON |", "|---:|---:|---:|---:|"]
    context = {"limits": LIMITS}
    rng = np.random.default_rng(1)
    for n in sizes:
        body = {"x": rng.uniform(0.0, 100.0, n), "y": rng.normal(0.0, 1.0, n), "bandwidth": 1.0}
        json_ms = min(_times(lambda: SmoothRequest.model_validate_json(_dumps(body), context=context), repeat)) * 1e3  # noqa: B023
        arrow_ms = min(_times(lambda: arrow_codec.read_request(request_stream(body), SmoothRequest, context), repeat)) * 1e3  # noqa: B023
        lines.append(f"| {n} | {json_ms:.2f} | {arrow_ms:.2f} | {arrow_ms / json_ms:.2f} |")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=float, default=1e6)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args(argv)
    n = int(args.n)
    print(f"## Reading a request of n = {n:.0e} points in the worker\n")
    print(table(run(n, args.repeat)))
    print("\n### Client encoding plus worker reading, by series size (the client's Arrow threshold)\n")
    print(crossover([100, 1_000, 3_000, 10_000, 30_000, 100_000], max(args.repeat, 5)))


if __name__ == "__main__":
    main()
