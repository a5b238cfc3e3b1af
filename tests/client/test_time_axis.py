"""The client on a time axis: datetime64, datetime and RFC 3339 x in, datetime64 x out, durations as timedelta.

Reference: Python's ``datetime`` for every conversion (RFC 3339 section 5.6; naive values read as UTC,
the client's documented choice), and the epoch-millisecond request of the same data.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from service.client import ValidationFailed
from service.client.time_values import is_time_axis, time_options, to_rfc3339

from .conftest import API_KEY, InProcessApp

HOURS = np.r_[np.arange(0, 48), np.arange(80, 120)]  # Harbour Street parcel depot: a scanner outage of 32 hours (invented)
TIMES = np.datetime64("2026-03-01T00:00", "ms") + HOURS.astype("timedelta64[h]")
COUNTS = 40 + 12 * np.sin(HOURS / 10.0) + np.random.default_rng(4).normal(0, 2, HOURS.size)


def test_conversions_match_datetime() -> None:
    aware = dt.datetime(2026, 3, 1, 7, 30, 0, 250_000, tzinfo=dt.timezone(dt.timedelta(hours=2)))
    naive = dt.datetime(2026, 3, 1, 5, 30, 0, 250_000)
    expected = "2026-03-01T05:30:00.250Z"  # the same instant in UTC, by datetime's own arithmetic
    assert aware.astimezone(dt.UTC).replace(tzinfo=None) == naive
    assert to_rfc3339([aware, naive, None]) == [expected, expected, None]
    assert to_rfc3339(np.array(["2026-03-01T05:30:00.250", "NaT"], dtype="datetime64[us]")) == [expected, None]
    assert to_rfc3339(["2026-03-01T07:30:00+02:00"]) == ["2026-03-01T07:30:00+02:00"]  # strings pass as written
    assert is_time_axis(TIMES) and is_time_axis([aware]) and is_time_axis(["2026-03-01T00:00:00Z"])
    assert not is_time_axis([1.0, 2.0]) and not is_time_axis(np.arange(3)) and not is_time_axis(None)
    options = time_options({"bandwidth": dt.timedelta(hours=3), "max_gap": np.timedelta64(90, "m"), "curve": {"at": TIMES[:1]}})
    assert options["bandwidth"] == 3 * 3_600_000 and options["max_gap"] == 90 * 60_000
    assert options["curve"]["at"] == ["2026-03-01T00:00:00.000Z"]


def test_datetime64_in_and_out_equals_the_epoch_ms_request(app: InProcessApp) -> None:
    epoch_ms = (TIMES - np.datetime64("1970-01-01T00:00", "ms")).astype(np.int64).astype(float)
    with app.client(api_key=API_KEY) as client:
        timed = client.smooth(TIMES, COUNTS, bandwidth=dt.timedelta(hours=4), curve={"points": 60}, predict_at=TIMES[[3, 40]] + np.timedelta64(20, "h"))
        plain = client.smooth(epoch_ms, COUNTS, bandwidth=4 * 3_600_000.0, curve={"points": 60}, predict_at=epoch_ms[[3, 40]] + 20 * 3_600_000.0)
        as_text = client.smooth([str(t) + "Z" for t in TIMES], COUNTS.tolist(), bandwidth="PT4H", curve={"points": 60})
    curve = timed.curve.arrays()
    assert curve.x.dtype == np.dtype("datetime64[ms]")
    reference_x = plain.curve.arrays().x
    assert np.array_equal(curve.x.astype(np.int64), np.rint(reference_x).astype(np.int64))
    assert np.array_equal(curve.estimate, plain.curve.arrays().estimate, equal_nan=True)
    assert np.array_equal(as_text.curve.arrays().estimate, curve.estimate, equal_nan=True)
    assert timed.bandwidth.duration == "PT4H" and plain.bandwidth.duration is None
    gap = timed.gaps[0]
    assert (gap.start, gap.end) == ("2026-03-02T23:00:00.000Z", "2026-03-04T08:00:00.000Z")
    predictions = timed.prediction_arrays()
    assert predictions.x.dtype == np.dtype("datetime64[ms]") and [p.in_gap for p in timed.predictions] == [False, True]
    inside = (curve.x > np.datetime64("2026-03-02T23:00")) & (curve.x < np.datetime64("2026-03-04T08:00"))
    assert inside.any() and np.isnan(curve.estimate[inside]).all() and np.isfinite(curve.estimate[~inside]).all()


def test_mixed_x_is_refused_before_sending(app: InProcessApp) -> None:
    with app.client(api_key=API_KEY) as client, pytest.raises(ValidationFailed) as info:
        client.smooth([dt.datetime(2026, 3, 1), 5.0], [1.0, 2.0])
    assert info.value.status is None and info.value.errors[0].field == "x"
