"""Compiled reader of same-layout RFC 3339 date-times (one pass over their bytes; see ``service.contract.timeaxis``)."""

from __future__ import annotations

import numpy as np
from numba import njit

_DAYS_IN_MONTH = np.array([0, 31, 29, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31], dtype=np.int64)


@njit(cache=True, nogil=True)
def _num(row, start, count):  # type: ignore[no-untyped-def]
    value = 0
    for k in range(start, start + count):
        d = row[k] - 48
        if d < 0 or d > 9:
            return -1
        value = value * 10 + d
    return value


@njit(cache=True, nogil=True)
def read_fixed(rows, frac_len, zulu, out):  # type: ignore[no-untyped-def]
    """Fill ``out`` with epoch ms of each row; return the index of the first row that does not fit, or -1."""
    tail = 19 + (frac_len + 1 if frac_len > 0 else 0)
    kept = min(frac_len, 3)
    scale = 1
    for _ in range(3 - kept):
        scale *= 10
    for i in range(rows.shape[0]):
        row = rows[i]
        sep = row[10]
        if row[4] != 45 or row[7] != 45 or row[13] != 58 or row[16] != 58 or not (sep == 84 or sep == 116 or sep == 32):
            return i
        year = _num(row, 0, 4)
        month = _num(row, 5, 2)
        day = _num(row, 8, 2)
        hour = _num(row, 11, 2)
        minute = _num(row, 14, 2)
        second = _num(row, 17, 2)
        if year < 1 or month < 1 or month > 12 or day < 1 or hour < 0 or hour > 23 or minute < 0 or minute > 59 or second < 0 or second > 60:
            return i
        leap = (year % 4 == 0 and year % 100 != 0) or year % 400 == 0
        limit = _DAYS_IN_MONTH[month] - (1 if (month == 2 and not leap) else 0)
        if day > limit:
            return i
        millis = 0
        if frac_len > 0:
            if row[19] != 46 or _num(row, 20, frac_len if frac_len <= 18 else 18) < 0:
                return i
            millis = _num(row, 20, kept) * scale
        offset = 0
        if zulu:
            if not (row[tail] == 90 or row[tail] == 122):
                return i
        else:
            sign = row[tail]
            off_h = _num(row, tail + 1, 2)
            off_m = _num(row, tail + 4, 2)
            if not (sign == 43 or sign == 45) or row[tail + 3] != 58 or off_h < 0 or off_h > 23 or off_m < 0 or off_m > 59:
                return i
            offset = (off_h * 60 + off_m) * 60_000
            if sign == 45:
                offset = -offset
        y = year - (1 if month <= 2 else 0)
        era = y // 400
        yoe = y - era * 400
        mp = (month + 9) % 12
        doy = (153 * mp + 2) // 5 + day - 1
        doe = yoe * 365 + yoe // 4 - yoe // 100 + doy
        days = era * 146097 + doe - 719468
        out[i] = ((days * 24 + hour) * 60 + minute) * 60_000 + second * 1000 + millis - offset
    return -1
