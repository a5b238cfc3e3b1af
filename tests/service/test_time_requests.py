"""Requests on a time axis: RFC 3339 x, ISO 8601 durations, missing readings and gaps, through the worker's handlers.

References: Python's ``datetime`` reads and writes the date-times (RFC 3339 section 5.6, UTC offsets) and
``datetime.timedelta`` the durations (ISO 8601 fixed units); ``estimators.fit`` on the complete rows is the
reference of a request with nulls; the gap bounds are the readings either side of the hole, by construction.
"""

from __future__ import annotations

import datetime as dt
import math
from typing import Any

import numpy as np
import orjson
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from estimators import fit
from service.contract.jobs import Job
from service.worker.handlers import JobContext, run_job
from tests.service.conftest import Harness

CTX = JobContext({"max_points": 2_000_000, "max_curve_points": 10_000, "max_predict_points": 100_000, "max_replicates": 5_000, "max_candidates": 200}, 10**9, 1)
START = dt.datetime(2026, 3, 1, tzinfo=dt.UTC)  # Harbour Street parcel depot, hourly counts (invented)


def _post(kind: str, body: dict[str, Any]) -> tuple[int, dict[str, Any]]:
    out = run_job(Job(kind, orjson.dumps(body), path=f"/v1/{kind}"), CTX)
    return out.status, orjson.loads(out.body)


def _ms(moment: dt.datetime) -> int:
    return round(moment.timestamp() * 1000)  # reference: datetime's own epoch conversion


def _rfc3339(moment: dt.datetime, offset_minutes: int) -> str:
    return moment.astimezone(dt.timezone(dt.timedelta(minutes=offset_minutes))).isoformat(timespec="milliseconds")


def _depot(hours: np.ndarray, seed: int = 0) -> tuple[list[dt.datetime], list[float]]:
    rng = np.random.default_rng(seed)
    moments = [START + dt.timedelta(hours=float(h)) for h in hours]
    counts = (40 + 15 * np.sin(hours / 12.0) + rng.normal(0, 3, hours.size)).tolist()
    return moments, counts


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_timestamp_request_equals_epoch_ms_request(seed: int) -> None:
    rng = np.random.default_rng(seed)
    hours = np.sort(rng.uniform(0, 240, 150)).round(3)
    moments, counts = _depot(hours, seed)
    offsets = rng.choice([-480, -300, 0, 60, 330, 600], size=len(moments)).tolist()  # any offset reads as the same instant
    at = [START + dt.timedelta(hours=h) for h in (3.5, 100.25, 250.0)]
    as_text = {"x": [_rfc3339(m, o) for m, o in zip(moments, offsets, strict=True)], "y": counts, "predict_at": [_rfc3339(m, 60) for m in at]}
    as_ms = {"x": [_ms(m) for m in moments], "y": counts, "predict_at": [_ms(m) for m in at]}
    for extra_text, extra_ms in (({}, {}), ({"bandwidth": "PT5H30M", "kernel": "epanechnikov"}, {"bandwidth": 5.5 * 3_600_000, "kernel": "epanechnikov"})):
        status_t, text = _post("smooth", {**as_text, **extra_text, "curve": {"points": 50}})
        status_n, numbers = _post("smooth", {**as_ms, **extra_ms, "curve": {"points": 50}})
        assert status_t == status_n == 200
        assert text["bandwidth"]["value"] == numbers["bandwidth"]["value"]
        assert text["curve"]["estimate"] == numbers["curve"]["estimate"]
        expected_x = [dt.datetime.fromtimestamp(v / 1000, dt.UTC).isoformat(timespec="milliseconds").replace("+00:00", "Z") for v in np.rint(numbers["curve"]["x"])]
        assert text["curve"]["x"] == expected_x
        assert [p["estimate"] for p in text["predictions"]] == [p["estimate"] for p in numbers["predictions"]]
        assert [p["x"] for p in text["predictions"]] == [m.isoformat(timespec="milliseconds").replace("+00:00", "Z") for m in at]
        assert text["predictions"][2]["extrapolated"] is True
        # bandwidth.duration says the value in ISO 8601; timedelta is the reference reading of it
        duration = text["bandwidth"]["duration"]
        assert duration.startswith("P") and numbers["bandwidth"].get("duration") is None
        assert abs(_duration_ms(duration) - text["bandwidth"]["value"]) <= 0.5


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    millis=st.lists(st.integers(0, 40 * 86_400_000), min_size=6, max_size=40, unique=True),
    offsets=st.lists(st.sampled_from([-720, -345, 0, 45, 60, 330, 840]), min_size=40, max_size=40),
    bandwidth_minutes=st.integers(30, 7 * 24 * 60),
)
def test_property_any_timestamp_request_equals_the_epoch_ms_request(millis: list[int], offsets: list[int], bandwidth_minutes: int) -> None:
    moments = [START + dt.timedelta(milliseconds=m) for m in millis]
    y = [math.sin(m / 3.6e6) for m in millis]
    text = {"x": [_rfc3339(m, o) for m, o in zip(moments, offsets, strict=False)], "y": y, "bandwidth": f"PT{bandwidth_minutes}M", "curve": {"points": 15}, "max_gap": None}
    numbers = {"x": [_ms(m) for m in moments], "y": y, "bandwidth": bandwidth_minutes * 60_000, "curve": {"points": 15}, "max_gap": None}
    (status_t, a), (status_n, b) = _post("smooth", text), _post("smooth", numbers)
    assert status_t == status_n
    if status_t == 200:
        assert a["curve"]["estimate"] == b["curve"]["estimate"] and a["bandwidth"]["value"] == b["bandwidth"]["value"]
        assert [_ms(dt.datetime.fromisoformat(t)) for t in a["curve"]["x"]] == [round(v) for v in b["curve"]["x"]]


def _duration_ms(text: str) -> float:
    """Reference reader for the days/hours/minutes/seconds durations the service writes (ISO 8601, fixed units)."""
    import re

    m = re.fullmatch(r"P(?:(\d+)D)?(?:T(?:(\d+)H)?(?:(\d+)M)?(?:([\d.]+)S)?)?", text)
    assert m is not None, text
    days, hours, minutes, seconds = (float(g) if g else 0.0 for g in m.groups())
    return dt.timedelta(days=days, hours=hours, minutes=minutes, seconds=seconds) / dt.timedelta(milliseconds=1)


@pytest.mark.parametrize(("duration", "delta"), [("PT3H", dt.timedelta(hours=3)), ("P2D", dt.timedelta(days=2)), ("PT90M", dt.timedelta(minutes=90)), ("P1W", dt.timedelta(weeks=1))])
def test_duration_bandwidth_is_milliseconds(duration: str, delta: dt.timedelta) -> None:
    moments, counts = _depot(np.arange(0.0, 400.0))
    x = [_rfc3339(m, 0) for m in moments]
    status, body = _post("smooth", {"x": x, "y": counts, "bandwidth": duration, "curve": {"points": 5}})
    assert status == 200
    assert body["bandwidth"]["value"] == delta / dt.timedelta(milliseconds=1)
    assert _duration_ms(body["bandwidth"]["duration"]) == body["bandwidth"]["value"]
    status, band = _post("bandwidth", {"x": x, "y": counts, "bandwidth_min": "PT1H", "bandwidth_max": duration if delta > dt.timedelta(hours=1) else "PT2H"})
    assert status == 200 and band["bandwidth"]["candidates"][0] == pytest.approx(3_600_000)
    assert band["bandwidth"]["duration"].startswith("P")


def test_dropped_nulls_equal_the_fit_of_the_complete_rows() -> None:
    moments, counts = _depot(np.arange(0.0, 120.0), seed=5)
    x: list[Any] = [_ms(m) for m in moments]
    y: list[Any] = list(counts)
    weights: list[Any] = [1.0 + (i % 3) for i in range(len(x))]
    x[7] = None
    y[20] = None
    y[21] = None
    weights[50] = None
    keep = [i for i in range(len(x)) if x[i] is not None and y[i] is not None and weights[i] is not None]
    status, body = _post("smooth", {"x": x, "y": y, "weights": weights, "curve": {"points": 30}, "include_fitted": True})
    assert status == 200
    reference = fit(np.array([x[i] for i in keep], float), np.array([y[i] for i in keep]), weights=np.array([weights[i] for i in keep]), bandwidth="auto")
    assert body["bandwidth"]["value"] == pytest.approx(reference.bandwidth, rel=1e-12)
    assert np.allclose(body["curve"]["estimate"], reference.predict(np.array(body["curve"]["x"])), rtol=1e-10, atol=1e-10)
    assert body["diagnostics"]["n_missing"] == 4 and body["diagnostics"]["n"] == 120
    assert "missing_values" in [w["code"] for w in body["warnings"]]
    fitted = body["fitted"]["estimate"]
    assert len(fitted) == 120 and fitted[7] is None and fitted[20] is None and fitted[50] is None
    assert np.allclose([fitted[i] for i in keep], reference.fitted(), rtol=1e-10)


def test_missing_error_names_every_field_with_nulls() -> None:
    y: list[Any] = [1.0, None, 3.0, 4.0, None, 6.0, None, None, None, None, 5.0]
    x = list(range(11))
    weights: list[Any] = [1.0] * 10 + [None]
    status, body = _post("smooth", {"x": x, "y": y, "weights": weights, "missing": "error"})
    assert status == 422
    by_field = {e["field"]: e for e in body["errors"]}
    assert set(by_field) == {"y", "weights"} and by_field["y"]["type"] == "null_value"
    assert "y[1], y[4]" in by_field["y"]["message"] and "1 more" in by_field["y"]["message"]  # a bounded list: 6 nulls, 5 shown
    assert "weights[10]" in by_field["weights"]["message"]


@pytest.mark.parametrize(
    ("body", "field", "code", "words"),
    [
        ({"x": ["2026-03-01T00:00:00Z", "2026-03-01 01:00", "2026-03-01T02:00:00Z"]}, "x[1]", "bad_timestamp", "time zone offset"),
        ({"x": ["2026-03-01T00:00:00Z", "2026-03-01T01:00:00Z", "12026-03-01T02:00:00Z"]}, "x[2]", "bad_timestamp", "year outside"),
        ({"x": ["2026-03-01T00:00:00Z", "yesterday", "2026-03-01T02:00:00Z"]}, "x[1]", "bad_timestamp", "RFC 3339"),
        ({"x": [0, 1, 2], "bandwidth": "PT3H"}, "bandwidth", "bad_duration", "x holds numbers"),
        ({"max_gap": "PT3X"}, "max_gap", "bad_duration", "ISO 8601 duration"),
        ({"bandwidth": "P1M"}, "bandwidth", "bad_duration", "calendar"),
        ({"bandwidth_max": "P1Y"}, "bandwidth_max", "bad_duration", "calendar"),
        ({"x": ["2026-03-01T00:00:00Z", None, None], "y": [1.0, 2.0, None]}, "x", "too_short", "at least 2"),
        ({"x": [0, 1, 2], "predict_at": ["2026-03-01T00:00:00Z"]}, "predict_at", "bad_timestamp", "x holds numbers"),
        ({"curve": {"at": ["2026-03-01T00:00:00Z", "2026-02-30T00:00:00Z"]}}, "curve.at[1]", "bad_timestamp", "no real date"),
    ],
)
def test_bad_time_input_is_a_422_naming_field_and_index(body: dict[str, Any], field: str, code: str, words: str) -> None:
    request = {"x": ["2026-03-01T00:00:00Z", "2026-03-01T01:00:00Z", "2026-03-01T02:00:00Z"], "y": [1.0, 2.0, 4.0], **body}
    status, answer = _post("smooth", request)
    assert status == 422, answer
    match = [e for e in answer["errors"] if e["field"] == field]
    assert match and match[0]["type"] == code and words in match[0]["message"], answer["errors"]


def test_every_unreadable_field_is_reported_at_once() -> None:
    status, answer = _post("smooth", {"x": ["2026-03-01T00:00:00Z", "2026-03-01T01:00:00Z", "bad"], "y": [1.0, 2.0, 3.0], "bandwidth": "P1M", "predict_at": ["no"]})
    assert status == 422
    assert {e["field"] for e in answer["errors"]} == {"x[2]", "bandwidth", "predict_at[0]"}


def test_numbers_and_strings_mixed_in_x_are_refused() -> None:
    for x in ([0, "2026-03-01T01:00:00Z", 2], ["2026-03-01T00:00:00Z", 1, "2026-03-01T02:00:00Z"]):
        status, answer = _post("smooth", {"x": x, "y": [1.0, 2.0, 3.0]})
        assert status == 422 and answer["errors"][0]["field"] == "x[1]" and answer["errors"][0]["type"] == "wrong_type"


def test_gap_in_a_batch_slot_and_errors_kept_per_slot() -> None:
    moments, counts = _depot(np.r_[np.arange(0.0, 60.0), np.arange(90.0, 150.0)])
    good = {"x": [_rfc3339(m, 0) for m in moments], "y": counts, "curve": {"points": 40}}
    status, body = _post("batch", {"series": [good, {**good, "bandwidth": "P1Y"}]})
    assert status == 200
    first, second = body["results"]
    assert first["gaps"] == [{"start": "2026-03-03T11:00:00.000Z", "end": "2026-03-04T18:00:00.000Z"}]
    assert second["problem"]["errors"][0]["field"] == "bandwidth"


def test_numeric_x_answers_as_before_with_an_empty_gap_list() -> None:
    x = np.linspace(0, 10, 80)
    status, body = _post("smooth", {"x": x.tolist(), "y": np.sin(x).tolist(), "bandwidth": 0.7, "curve": {"points": 12}, "predict_at": [2.5]})
    assert status == 200
    assert body["gaps"] == [] and "in_gap" not in body["predictions"][0] and body["diagnostics"]["n_missing"] == 0
    reference = fit(x, np.sin(x), bandwidth=0.7)
    assert np.allclose(body["curve"]["estimate"], reference.predict(np.linspace(0, 10, 12)), rtol=1e-12)
    assert "duration" not in body["bandwidth"] or body["bandwidth"]["duration"] is None


def test_max_gap_null_never_splits_and_a_number_sets_the_limit() -> None:
    x = np.r_[np.arange(0.0, 50.0), np.arange(80.0, 130.0)]
    y = np.cos(x / 9.0)
    base = {"x": x.tolist(), "y": y.tolist(), "bandwidth": 2.0, "curve": {"at": [65.0, 49.0]}}  # 49 is the reading bounding the gap: not strictly inside
    assert _post("smooth", {**base, "max_gap": None})[1]["gaps"] == []
    status, body = _post("smooth", {**base, "max_gap": 20})
    assert status == 200 and body["gaps"] == [{"start": 49.0, "end": 80.0}]
    assert body["curve"]["estimate"][0] is None and body["curve"]["estimate"][1] is not None
    assert _post("smooth", {**base, "max_gap": 31})[1]["gaps"] == []  # the spacing (31) is not more than the limit


def test_gap_through_the_service(api: Harness) -> None:
    """A 30-hour hole in hourly counts: the curve is null strictly inside, the bounds are the readings on either side, a prediction there is flagged."""
    hours = np.r_[np.arange(0.0, 100.0), np.arange(130.0, 200.0)]
    moments, counts = _depot(hours, seed=2)
    body = {
        "x": [_rfc3339(m, 120) for m in moments],
        "y": counts,
        "curve": {"points": 200},
        "predict_at": [_rfc3339(START + dt.timedelta(hours=115), 0), _rfc3339(START + dt.timedelta(hours=50), 0)],
        "bands": {"method": "analytic"},
    }
    r = api.post("/v1/smooth", json=body)
    assert r.status_code == 200, r.text
    answer = r.json()
    before, after = START + dt.timedelta(hours=99), START + dt.timedelta(hours=130)
    assert answer["gaps"] == [{"start": before.isoformat(timespec="milliseconds").replace("+00:00", "Z"), "end": after.isoformat(timespec="milliseconds").replace("+00:00", "Z")}]
    curve = answer["curve"]
    for when, estimate, lower, se in zip(curve["x"], curve["estimate"], curve["lower"], curve["se"], strict=True):
        moment = dt.datetime.fromisoformat(when.replace("Z", "+00:00"))
        inside = before < moment < after
        assert (estimate is None) == inside and (lower is None) == inside and (se is None) == inside
    assert [p["in_gap"] for p in answer["predictions"]] == [True, False]
    assert "data_gap" in [w["code"] for w in answer["warnings"]]
    assert not math.isnan(answer["bandwidth"]["value"]) and answer["bandwidth"]["duration"].startswith("PT")
