"""Timestamps and durations at the wire, against Python's ``datetime`` as the reference reader.

Sources: RFC 3339 section 5.8 (examples), ISO 8601-1:2019 clause 5.5.2 (duration forms), and the
standard library's ``datetime.fromisoformat`` / ``timedelta`` as an independent implementation.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.contract.timeaxis import TimeValueError, format_duration, format_timestamps, parse_duration, parse_timestamps

EPOCH = dt.datetime(1970, 1, 1, tzinfo=dt.UTC)


def reference_ms(text: str) -> int:
    """Epoch milliseconds by the standard library (fractions truncated to the millisecond)."""
    stamp = dt.datetime.fromisoformat(text.replace("z", "Z").replace("t", "T"))
    delta = stamp - EPOCH
    return (delta.days * 86_400 + delta.seconds) * 1000 + delta.microseconds // 1000


# RFC 3339 section 5.8, the examples that a datetime library can represent
RFC3339_EXAMPLES = [
    ("1985-04-12T23:20:50.52Z", 482196050520),
    ("1996-12-19T16:39:57-08:00", 851042397000),
    ("1937-01-01T12:00:27.87+00:20", -1041337172130),
]


@pytest.mark.parametrize(("text", "expected"), RFC3339_EXAMPLES)
def test_rfc3339_examples(text: str, expected: int) -> None:
    # Expected values: the RFC's stated instants converted by datetime (checked below against the reference too).
    assert reference_ms(text) == expected
    assert parse_timestamps([text]).tolist() == [expected]
    assert parse_timestamps([text, text]).tolist() == [expected, expected]  # vectorised path


def test_rfc3339_leap_second_example() -> None:
    # RFC 3339 5.8: 1990-12-31T23:59:60Z is the leap second before 1991-01-01T00:00:00Z; datetime cannot hold it,
    # so it is read as the first millisecond of the next minute (documented).
    assert parse_timestamps(["1990-12-31T23:59:60Z"]).tolist() == [reference_ms("1991-01-01T00:00:00Z")]
    assert parse_timestamps(["1990-12-31T15:59:60-08:00"]).tolist() == [reference_ms("1991-01-01T00:00:00Z")]


@settings(max_examples=200, deadline=None)
@given(
    st.lists(
        st.tuples(
            st.datetimes(min_value=dt.datetime(1, 1, 2), max_value=dt.datetime(9999, 12, 30)),
            st.integers(min_value=-23 * 60 - 59, max_value=23 * 60 + 59),
            st.sampled_from(["Z", "offset", "z"]),
            st.sampled_from([0, 1, 3, 6]),
        ),
        min_size=1,
        max_size=6,
    ),
    st.booleans(),
)
def test_matches_datetime_reference(items: list[tuple[dt.datetime, int, str, int]], same_layout: bool) -> None:
    texts = []
    for stamp, offset_min, zone, digits in items:
        if same_layout:
            zone, digits, offset_min = items[0][2], items[0][3], offset_min
        if zone == "offset":
            tz = dt.timezone(dt.timedelta(minutes=offset_min))
            suffix = stamp.replace(tzinfo=tz).isoformat()[-6:]
        else:
            suffix = zone
        frac = f".{stamp.microsecond:06d}"[: digits + 1] if digits else ""
        texts.append(stamp.strftime("%Y-%m-%dT%H:%M:%S").rjust(19, "0") + frac + suffix)
    got = parse_timestamps(texts).tolist()
    assert got == [reference_ms(t) for t in texts]


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ("2026-02-30T00:00:00Z", "no real date"),
        ("2026-13-01T00:00:00Z", "no real date"),
        ("2026-03-14T24:00:00Z", "no real date"),
        ("2026-03-14T06:15:00", "no time zone offset"),
        ("14/03/2026 06:15", "not an RFC 3339"),
        ("10000-01-01T00:00:00Z", "year outside"),
        ("0000-01-01T00:00:00Z", "year outside"),
    ],
)
def test_unreadable_timestamps_name_index_and_reason(text: str, words: str) -> None:
    # Python's datetime refuses each of these too (the reference agrees they are not date-times it can hold).
    with pytest.raises(ValueError):
        dt.datetime.fromisoformat(text).astimezone(dt.UTC) if "Z" in text or "+" in text else dt.datetime.strptime(text, "%Y-%m-%dT%H:%M:%S%z")
    good = "2026-03-14T06:15:00Z"
    with pytest.raises(TimeValueError) as caught:
        parse_timestamps([good, good, text])
    assert caught.value.index == 2
    assert words in str(caught.value)
    assert "x[2]" in str(caught.value)


def test_numbers_among_strings_are_refused() -> None:
    with pytest.raises(TimeValueError) as caught:
        parse_timestamps(["2026-03-14T06:15:00Z", 1.7e12])
    assert caught.value.index == 1
    assert "cannot be mixed" in str(caught.value)


def test_format_round_trip_and_null() -> None:
    texts = ["1985-04-12T23:20:50.520Z", "1937-01-01T11:40:27.870Z", "2026-12-05T08:15:00.000Z"]
    ms = parse_timestamps(texts)
    assert format_timestamps(ms) == texts
    assert format_timestamps([float(ms[0]), float("nan")]) == [texts[0], None]
    # the reference writer agrees on the instant
    back = [dt.datetime.fromisoformat(t) for t in format_timestamps(ms)]  # type: ignore[arg-type]
    assert [reference_ms(b.isoformat()) for b in back] == ms.tolist()


# ISO 8601-1:2019 5.5.2 duration forms, checked against timedelta
@pytest.mark.parametrize(
    ("text", "delta"),
    [
        ("PT3H", dt.timedelta(hours=3)),
        ("P2D", dt.timedelta(days=2)),
        ("PT90M", dt.timedelta(minutes=90)),
        ("P1W", dt.timedelta(weeks=1)),
        ("P1DT12H", dt.timedelta(days=1, hours=12)),
        ("PT0.5S", dt.timedelta(seconds=0.5)),
        ("PT1,5H", dt.timedelta(hours=1.5)),
        ("P1DT2H3M4S", dt.timedelta(days=1, hours=2, minutes=3, seconds=4)),
    ],
)
def test_durations(text: str, delta: dt.timedelta) -> None:
    assert parse_duration(text) == delta.total_seconds() * 1000
    assert parse_duration(format_duration(parse_duration(text))) == delta.total_seconds() * 1000


@pytest.mark.parametrize(("text", "words"), [("P1Y", "years or months"), ("P2M", "years or months"), ("P1Y2DT3H", "years or months"),
                                            ("PT", "not an ISO 8601"), ("P", "not an ISO 8601"), ("3H", "not an ISO 8601"),
                                            ("PT3X", "not an ISO 8601"), ("PT0S", "zero duration")])
def test_bad_durations(text: str, words: str) -> None:
    with pytest.raises(TimeValueError) as caught:
        parse_duration(text)
    assert words in str(caught.value)


def test_minutes_in_time_part_are_not_months() -> None:
    assert parse_duration("PT5M") == 300_000.0


def test_vectorised_and_elementwise_paths_agree() -> None:
    rng = np.random.default_rng(3)
    ms = rng.integers(-10**12, 4 * 10**12, size=500)
    texts = format_timestamps(ms)
    mixed = [t if i % 7 else t.replace(".000Z", "Z") for i, t in enumerate(texts)]  # type: ignore[union-attr]
    assert parse_timestamps(texts).tolist() == ms.tolist()
    assert parse_timestamps(mixed).tolist() == ms.tolist()
