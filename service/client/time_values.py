"""Time values in the client: numpy ``datetime64``, ``datetime`` (and pandas timestamps) to RFC 3339, durations to ms.

The service reads RFC 3339 date-times and answers in UTC with ``Z``; this module writes what a caller
holds in that form, so ``client.smooth(times, counts)`` works with the arrays people keep. Naive
date-times (``datetime64`` and ``datetime`` without a zone) are read as UTC.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

__all__ = ["is_time_axis", "time_options", "to_rfc3339"]

_TIME_OPTIONS = ("predict_at",)
_LENGTH_OPTIONS = ("bandwidth", "bandwidth_min", "bandwidth_max", "max_gap")


def _first_present(values: Sequence[Any]) -> Any:
    return next((v for v in values if v is not None), None)


def is_time_axis(values: Any) -> bool:
    """True for ``datetime64`` arrays and for sequences of ``datetime``, ``datetime64`` or strings."""
    if values is None or isinstance(values, (str, bytes, Mapping)):
        return False
    if hasattr(values, "__array__") and not isinstance(values, (list, tuple)):
        array = np.asarray(values)
        if array.dtype.kind == "M":
            return True
        if array.dtype.kind not in "OU" or array.ndim != 1:
            return False
        values = array.tolist()
    try:
        items = list(values)
    except TypeError:
        return False
    return isinstance(_first_present(items), (str, dt.datetime, np.datetime64))


def _one(value: Any) -> str | None:
    if value is None:
        return None
    if isinstance(value, str):
        return value
    if isinstance(value, np.datetime64):
        return None if np.isnat(value) else str(np.datetime_as_string(value.astype("datetime64[ms]"), unit="ms", timezone="UTC"))
    if isinstance(value, dt.datetime):
        moment = value.replace(tzinfo=dt.UTC) if value.tzinfo is None else value.astimezone(dt.UTC)
        return moment.isoformat(timespec="milliseconds").replace("+00:00", "Z")
    raise TypeError(f"{value!r} is not a date-time; give datetime64, datetime or RFC 3339 strings")


def to_rfc3339(values: Any) -> list[str | None]:
    """Date-times as RFC 3339 UTC strings (milliseconds, ``Z``); NaT and None become None (a missing reading).

    Parameters
    ----------
    values : array_like
        ``datetime64`` array (any unit; read as UTC), a sequence of ``datetime`` (pandas ``Timestamp`` included;
        naive ones read as UTC), or RFC 3339 strings (passed as they are).
    """
    if hasattr(values, "__array__") and not isinstance(values, (list, tuple)):
        array = np.asarray(values)
        if array.dtype.kind == "M":
            text = np.datetime_as_string(array.astype("datetime64[ms]"), unit="ms", timezone="UTC").tolist()
            missing = np.isnat(array)
            return [None if gone else t for t, gone in zip(text, missing.tolist(), strict=True)]
        values = array.tolist()
    return [_one(v) for v in values]


def _length(value: Any) -> Any:
    """``timedelta`` / ``timedelta64`` as milliseconds (what the service takes beside ISO 8601 durations)."""
    if isinstance(value, np.timedelta64):
        return float(value / np.timedelta64(1, "ms"))
    if isinstance(value, dt.timedelta):
        return value / dt.timedelta(milliseconds=1)
    return value


def time_options(options: dict[str, Any]) -> dict[str, Any]:
    """Options of a time-axis request with date-times written as RFC 3339 and durations as milliseconds."""
    out = dict(options)
    for name in _LENGTH_OPTIONS:
        if name in out:
            out[name] = _length(out[name])
    for name in _TIME_OPTIONS:
        if out.get(name) is not None and is_time_axis(out[name]):
            out[name] = to_rfc3339(out[name])
    curve = out.get("curve")
    if isinstance(curve, Mapping) and curve.get("at") is not None and is_time_axis(curve["at"]):
        out["curve"] = {**curve, "at": to_rfc3339(curve["at"])}
    return out
