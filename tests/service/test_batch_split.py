"""Batches over every worker: the byte ranges of the series, groups in order, and slots kept past the deadline."""

from __future__ import annotations

from collections.abc import Iterator

import orjson
import pytest

from estimators.demo import cold_store, parcel_depot
from service.contract.models import BatchResponse
from service.http import batching
from service.worker.batch_split import series_spans

from .conftest import Harness

COLD = cold_store()
DEPOT = parcel_depot()
CX, CY = COLD.x[::10].tolist(), COLD.y[::10].tolist()
DX, DY = DEPOT.x[::2].tolist(), DEPOT.y[::2].tolist()


# ----------------------------------------------------------------- the scan, against a JSON parser (orjson)


@pytest.mark.parametrize(
    "body",
    [
        b'{"series":[{"x":[1,2,3],"y":[4,5,6]}]}',
        b' { "series" : [ {"x": [1.5e3, -2], "kernel": "gaus\\"s[ian]{"} ,\n {"y": [], "curve": {"at": [1]}} ] } \n',
        b'{"series":[{"a":"\\\\"},{"b":"]}\\\\\\""},{}]}',
    ],
)
def test_spans_cut_exactly_the_elements_a_json_parser_sees(body: bytes) -> None:
    # reference: a general-purpose JSON parser (orjson) reading the whole body
    expected = orjson.loads(body)["series"]
    spans = series_spans(body, 100)
    assert spans is not None
    assert [orjson.loads(body[a:b]) for a, b in spans] == expected


@pytest.mark.parametrize(
    "body",
    [
        b'{"series":[{"x":[1]}], "other": 1}',  # another top-level key
        b'{"other": 1, "series":[{"x":[1]}]}',
        b'{"series":[{"x":[1]}, 5]}',  # an element that is not an object
        b'{"series":[{"x":[1]} {"x":[2]}]}',  # no comma between elements
        b'{"series":[{"x":[1]},,{"x":[2]}]}',
        b'{"series":[{"x":[1]}]',  # not closed
        b'{"series":[{"x":"unclosed}]}',
        b'{"series":[]}',
        b'{"series":["text"]}',
        b'[{"series":[{"x":[1]}]}]',
    ],
)
def test_bodies_the_scan_cannot_vouch_for_run_whole(body: bytes) -> None:
    assert series_spans(body, 100) is None


def test_more_series_than_the_limit_are_not_split() -> None:
    body = orjson.dumps({"series": [{"x": [1.0]}] * 5})
    assert series_spans(body, 4) is None
    assert series_spans(body, 5) is not None


def test_groups_are_contiguous_nonempty_and_cover_every_slot() -> None:
    sizes = [5, 1, 1, 1, 30, 2, 2, 2, 2, 8]
    for groups in range(1, len(sizes) + 1):
        bounds = batching.group_bounds(sizes, groups)
        assert bounds[0] == 0 and bounds[-1] == len(sizes)
        assert all(a < b for a, b in zip(bounds, bounds[1:], strict=False))
        assert len(bounds) - 1 <= groups


# ----------------------------------------------------------------- through the service


@pytest.fixture()
def split_small(monkeypatch: pytest.MonkeyPatch) -> Iterator[None]:
    """Split even small batches, so a test batch goes over both workers in several groups."""
    monkeypatch.setattr(batching, "SPLIT_MIN_BYTES", 1)
    monkeypatch.setattr(batching, "GROUP_MIN_BYTES", 1)
    yield


def test_split_batch_answers_each_slot_as_its_own_request_in_order(api: Harness, split_small: None) -> None:
    series = []
    for i in range(14):
        if i == 5:
            series.append({"x": CX, "y": CY[:-1], "bandwidth": 2.0})  # invalid: lengths differ
        elif i % 3 == 0:
            series.append({"x": DX, "y": DY, "curve": {"points": 15}, "kernel": "epanechnikov"})
        else:
            series.append({"x": CX, "y": [v + i for v in CY], "curve": {"points": 12}})
    response = api.post("/v1/smooth/batch", json={"series": series})
    assert response.status_code == 200, response.text[:500]
    doc = response.json()
    BatchResponse.model_validate(doc)
    results = doc["results"]
    assert len(results) == len(series)
    for i, item in enumerate(series):
        if i == 5:
            problem = results[i]["problem"]
            assert problem["type"] == "/problems/validation-error"
            assert problem["instance"].endswith("#series[5]")  # the slot's index in the whole batch, not in its group
            continue
        alone = api.post("/v1/smooth", json=item)  # reference: the same series as a request of its own
        assert results[i] == alone.json(), i


def test_split_batch_with_gzip_decodes_to_the_same_answer(api: Harness, split_small: None) -> None:
    series = [{"x": CX, "y": [v * (1 + i) for v in CY], "bandwidth": 2.0} for i in range(6)]
    plain = api.post("/v1/smooth/batch", json={"series": series}, headers={"accept-encoding": "identity"})
    zipped = api.post("/v1/smooth/batch", json={"series": series}, headers={"accept-encoding": "gzip"})
    assert plain.status_code == zipped.status_code == 200
    assert zipped.json() == plain.json()


def test_split_batch_point_limit_counts_the_whole_batch(split_small: None) -> None:
    h = Harness(workers=2, max_batch_points=100)
    try:
        series = [{"x": [float(k) for k in range(30)], "y": [float(k % 7) for k in range(30)], "bandwidth": 3.0} for _ in range(4)]
        response = h.post("/v1/smooth/batch", json={"series": series})
        assert response.status_code == 422, response.text[:300]
        assert "BANDWISE_MAX_BATCH_POINTS" in response.json()["errors"][0]["message"]
    finally:
        h.close()


@pytest.mark.parametrize("split", [False, True])
def test_batch_past_its_deadline_answers_200_and_marks_the_rest(split: bool, monkeypatch: pytest.MonkeyPatch) -> None:
    if split:
        monkeypatch.setattr(batching, "SPLIT_MIN_BYTES", 1)
        monkeypatch.setattr(batching, "GROUP_MIN_BYTES", 1)
    h = Harness(workers=2, deadline_seconds=1.5)
    try:
        quick = {"x": CX[:40], "y": CY[:40], "bandwidth": 2.0, "curve": {"points": 10}}
        slow = {"x": CX, "y": CY, "bands": {"method": "wild_bootstrap", "replicates": 1000, "simultaneous": True}}
        series = [quick] + [slow] * 60  # far more work than 1.5 s on two workers
        response = h.post("/v1/smooth/batch", json={"series": series})
        assert response.status_code == 200, response.text[:500]
        doc = response.json()
        BatchResponse.model_validate(doc)
        results = doc["results"]
        assert len(results) == len(series)
        assert "curve" in results[0]  # the first slot finished and is kept
        marked = [i for i, r in enumerate(results) if "problem" in r]
        assert marked, "some slots should have run out of time"
        for i in marked:
            problem = results[i]["problem"]
            assert problem["type"] == "/problems/deadline-exceeded"
            assert problem["instance"].endswith(f"#series[{i}]")
        finished = [r for r in results if "curve" in r]
        assert len(finished) + len(marked) == len(series)
        metrics = h.get("/metrics").text
        line = next(x for x in metrics.splitlines() if x.startswith('bandwise_batch_slots_unfinished_total{reason="deadline-exceeded"}'))
        assert float(line.split()[-1]) == len(marked)
    finally:
        h.close()
