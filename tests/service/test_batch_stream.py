"""The streamed batch answer (``Accept: application/x-ndjson``), against real worker processes.

Reference for the format: the NDJSON specification (each line one JSON text,
lines ended by ``\\n``) and RFC 9110, section 12.5.1 (``Accept``).
"""

from __future__ import annotations

import time
from collections.abc import Iterator
from typing import Any

import httpx
import orjson
import pytest

from estimators.demo import cold_store, parcel_depot
from service.contract.models import Problem
from service.http import batching
from service.http.ndjson import accepts_ndjson

from .conftest import Harness

COLD = cold_store()
DEPOT = parcel_depot()
CX, CY = COLD.x[::10].tolist(), COLD.y[::10].tolist()
DX, DY = DEPOT.x[::2].tolist(), DEPOT.y[::2].tolist()
STREAM = {"accept": "application/x-ndjson"}
SLOW = {"x": CX, "y": CY, "bands": {"method": "wild_bootstrap", "replicates": 1000, "simultaneous": True}}


def lines_of(response: httpx.Response) -> list[dict[str, Any]]:
    """Every line of an NDJSON answer, checked against the format: one JSON object per ``\\n``-ended line."""
    assert response.status_code == 200, response.text[:500]
    assert response.headers["content-type"].startswith("application/x-ndjson")
    body = response.content
    assert body.endswith(b"\n")
    docs = [orjson.loads(line) for line in body[:-1].split(b"\n")]
    assert all(isinstance(doc, dict) and isinstance(doc.get("index"), int) for doc in docs)
    return docs


def by_index(docs: list[dict[str, Any]], count: int) -> dict[int, dict[str, Any]]:
    """The lines keyed by index, checking that every slot has exactly one."""
    indices = [doc["index"] for doc in docs]
    assert sorted(indices) == list(range(count)), "one line per slot, none missing or repeated"
    return {doc.pop("index"): doc for doc in docs}


@pytest.fixture()
def split_small(monkeypatch: pytest.MonkeyPatch) -> Iterator[None]:
    """Split even small batches, so a test batch goes over both workers in several groups."""
    monkeypatch.setattr(batching, "SPLIT_MIN_BYTES", 1)
    monkeypatch.setattr(batching, "GROUP_MIN_BYTES", 1)
    yield


@pytest.mark.parametrize(
    ("header", "wanted"),
    [
        ("application/x-ndjson", True),
        ("application/json, application/x-ndjson;q=0.5", True),
        ("Application/X-NDJSON ; q=1", True),
        ("application/x-ndjson;q=0", False),
        ("application/json", False),
        ("*/*", False),
        ("application/*", False),
        (None, False),
    ],
)
def test_stream_is_chosen_only_when_named_with_a_weight_above_zero(header: str | None, wanted: bool) -> None:
    assert accepts_ndjson(header) is wanted


@pytest.mark.parametrize("split", [False, True])
def test_every_slot_has_one_line_with_the_answer_it_has_in_the_json_form(api: Harness, split: bool, monkeypatch: pytest.MonkeyPatch) -> None:
    if split:
        monkeypatch.setattr(batching, "SPLIT_MIN_BYTES", 1)
        monkeypatch.setattr(batching, "GROUP_MIN_BYTES", 1)
    series: list[dict[str, Any]] = []
    for i in range(12):
        if i == 4:
            series.append({"x": CX, "y": CY[:-1], "bandwidth": 2.0})  # invalid: lengths differ
        elif i % 3 == 0:
            series.append({"x": DX, "y": DY, "curve": {"points": 15}, "kernel": "epanechnikov"})
        else:
            series.append({"x": CX, "y": [v + i for v in CY], "curve": {"points": 12}})
    streamed = by_index(lines_of(api.post("/v1/smooth/batch", json={"series": series}, headers=STREAM)), len(series))
    plain = api.post("/v1/smooth/batch", json={"series": series})  # reference: the same batch as one JSON answer
    assert plain.status_code == 200
    for i, slot in enumerate(plain.json()["results"]):
        assert streamed[i] == slot, i
    problem = Problem.model_validate(streamed[4]["problem"])
    assert problem.type == "/problems/validation-error"
    assert problem.instance is not None and problem.instance.endswith("#series[4]")


def test_whole_batch_errors_come_before_the_stream_as_problems(api: Harness) -> None:
    malformed = api.post("/v1/smooth/batch", content=b'{"series": [', headers={**STREAM, "content-type": "application/json"})
    assert malformed.status_code == 400
    assert malformed.headers["content-type"].startswith("application/problem+json")
    wrong = api.post("/v1/smooth/batch", json={"series": 3}, headers=STREAM)
    assert wrong.status_code == 422
    assert wrong.headers["content-type"].startswith("application/problem+json")


def test_stream_past_its_deadline_marks_the_unfinished_slots(split_small: None) -> None:
    h = Harness(workers=2, deadline_seconds=1.5)
    try:
        quick = {"x": CX[:40], "y": CY[:40], "bandwidth": 2.0, "curve": {"points": 10}}
        series = [quick] + [SLOW] * 60  # far more work than 1.5 s on two workers
        lines = by_index(lines_of(h.post("/v1/smooth/batch", json={"series": series}, headers=STREAM)), len(series))
        assert "curve" in lines[0]
        marked = [i for i, doc in lines.items() if "problem" in doc]
        assert marked, "some slots should have run out of time"
        for i in marked:
            assert lines[i]["problem"]["type"] == "/problems/deadline-exceeded"
            assert lines[i]["problem"]["instance"].endswith(f"#series[{i}]")
        metrics = h.get("/metrics").text
        line = next(x for x in metrics.splitlines() if x.startswith('bandwise_batch_slots_unfinished_total{reason="deadline-exceeded"}'))
        assert float(line.split()[-1]) == len(marked)
    finally:
        h.close()


def test_stream_during_shutdown_marks_the_slots_left(split_small: None) -> None:
    h = Harness(workers=2, deadline_seconds=60.0)
    try:
        series = [SLOW] * 40
        pending = h.submit("POST", "/v1/smooth/batch", json={"series": series}, headers=STREAM)
        deadline = time.monotonic() + 30.0
        while h.service.pool.busy < 2 and time.monotonic() < deadline:
            time.sleep(0.05)
        assert h.service.pool.busy == 2, "both workers should be computing groups"
        h.run(h.service.pool.close())
        lines = by_index(lines_of(pending.result(60)), len(series))
        reasons = {doc["problem"]["type"] for doc in lines.values() if "problem" in doc}
        assert reasons == {"/problems/shutting-down"}
    finally:
        h.close()


def test_stream_over_the_batch_point_limit_marks_the_slots_past_it(split_small: None) -> None:
    h = Harness(workers=2, max_batch_points=100)
    try:
        series = [{"x": [float(k) for k in range(30)], "y": [float(k % 7) for k in range(30)], "bandwidth": 3.0} for _ in range(4)]
        lines = by_index(lines_of(h.post("/v1/smooth/batch", json={"series": series}, headers=STREAM)), len(series))
        refused = [doc for doc in lines.values() if "problem" in doc]
        assert refused, "120 points over a limit of 100: some slots are refused"
        assert all("BANDWISE_MAX_BATCH_POINTS" in doc["problem"]["errors"][0]["message"] for doc in refused)
    finally:
        h.close()
