"""Apache Arrow IPC bodies and answers on /v1/smooth and /v1/bandwidth.

Outside reference: the streams are written and read by pyarrow, the reference
implementation of the Arrow IPC format; every answer is compared with the JSON
answer to the same request sent as JSON.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import orjson
import pyarrow as pa
import pytest

from service.contract.arrow_layout import ANSWER_METADATA_KEY, ARROW_STREAM, REQUEST_METADATA_KEY
from tests.service.conftest import Harness, problem_ok

ARROW_HEADERS = {"content-type": ARROW_STREAM}


def harbour_series(n: int = 400, seed: int = 3) -> tuple[np.ndarray, np.ndarray]:
    """Outdoor temperature (°C) against compressor power (kW), Harbour Street cold store (invented)."""
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(-5.0, 30.0, n))
    y = 40.0 + 0.08 * (x - 10.0) ** 2 + rng.normal(0.0, 1.5, n)
    return x, y


def stream(columns: dict[str, Any], fields: dict[str, Any] | None = None, *, metadata: dict[bytes, bytes] | None = None) -> bytes:
    """An Arrow IPC stream written by pyarrow."""
    table = pa.table(columns)
    meta = dict(metadata or {})
    if fields is not None:
        meta[REQUEST_METADATA_KEY.encode()] = orjson.dumps(fields)
    table = table.replace_schema_metadata(meta)
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    return sink.getvalue().to_pybytes()


def read_answer(body: bytes) -> tuple[dict[str, Any], dict[str, np.ndarray]]:
    """The metadata JSON and every list column of an answer stream, as numpy (nulls as NaN)."""
    table = pa.ipc.open_stream(body).read_all()
    meta = orjson.loads(table.schema.metadata[ANSWER_METADATA_KEY.encode()])
    assert table.num_rows == 1
    arrays = {name: table.column(name).chunk(0).values.to_numpy(zero_copy_only=False) for name in table.column_names}
    return meta, arrays


def same_numbers(json_values: list[Any], arrow_values: np.ndarray) -> None:
    expected = np.array([math.nan if v is None else v for v in json_values], dtype=float)
    np.testing.assert_array_equal(np.asarray(arrow_values, dtype=float), expected)


SMOOTH_FIELDS = {
    "kernel": "epanechnikov",
    "bandwidth": 3.0,
    "predict_at": [-8.0, 0.5, 12.25, 29.0],
    "include_fitted": True,
    "bands": {"method": "analytic", "level": 0.9},
    "curve": {"points": 30},
}


def test_arrow_body_gives_the_json_answer(api: Harness) -> None:
    x, y = harbour_series()
    via_json = api.post("/v1/smooth", json={"x": x.tolist(), "y": y.tolist(), **SMOOTH_FIELDS})
    via_arrow = api.post("/v1/smooth", content=stream({"x": x, "y": y}, SMOOTH_FIELDS), headers=ARROW_HEADERS)
    assert via_json.status_code == 200, via_json.text
    assert via_arrow.status_code == 200, via_arrow.text
    assert via_arrow.headers["content-type"].startswith("application/json")
    assert via_arrow.json() == via_json.json()


def test_arrow_answer_holds_the_json_answer(api: Harness) -> None:
    x, y = harbour_series()
    reference = api.post("/v1/smooth", json={"x": x.tolist(), "y": y.tolist(), **SMOOTH_FIELDS}).json()
    answer = api.post("/v1/smooth", content=stream({"x": x, "y": y}, SMOOTH_FIELDS), headers={**ARROW_HEADERS, "accept": ARROW_STREAM})
    assert answer.status_code == 200, answer.text
    assert answer.headers["content-type"] == ARROW_STREAM
    meta, arrays = read_answer(answer.content)
    for part in ("curve", "fitted"):
        for name, values in reference[part].items():
            same_numbers(values, arrays[f"{part}.{name}"])
    rows = reference["predictions"]
    assert meta["predictions"] == {"rows": len(rows)}
    for name in rows[0]:
        column = arrays[f"predictions.{name}"]
        if name == "extrapolated":
            assert column.tolist() == [row[name] for row in rows]
        else:
            same_numbers([row[name] for row in rows], column)
    assert meta["diagnostics"] == reference["diagnostics"]
    assert meta["warnings"] == reference["warnings"]
    assert meta["bandwidth"]["value"] == reference["bandwidth"]["value"]


def test_json_body_can_ask_for_an_arrow_answer(api: Harness) -> None:
    x, y = harbour_series(120)
    request = {"x": x.tolist(), "y": y.tolist(), "selector": "gcv", "candidate_count": 12}
    reference = api.post("/v1/bandwidth", json=request).json()
    answer = api.post("/v1/bandwidth", json=request, headers={"accept": f"{ARROW_STREAM}, application/json;q=0.5"})
    assert answer.status_code == 200, answer.text
    meta, arrays = read_answer(answer.content)
    assert meta["bandwidth"]["value"] == reference["bandwidth"]["value"]
    same_numbers(reference["bandwidth"]["candidates"], arrays["bandwidth.candidates"])
    same_numbers(reference["bandwidth"]["scores"], arrays["bandwidth.scores"])
    assert meta["warnings"] == reference["warnings"]
    # the form of the answer depends on Accept, so both answers say so to caches (RFC 9110, section 12.5.5)
    for response in (answer, api.post("/v1/bandwidth", json=request)):
        assert "accept" in [v.strip().lower() for v in response.headers.get("vary", "").split(",")]
    assert "accept" not in api.get("/v1/kernels").headers.get("vary", "").lower().split(", ")


def test_bandwidth_with_weights_and_narrow_types(api: Harness) -> None:
    """int32 x, float32 y and uint8 weights convert exactly to doubles (IEEE 754 widening)."""
    rng = np.random.default_rng(5)
    x = np.arange(0, 300, dtype=np.int32)
    y = (20.0 + np.sin(x / 40.0) + rng.normal(0, 0.2, x.size)).astype(np.float32)
    w = rng.integers(0, 4, x.size).astype(np.uint8)
    w[0] = 1
    fields = {"selector": "gcv", "candidate_count": 10}
    reference = api.post("/v1/bandwidth", json={"x": x.astype(float).tolist(), "y": y.astype(float).tolist(), "weights": w.astype(float).tolist(), **fields}).json()
    answer = api.post("/v1/bandwidth", content=stream({"x": x, "y": y, "weights": w}, fields), headers=ARROW_HEADERS)
    assert answer.status_code == 200, answer.text
    assert answer.json() == reference


def test_timestamp_x_is_epoch_milliseconds(api: Harness) -> None:
    """Hourly parcel counts at the Harbour Street depot; an Arrow timestamp(us) equals its epoch-ms number (Arrow spec: ticks since the Unix epoch)."""
    start_ms = 1_748_822_400_000
    ms = start_ms + 3_600_000 * np.arange(96, dtype=np.int64)
    counts = 50.0 + 10.0 * np.sin(np.arange(96) / 6.0)
    fields = {"bandwidth": 7_200_000.0, "curve": {"points": 12}}
    reference = api.post("/v1/smooth", json={"x": ms.astype(float).tolist(), "y": counts.tolist(), **fields}).json()
    stamps = pa.array(ms * 1000, type=pa.timestamp("us", tz="UTC"))
    answer = api.post("/v1/smooth", content=stream({"x": stamps, "y": counts}, fields), headers=ARROW_HEADERS)
    assert answer.status_code == 200, answer.text
    assert answer.json() == reference


def test_no_metadata_means_defaults(api: Harness) -> None:
    x, y = harbour_series(80)
    reference = api.post("/v1/smooth", json={"x": x.tolist(), "y": y.tolist()}).json()
    answer = api.post("/v1/smooth", content=stream({"x": x, "y": y}), headers=ARROW_HEADERS)
    assert answer.status_code == 200, answer.text
    assert answer.json() == reference


def _fields_of(doc: dict[str, Any]) -> dict[str, str]:
    return {e["field"]: e["type"] for e in doc["errors"]}


@pytest.mark.parametrize(
    ("columns", "fields", "expected"),
    [
        ({"x": [1.0, 2.0, 3.0]}, None, {"y": "missing"}),
        ({"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 3.0], "temperature": [1.0, 2.0, 3.0]}, None, {"temperature": "unknown_field"}),
        ({"x": ["a", "b", "c"], "y": [1.0, 2.0, 3.0]}, None, {"x": "wrong_type"}),
        ({"x": [1.0, 2.0, 3.0], "y": [True, False, True]}, None, {"y": "wrong_type"}),
        ({"x": [1.0, None, 3.0], "y": [1.0, 2.0, 3.0]}, None, {"x[1]": "invalid"}),
        ({"x": [1.0, 2.0, math.inf], "y": [1.0, 2.0, 3.0]}, None, {"x[2]": "not_finite"}),
        ({"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 3.0], "weights": [1.0, -1.0, 1.0]}, None, {"weights[1]": "too_small"}),
        ({"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 3.0], "weights": [0.0, 0.0, 0.0]}, None, {"weights": "invalid"}),
        ({"x": [1.0], "y": [1.0]}, None, {"x": "too_short"}),
        ({"x": pa.array([1, 2, 2**60], type=pa.int64()), "y": [1.0, 2.0, 3.0]}, None, {"x": "invalid"}),
        ({"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 3.0]}, {"kernel": "triangle-ish"}, {"kernel": "not_allowed"}),
        ({"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 3.0]}, {"x": [1.0, 2.0]}, {"x": "invalid"}),
        ({"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 3.0]}, {"bandwidth": -1.0, "colour": "red"}, {"bandwidth": "too_small", "colour": "unknown_field"}),
    ],
)
def test_bad_columns_and_fields_name_the_problem(api: Harness, columns: dict[str, Any], fields: dict[str, Any] | None, expected: dict[str, str]) -> None:
    doc = problem_ok(api.post("/v1/smooth", content=stream(columns, fields), headers=ARROW_HEADERS), 422)
    assert _fields_of(doc) == expected


def test_bad_metadata_and_non_streams_are_400(api: Harness) -> None:
    body = stream({"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 3.0]}, metadata={REQUEST_METADATA_KEY.encode(): b"{kernel: gaussian"})
    assert "metadata" in problem_ok(api.post("/v1/smooth", content=body, headers=ARROW_HEADERS), 400)["detail"]
    body = stream({"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 3.0]}, metadata={REQUEST_METADATA_KEY.encode(): b"[1, 2]"})
    problem_ok(api.post("/v1/smooth", content=body, headers=ARROW_HEADERS), 400)
    for content in (b"", b'{"x": [1, 2], "y": [1, 2]}', b"\xff" * 64):
        doc = problem_ok(api.post("/v1/smooth", content=content, headers=ARROW_HEADERS), 400)
        assert "Arrow IPC stream" in doc["detail"]


def test_arrow_only_where_documented(api: Harness) -> None:
    body = stream({"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 3.0]})
    problem_ok(api.post("/v1/smooth/batch", content=body, headers=ARROW_HEADERS), 415)
    problem_ok(api.post("/v1/smooth", content=body, headers={**ARROW_HEADERS, "content-encoding": "gzip"}), 415)


def test_limits_as_for_json(small: Harness) -> None:
    x, y = harbour_series(60)
    doc = problem_ok(small.post("/v1/smooth", content=stream({"x": x, "y": y}), headers=ARROW_HEADERS), 422)
    assert _fields_of(doc) == {"x": "too_long"}
    doc = problem_ok(small.post("/v1/smooth", content=stream({"x": x[:40], "y": y[:40]}, {"predict_at": [1.0] * 6}), headers=ARROW_HEADERS), 422)
    assert _fields_of(doc) == {"predict_at": "too_long"}
    x, y = harbour_series(1000)
    problem_ok(small.post("/v1/smooth", content=stream({"x": x, "y": y}), headers=ARROW_HEADERS), 413)


def test_fuzzed_streams_never_get_a_5xx(api: Harness) -> None:
    """Truncated and bit-flipped streams: every answer is 200 or a 4xx problem (bounded: 160 requests)."""
    x, y = harbour_series(50)
    body = stream({"x": x, "y": y, "weights": np.ones(50)}, {"bandwidth": 4.0, "curve": {"points": 5}})
    rng = np.random.default_rng(27)
    cases = [body[:cut] for cut in sorted(set(rng.integers(0, len(body), 60).tolist()))]
    for _ in range(100):
        flipped = bytearray(body)
        for position in rng.integers(0, len(body), int(rng.integers(1, 4))):
            flipped[position] ^= 1 << int(rng.integers(0, 8))
        cases.append(bytes(flipped))
    statuses = []
    for content in cases:
        response = api.post("/v1/smooth", content=content, headers=ARROW_HEADERS)
        statuses.append(response.status_code)
        if response.status_code != 200:
            problem_ok(response, response.status_code)
    assert max(statuses) < 500, sorted(set(statuses))


def test_example_stream_is_the_json_example() -> None:
    """openapi_examples/fixed_bandwidth.request.arrows holds fixed_bandwidth.request.json (read back by pyarrow)."""
    from pathlib import Path

    folder = Path(__file__).resolve().parents[2] / "openapi_examples"
    request = orjson.loads((folder / "fixed_bandwidth.request.json").read_bytes())
    table = pa.ipc.open_stream((folder / "fixed_bandwidth.request.arrows").read_bytes()).read_all()
    assert table.column_names == ["x", "y"]
    assert table.column("x").to_pylist() == request.pop("x")
    assert table.column("y").to_pylist() == request.pop("y")
    assert orjson.loads(table.schema.metadata[REQUEST_METADATA_KEY.encode()]) == request
