"""Time axis at the wire: RFC 3339 date-times and ISO 8601 durations to epoch milliseconds, and back.

The numerics work in numbers; timestamps are converted here, once, at the boundary.

References
----------
RFC 3339, "Date and Time on the Internet: Timestamps", IETF, 2002 (section 5.6 grammar, 5.8 examples).
ISO 8601-1:2019, "Date and time -- Representations for information interchange", clause 5.5.2 (durations).
"""

from __future__ import annotations

import calendar
import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from . import _compiled_time

__all__ = [
    "TimeValueError",
    "format_timestamps",
    "format_duration",
    "parse_duration",
    "parse_timestamps",
]

MS_PER_DAY = 86_400_000

# RFC 3339 section 5.6: full-date "T" full-time; "T"/"Z" may be lower case and a space may stand for "T" (5.6, NOTE).
_TIMESTAMP = re.compile(
    r"(\d{4})-(\d{2})-(\d{2})[Tt ](\d{2}):(\d{2}):(\d{2})(?:\.(\d{1,9}))?(?:([Zz])|([+-])(\d{2}):(\d{2}))"
)
# ISO 8601 durations in fixed units: weeks alone, or days and a time part; Y and M (months) are calendar units.
_DURATION = re.compile(
    r"P(?:(?P<weeks>\d+(?:[.,]\d+)?)W|(?:(?P<days>\d+(?:[.,]\d+)?)D)?"
    r"(?:T(?:(?P<hours>\d+(?:[.,]\d+)?)H)?(?:(?P<minutes>\d+(?:[.,]\d+)?)M)?(?:(?P<seconds>\d+(?:[.,]\d+)?)S)?)?)"
)
_UNIT_MS = {"weeks": 7 * MS_PER_DAY, "days": MS_PER_DAY, "hours": 3_600_000, "minutes": 60_000, "seconds": 1_000}


@dataclass
class TimeValueError(ValueError):
    """A timestamp or duration that cannot be read.

    Parameters
    ----------
    message : str
        What is wrong and how to write it instead.
    index : int or None
        Position in the array, for timestamps.
    """

    message: str
    index: int | None = None

    def __post_init__(self) -> None:
        super().__init__(self.message)

    def __str__(self) -> str:
        return self.message


def _days_from_civil(year: int, month: int, day: int) -> int:
    """Days since 1970-01-01 of a proleptic Gregorian date (era-based day count, exact for every year)."""
    y = year - (month <= 2)
    era = y // 400
    yoe = y - era * 400
    doy = (153 * ((month + 9) % 12) + 2) // 5 + day - 1
    return era * 146097 + yoe * 365 + yoe // 4 - yoe // 100 + doy - 719468


def _fields_ok(year: int, month: int, day: int, hour: int, minute: int, second: int, off_h: int, off_m: int) -> bool:
    """True when the calendar fields are in range (RFC 3339 section 5.7; second 60 is a leap second)."""
    if year < 1 or not 1 <= month <= 12 or hour > 23 or minute > 59 or second > 60 or off_h > 23 or off_m > 59:
        return False
    return 1 <= day <= calendar.monthrange(year, month)[1]


def _explain(text: object, index: int) -> TimeValueError:
    """The reason one element is not an RFC 3339 date-time, in words a user can act on."""
    example = "write it as RFC 3339, e.g. 2026-03-14T06:15:00Z or 2026-03-14T07:15:00+01:00"
    if not isinstance(text, str):
        return TimeValueError(f"x[{index}] is a {type(text).__name__} among date-time strings; {example} (numbers and strings cannot be mixed)", index)
    match = _TIMESTAMP.fullmatch(text)
    shown = text if len(text) <= 40 else text[:37] + "..."
    if match is None:
        if re.fullmatch(r"[+-]?\d{5,}-.*", text):
            return TimeValueError(f"x[{index}] = {shown!r} has a year outside 0001-9999", index)
        if re.fullmatch(r"\d{4}-\d{2}-\d{2}[Tt ]\d{2}:\d{2}(:\d{2})?(\.\d+)?", text):
            return TimeValueError(f"x[{index}] = {shown!r} has no time zone offset; add Z for UTC or an offset like +01:00", index)
        return TimeValueError(f"x[{index}] = {shown!r} is not an RFC 3339 date-time; {example}", index)
    year, month, day, hour, minute, second = (int(match.group(k)) for k in range(1, 7))
    if year < 1:
        return TimeValueError(f"x[{index}] = {shown!r} has a year outside 0001-9999", index)
    return TimeValueError(f"x[{index}] = {shown!r} names no real date or time (month, day, hour, minute, second or offset out of range)", index)


def _fixed_width(values: list[Any], width: int) -> npt.NDArray[np.uint8] | None:
    """The strings as an (n, width) byte matrix when every one is ASCII of that width, else None."""
    try:
        blob = "".join(values).encode("ascii")
    except (UnicodeEncodeError, TypeError):
        return None
    n = len(values)
    if len(blob) != n * width:
        return None
    return np.frombuffer(blob, dtype=np.uint8).reshape(n, width)


def _parse_fixed(rows: npt.NDArray[np.uint8]) -> npt.NDArray[np.int64] | None:
    """Read same-width date-times in one compiled pass; None when a row departs from the first row's layout."""
    match = _TIMESTAMP.fullmatch(bytes(rows[0]).decode("ascii"))
    if match is None:
        return None
    frac_len = len(match.group(7) or "")
    zulu = match.group(8) is not None
    if rows.shape[1] != 19 + (frac_len + 1 if frac_len else 0) + (1 if zulu else 6):
        return None
    out = np.empty(rows.shape[0], dtype=np.int64)
    if _compiled_time.read_fixed(rows, frac_len, zulu, out) >= 0:
        return None
    return out


def _parse_one(text: object, index: int) -> int:
    match = _TIMESTAMP.fullmatch(text) if isinstance(text, str) else None
    if match is None:
        raise _explain(text, index)
    year, month, day, hour, minute, second = (int(match.group(k)) for k in range(1, 7))
    off_h, off_m = int(match.group(10) or 0), int(match.group(11) or 0)
    if not _fields_ok(year, month, day, hour, minute, second, off_h, off_m):
        raise _explain(text, index)
    millis = int((match.group(7) or "")[:3].ljust(3, "0"))
    offset = (off_h * 60 + off_m) * 60_000 * (-1 if match.group(9) == "-" else 1)
    return ((_days_from_civil(year, month, day) * 24 + hour) * 60 + minute) * 60_000 + second * 1000 + millis - offset


def parse_timestamps(values: Sequence[object]) -> npt.NDArray[np.int64]:
    """Read RFC 3339 date-times as UTC epoch milliseconds.

    Parameters
    ----------
    values : sequence of str
        Date-times such as ``"2026-03-14T06:15:00Z"`` or ``"2026-03-14T07:15:00.250+01:00"``; any offset; ``t``, ``z``
        and a space for ``T`` are accepted as RFC 3339 allows. Fractions finer than a millisecond are truncated.
        A leap second (``:60``) reads as the first millisecond of the next minute.

    Returns
    -------
    ndarray of int64
        Milliseconds since 1970-01-01T00:00:00Z.

    Raises
    ------
    TimeValueError
        For the first element that is not a date-time (with its index and the reason).

    Notes
    -----
    Arrays whose strings share one width and layout (what loggers write) are read in one vectorised pass over their
    bytes; any other array is read element by element.
    """
    n = len(values)
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    first = values[0]
    if isinstance(first, str) and isinstance(values, list):
        rows = _fixed_width(values, len(first))
        if rows is not None:
            fast = _parse_fixed(rows)
            if fast is not None:
                return fast
    out = np.empty(n, dtype=np.int64)
    for i, text in enumerate(values):
        out[i] = _parse_one(text, i)
    return out


def format_timestamps(ms: npt.ArrayLike) -> list[str | None]:
    """RFC 3339 UTC strings (``Z``, millisecond precision) for epoch milliseconds; NaN gives None.

    Parameters
    ----------
    ms : array_like of float or int
        Milliseconds since 1970-01-01T00:00:00Z; fractions of a millisecond are rounded to the nearest.

    Returns
    -------
    list of str or None
    """
    values = np.asarray(ms, dtype=np.float64)
    finite = np.isfinite(values)
    stamps = np.datetime_as_string(np.where(finite, np.rint(values), 0).astype(np.int64).astype("datetime64[ms]"), unit="ms", timezone="UTC")
    text: list[str | None] = stamps.tolist()
    if not finite.all():
        for i in np.flatnonzero(~finite):
            text[int(i)] = None
    return text


def parse_duration(text: str) -> float:
    """Read an ISO 8601 duration in fixed units as milliseconds.

    Parameters
    ----------
    text : str
        ``PnW``, or ``PnD``, ``PTnH``, ``PTnM``, ``PTnS`` and their combinations (``P1DT6H``, ``PT90M``, ``PT0.5S``);
        decimal fractions (point or comma) are allowed.

    Returns
    -------
    float
        The duration in milliseconds (> 0).

    Raises
    ------
    TimeValueError
        For years and months (their length depends on the calendar), a zero duration, or text that is not a duration.
    """
    body = text.strip()
    date_part = body.split("T", 1)[0]
    if body.startswith("P") and re.search(r"\d(?:[.,]\d+)?[YM]", date_part):
        raise TimeValueError(
            f"{text!r} uses years or months, whose length depends on the calendar; write it in weeks, days, hours, minutes or seconds (e.g. P30D)"
        )
    match = _DURATION.fullmatch(body)
    if match is None or body in ("P", "PT") or body.endswith("T"):
        raise TimeValueError(f"{text!r} is not an ISO 8601 duration; write e.g. PT15M, PT3H, P2D, P1DT12H or P1W")
    total = 0.0
    for unit, scale in _UNIT_MS.items():
        value = match.group(unit)
        if value is not None:
            total += float(value.replace(",", ".")) * scale
    if not total > 0:
        raise TimeValueError(f"{text!r} is a zero duration; a bandwidth or gap must be longer than zero")
    return total


def format_duration(ms: float) -> str:
    """ISO 8601 duration for a positive number of milliseconds: days, hours, minutes and seconds (to the millisecond).

    Parameters
    ----------
    ms : float
        Milliseconds (> 0).

    Returns
    -------
    str
        E.g. ``"PT3H"``, ``"P1DT12H"``, ``"PT0.25S"``.
    """
    total = int(round(ms))
    days, rest = divmod(total, MS_PER_DAY)
    hours, rest = divmod(rest, 3_600_000)
    minutes, rest = divmod(rest, 60_000)
    seconds, millis = divmod(rest, 1000)
    text = "P" + (f"{days}D" if days else "")
    clock = (f"{hours}H" if hours else "") + (f"{minutes}M" if minutes else "")
    if seconds or millis:
        clock += f"{seconds}.{millis:03d}".rstrip("0").rstrip(".") + "S"
    if clock:
        text += "T" + clock
    return text if text != "P" else "PT0S"
