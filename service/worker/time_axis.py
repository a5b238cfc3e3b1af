"""The time axis of a request, in the worker: timestamps and durations to numbers, missing readings, gaps.

``prepare`` reads a validated request (its x may be RFC 3339 date-times, its lengths ISO 8601 durations,
its arrays may hold nulls) into numeric arrays and a numeric copy of the request, so ``estimators``
only ever sees numbers. ``finish`` puts the answer back on the request's axis: gaps found and the
curve left undefined inside them, predictions flagged, x values written as date-times when they
came as date-times, the missing count and their warnings.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from estimators import KERNELS
from estimators.gaps import auto_max_gap, find_gaps, inside_gaps
from service.contract.errors import ProblemError
from service.contract.field_errors import MAX_FIELD_ERRORS
from service.contract.timeaxis import TimeValueError, format_duration, format_timestamps, parse_duration, parse_timestamps

__all__ = ["Prepared", "finish", "prepare"]

_SHOWN_NULLS = 5
_CURVE_COLUMNS = ("estimate", "lower", "upper", "se", "band_center")
_PREDICTION_COLUMNS = ("estimate", "lower", "upper", "interval_lower", "interval_upper")


class _Caution:
    def __init__(self, code: str, message: str) -> None:
        self.code = code
        self.message = message


@dataclass
class Prepared:
    """A request on a numeric axis: what ``estimators`` is called with, and what ``finish`` needs."""

    request: Any
    x: np.ndarray
    y: np.ndarray
    weights: np.ndarray | None
    timestamps: bool
    n_given: int
    n_missing: int
    kept: np.ndarray | None = None  # positions of the readings kept, when some were left out
    errors: list[dict[str, str]] = field(default_factory=list)


def _first_value(values: list[Any]) -> Any:
    return next((v for v in values if v is not None), None)


def _null_positions(values: list[Any] | None) -> list[int]:
    if values is None or values.count(None) == 0:
        return []
    return [i for i, v in enumerate(values) if v is None]


def _read_times(values: list[Any], where: str, errors: list[dict[str, str]]) -> np.ndarray:
    """Date-times (nulls stay NaN) as float epoch ms; an unreadable one adds a field error at its index."""
    nulls = values.count(None)
    filler = _first_value(values) if nulls else None
    try:
        ms = parse_timestamps(values if not nulls else [filler if v is None else v for v in values]).astype(np.float64)
    except TimeValueError as exc:
        index = exc.index if exc.index is not None else 0
        message = exc.message.replace(f"x[{index}]", f"{where}[{index}]", 1)
        errors.append({"field": f"{where}[{index}]", "message": message, "type": "bad_timestamp"})
        return np.full(len(values), np.nan)
    if nulls:
        ms[[i for i, v in enumerate(values) if v is None]] = np.nan
    return ms


def _read_points(values: list[Any] | None, where: str, timestamps: bool, errors: list[dict[str, str]]) -> np.ndarray | None:
    """``curve.at`` / ``predict_at``: numbers (epoch ms with timestamp x) or date-times when x holds them."""
    if values is None:
        return None
    if values and isinstance(values[0], str):
        if not timestamps:
            errors.append({"field": where, "message": f"{where} holds date-times but x holds numbers; give {where} as numbers on the axis of x", "type": "bad_timestamp"})
            return None
        return _read_times(values, where, errors)
    return np.asarray(values, dtype=np.float64)


def _read_length(value: Any, where: str, timestamps: bool, errors: list[dict[str, str]]) -> Any:
    """A bandwidth or gap length: numbers pass; an ISO 8601 duration becomes milliseconds (timestamp x only)."""
    if not isinstance(value, str) or value == "auto":
        return value
    if not timestamps:
        errors.append({"field": where, "message": f"{value!r} is a duration, but x holds numbers; give {where} as a number in x units (durations need x as RFC 3339 date-times)", "type": "bad_duration"})
        return None
    try:
        return parse_duration(value)
    except TimeValueError as exc:
        errors.append({"field": where, "message": exc.message, "type": "bad_duration"})
        return None


def _null_error(name: str, positions: list[int]) -> dict[str, str]:
    shown = ", ".join(f"{name}[{i}]" for i in positions[:_SHOWN_NULLS])
    more = f" and {len(positions) - _SHOWN_NULLS} more" if len(positions) > _SHOWN_NULLS else ""
    return {
        "field": name,
        "message": f"null at {shown}{more}; give a value there, or send missing: \"drop\" to leave those readings out",
        "type": "null_value",
    }


def prepare(req: Any, arrays: tuple[np.ndarray, np.ndarray, np.ndarray | None] | None = None) -> Prepared:
    """Read a validated smooth or bandwidth request onto a numeric axis.

    ``arrays`` are x, y and weights already decoded (an Arrow body, whose request
    holds placeholders for them); they hold no nulls and x is numeric.

    Raises
    ------
    ProblemError
        ``validation-error`` listing every field that cannot be read (timestamps, durations, nulls
        under ``missing: "error"``, fewer than two complete readings); nothing else is lost.
    """
    errors: list[dict[str, str]] = []
    if arrays is not None:
        x, y, weights = arrays
        n = len(x)
        timestamps = False
        nulls: dict[str, list[int]] = {}
    else:
        n = len(req.x)
        timestamps = isinstance(_first_value(req.x), str)
        x = _read_times(req.x, "x", errors) if timestamps else np.asarray(req.x, dtype=np.float64)
        y = np.asarray(req.y, dtype=np.float64)
        weights = None if req.weights is None else np.asarray(req.weights, dtype=np.float64)
        nulls = {name: _null_positions(values) for name, values in (("x", req.x), ("y", req.y), ("weights", req.weights))}
    has_nulls = any(nulls.values())
    if has_nulls and req.missing == "error":
        errors.extend(_null_error(name, positions) for name, positions in nulls.items() if positions)

    updates: dict[str, Any] = {}
    for name in ("bandwidth", "bandwidth_min", "bandwidth_max", "max_gap"):
        if name in type(req).model_fields:
            value = getattr(req, name)
            read = _read_length(value, name, timestamps, errors)
            if read is not value:
                updates[name] = read
    curve = getattr(req, "curve", None)
    if curve is not None and curve.at is not None:
        at = _read_points(curve.at, "curve.at", timestamps, errors)
        if at is not None:
            updates["curve"] = curve.model_copy(update={"at": at})
    if getattr(req, "predict_at", None) is not None:
        updates["predict_at"] = _read_points(req.predict_at, "predict_at", timestamps, errors)

    kept = None
    n_missing = 0
    if has_nulls and not errors:
        ok = ~(np.isnan(x) | np.isnan(y))
        if weights is not None:
            ok &= ~np.isnan(weights)
        kept = np.flatnonzero(ok)
        n_missing = n - kept.size
        x, y = x[kept], y[kept]
        weights = None if weights is None else weights[kept]
        if kept.size < 2:
            errors.append({"field": "x", "message": f"at least 2 readings without nulls are needed, got {kept.size} of {n}; fill in the missing values", "type": "too_short"})
        elif weights is not None and not np.any(weights > 0):
            errors.append({"field": "weights", "message": "at least one reading without nulls must have a weight > 0", "type": "invalid"})
    if errors:
        raise ProblemError("validation-error", "The request has fields that cannot be read; see errors.", errors=errors[:MAX_FIELD_ERRORS])
    if "bandwidth_min" in updates or "bandwidth_max" in updates:
        low = updates.get("bandwidth_min", req.bandwidth_min)
        high = updates.get("bandwidth_max", req.bandwidth_max)
        if isinstance(low, float) and isinstance(high, float) and low >= high:
            raise ProblemError("validation-error", "The request has invalid fields; see errors.", errors=[{"field": "bandwidth_max", "message": "bandwidth_max must be longer than bandwidth_min", "type": "invalid"}])
    numeric = req.model_copy(update=updates) if updates else req
    return Prepared(numeric, x, y, weights, timestamps, n, n_missing, kept)


def _sorted_used(prep: Prepared) -> np.ndarray:
    """x of the readings that carry weight, sorted (time series usually come sorted: then no sort)."""
    xs = prep.x if prep.weights is None else prep.x[prep.weights > 0]
    if xs.size > 1 and not bool(np.all(xs[1:] >= xs[:-1])):
        xs = np.sort(xs)
    return xs


def _gap_threshold(prep: Prepared, xs: np.ndarray, bandwidth: float) -> float:
    setting = getattr(prep.request, "max_gap", "auto")
    if setting is None:
        return math.inf
    if setting == "auto":
        return auto_max_gap(xs, float(KERNELS[prep.request.kernel].support), bandwidth)
    return float(setting)


def _length_text(value: float, timestamps: bool) -> str:
    return format_duration(value) if timestamps else f"{value:.6g}"


def finish(body: dict[str, Any], prep: Prepared) -> dict[str, Any]:
    """Put a smooth answer on the request's axis: gaps, nulls inside them, date-times, missing count."""
    cautions: list[_Caution] = []
    xs = _sorted_used(prep)
    threshold = _gap_threshold(prep, xs, float(body["bandwidth"]["value"]))
    starts, ends = find_gaps(xs, threshold)
    curve = body["curve"]
    predictions = body["predictions"]
    if starts.size:
        hidden = inside_gaps(curve["x"], starts, ends)
        if hidden.any():
            for name in _CURVE_COLUMNS:
                if curve.get(name) is not None:
                    column = np.array(curve[name], dtype=np.float64)
                    column[hidden] = np.nan
                    curve[name] = column
        flagged = inside_gaps([p["x"] for p in predictions], starts, ends) if predictions else np.zeros(0, dtype=bool)
        for p, in_gap in zip(predictions, flagged.tolist(), strict=True):
            p["in_gap"] = in_gap
        widest = float(np.max(ends - starts))
        message = (
            f"{starts.size} gap{'s' if starts.size > 1 else ''} in the data wider than max_gap = {_length_text(threshold, prep.timestamps)} "
            f"(the widest {_length_text(widest, prep.timestamps)}): the curve is null strictly inside, see gaps"
        )
        count = int(np.count_nonzero(flagged))
        if count:
            message += f"; {count} prediction point{'s lie' if count > 1 else ' lies'} inside a gap (in_gap), where the estimate was never measured"
        cautions.append(_Caution("data_gap", message + "."))
    # without gaps the predictions keep the layout they always had (in_gap absent means false)
    gaps = [{"start": a, "end": b} for a, b in zip(starts.tolist(), ends.tolist(), strict=True)]

    if prep.n_missing:
        cautions.append(_Caution("missing_values", f"{prep.n_missing} of {prep.n_given} readings had a null in x, y or weights and were left out."))
        fitted = body.get("fitted")
        if fitted is not None and prep.kept is not None:
            for name in ("estimate", "residuals", "robustness_weights"):
                if name not in fitted:
                    continue
                full = np.full(prep.n_given, np.nan)
                full[prep.kept] = fitted[name]
                fitted[name] = full
    anomalies = body.get("anomalies")
    if anomalies and prep.kept is not None:
        for item in anomalies:
            item["index"] = int(prep.kept[item["index"]])
    if anomalies and prep.timestamps:
        for item, text in zip(anomalies, format_timestamps([item["x"] for item in anomalies]), strict=True):
            item["x"] = text
    body["diagnostics"]["n"] = prep.n_given
    body["diagnostics"]["n_missing"] = prep.n_missing

    if prep.timestamps:
        curve["x"] = format_timestamps(curve["x"])
        if predictions:
            for p, text in zip(predictions, format_timestamps([p["x"] for p in predictions]), strict=True):
                p["x"] = text
        if gaps:
            for gap, a, b in zip(gaps, format_timestamps(starts), format_timestamps(ends), strict=True):
                gap["start"], gap["end"] = a, b
        body["bandwidth"]["duration"] = format_duration(float(body["bandwidth"]["value"]))
    body["gaps"] = gaps
    body["warnings"].extend({"code": c.code, "message": c.message} for c in cautions)
    return body


def finish_bandwidth(body: dict[str, Any], prep: Prepared) -> dict[str, Any]:
    """Put a bandwidth answer on the request's axis: the duration beside the value, the missing count's warning."""
    if prep.timestamps:
        body["bandwidth"]["duration"] = format_duration(float(body["bandwidth"]["value"]))
    if prep.n_missing:
        body["warnings"].append({"code": "missing_values", "message": f"{prep.n_missing} of {prep.n_given} readings had a null in x, y or weights and were left out."})
    return body
