"""Read Arrow IPC request streams into checked arrays; write answers as Arrow IPC streams.

Runs in the worker processes only (the HTTP process forwards the bytes untouched).
A request stream holds the columns ``x``, ``y`` and optionally ``weights``; its
schema metadata key ``bandwise.request`` holds the other request fields as JSON.
The arrays are checked here with numpy (finite, non-negative weights, lengths,
limits) and the other fields by the same request model as a JSON body, so both
bodies meet the same rules and the same field-error codes.

An answer stream holds one record batch of one row: each array of the JSON
answer is a ``list<...>`` column named by its JSON path (``curve.estimate``,
``predictions.x``, ...), and everything else (the bandwidth value and rule,
diagnostics, warnings) is the JSON of the schema metadata key ``bandwise.answer``.
Layout: ``docs/api.md``.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import orjson
import pyarrow as pa
from pydantic import ValidationError

from service.contract.arrow_layout import ANSWER_METADATA_KEY, DATA_COLUMNS, REQUEST_METADATA_KEY, REQUIRED_COLUMNS, SMOOTH_ANSWER_COLUMNS
from service.contract.errors import ProblemError
from service.contract.field_errors import field_errors
from service.contract.models import KNOWN_FIELDS

_EXACT_INTEGER = 2**53
"""Integers up to this magnitude convert to float64 exactly."""

_TIME_UNITS_PER_MS = {"s": 1e-3, "ms": 1.0, "us": 1e3, "ns": 1e6}

Arrays = tuple[np.ndarray, np.ndarray, np.ndarray | None]


def _field(field: str, code: str, message: str) -> dict[str, str]:
    return {"field": field, "message": message, "type": code}


def _invalid_stream(what: str) -> ProblemError:
    return ProblemError(
        "malformed-request",
        f"The body is not a readable Apache Arrow IPC stream ({what}). Send one stream (the IPC streaming format, not the file format) "
        "with the columns x, y and optionally weights, and Content-Type: application/vnd.apache.arrow.stream.",
    )


def _open(body: bytes, max_rows: int | None) -> pa.Table:
    """Read the stream batch by batch, stopping once it holds more rows than ``max_rows``.

    Batches are read one at a time so that a stream of many (or compressed) batches
    is refused at the row limit instead of being expanded in full.
    """
    if not body:
        raise _invalid_stream("the body is empty")
    rows = 0
    batches = []
    try:
        reader = pa.ipc.open_stream(pa.py_buffer(body))
        for batch in reader:
            rows += batch.num_rows
            if max_rows is not None and rows > max_rows:
                raise ProblemError(
                    "validation-error",
                    "The Arrow request stream has too many rows.",
                    errors=[_field("x", "too_long", f"at most {max_rows} points are allowed (BANDWISE_MAX_POINTS), got at least {rows}; split the data or thin it")],
                )
            batches.append(batch)
        table = pa.Table.from_batches(batches, schema=reader.schema)
        table.validate(full=True)
    except (pa.ArrowException, OSError, ValueError, TypeError, IndexError, OverflowError):
        raise _invalid_stream("it is truncated, corrupted or not Arrow at all") from None
    return table


def _request_fields(schema: pa.Schema) -> dict[str, Any]:
    metadata = schema.metadata or {}
    raw = metadata.get(REQUEST_METADATA_KEY.encode())
    if raw is None:
        return {}
    try:
        fields = orjson.loads(raw)
    except orjson.JSONDecodeError:
        raise ProblemError(
            "malformed-request", f"The schema metadata {REQUEST_METADATA_KEY!r} is not valid JSON; put the other request fields there as one JSON object."
        ) from None
    if not isinstance(fields, dict):
        raise ProblemError("malformed-request", f"The schema metadata {REQUEST_METADATA_KEY!r} must be one JSON object of request fields.")
    return fields


def _column(table: pa.Table, name: str, errors: list[dict[str, str]]) -> np.ndarray | None:
    """One column as float64, or None with an entry in ``errors``."""
    column = table.column(name)
    kind = column.type
    if column.null_count:
        first = int(np.flatnonzero(column.is_null().to_numpy(zero_copy_only=False))[0])
        errors.append(_field(f"{name}[{first}]", "invalid", f"{name} holds {column.null_count} null values; send a value in every row"))
        return None
    if pa.types.is_timestamp(kind) and name == "x":
        per_ms = _TIME_UNITS_PER_MS[kind.unit]
        ticks: np.ndarray = column.cast(pa.int64()).to_numpy()
        return ticks / per_ms if per_ms != 1.0 else ticks.astype(float)
    if pa.types.is_floating(kind):
        return np.asarray(column.to_numpy(), dtype=float)
    if pa.types.is_integer(kind):
        values: np.ndarray = column.to_numpy()
        if kind.bit_width == 64 and values.size and (int(values.max()) > _EXACT_INTEGER or int(values.min()) < -_EXACT_INTEGER):
            errors.append(_field(name, "invalid", f"{name} holds integers beyond 2^53, which a double cannot hold exactly; send them as float64"))
            return None
        return values.astype(float)
    allowed = "a timestamp or any integer or floating-point type" if name == "x" else "any integer or floating-point type"
    errors.append(_field(name, "wrong_type", f"{name} is of Arrow type {kind}; send {allowed} (float64 is best)"))
    return None


def _first_bad(name: str, values: np.ndarray, bad: np.ndarray, code: str, message: str, errors: list[dict[str, str]]) -> None:
    where = np.flatnonzero(bad)
    if where.size:
        errors.append(_field(f"{name}[{int(where[0])}]", code, f"{message} ({where.size} values in all)"))


def _check_arrays(x: np.ndarray, y: np.ndarray, weights: np.ndarray | None, limits: dict[str, int], errors: list[dict[str, str]]) -> None:
    """The checks a JSON body's arrays get from the request model, done with numpy."""
    n = x.size
    limit = limits.get("max_points")
    if limit is not None and n > limit:
        errors.append(_field("x", "too_long", f"at most {limit} points are allowed (BANDWISE_MAX_POINTS), got {n}; split the data or thin it"))
        return
    if n < 2:
        errors.append(_field("x", "too_short", f"at least 2 points are needed, got {n}"))
        return
    for name, values in (("x", x), ("y", y), ("weights", weights)):
        if values is not None:
            _first_bad(name, values, ~np.isfinite(values), "not_finite", "must be a finite number", errors)
    if weights is not None:
        _first_bad("weights", weights, weights < 0, "too_small", "must be >= 0", errors)
        if not np.any(weights > 0):
            errors.append(_field("weights", "invalid", "at least one weight must be > 0"))


def read_request(body: bytes, model: type[Any], validation_context: dict[str, Any]) -> tuple[Any, Arrays]:
    """Decode and check one Arrow request stream.

    Parameters
    ----------
    body : bytes
        The request body.
    model : type
        The request model the other fields must satisfy (``SmoothRequest`` or ``BandwidthRequest``).
    validation_context : dict
        ``{"limits": {...}}``, as for a JSON body.

    Returns
    -------
    request, (x, y, weights)
        The validated request (its ``x``/``y`` are placeholders: use the arrays) and the float64 arrays.

    Raises
    ------
    ProblemError
        ``malformed-request`` (400) for a stream that cannot be read, ``validation-error`` (422)
        naming each missing, extra, wrongly typed or invalid column or field.
    """
    limits = validation_context.get("limits") or {}
    table = _open(body, limits.get("max_points"))
    fields = _request_fields(table.schema)
    names = table.column_names
    errors: list[dict[str, str]] = []
    for name in sorted({n for n in names if names.count(n) > 1}):
        errors.append(_field(name, "invalid", f"the stream has {names.count(name)} columns named {name}; send each column once"))
    for name in names:
        if name not in DATA_COLUMNS:
            errors.append(_field(name, "unknown_field", f"unexpected column {name!r}; a request stream holds only the columns x, y and weights"))
    for name in REQUIRED_COLUMNS:
        if name not in names:
            errors.append(_field(name, "missing", f"the stream has no column {name}; send x and y as columns (weights optional)"))
    for name in DATA_COLUMNS:
        if name in fields:
            errors.append(_field(name, "invalid", f"{name} belongs in a column of the stream, not in the {REQUEST_METADATA_KEY!r} metadata"))
    if errors:
        raise ProblemError("validation-error", "The Arrow request stream has missing, extra or invalid columns; see errors.", errors=errors)
    x = _column(table, "x", errors)
    y = _column(table, "y", errors)
    weights = _column(table, "weights", errors) if "weights" in names else None
    if x is not None and y is not None and (weights is not None or "weights" not in names):
        _check_arrays(x, y, weights, limits, errors)
    try:
        request = model.model_validate_json(orjson.dumps({**fields, "x": [0.0, 1.0], "y": [0.0, 0.0]}), context=validation_context)
    except ValidationError as exc:
        known = KNOWN_FIELDS[model.__name__]
        errors.extend(e for e in field_errors(exc.errors(include_url=False, include_input=False), known_fields=known) if e["field"] not in DATA_COLUMNS)
    if errors:
        raise ProblemError("validation-error", "The Arrow request has invalid columns or fields; see errors.", errors=errors)
    assert x is not None and y is not None
    return request, (x, y, weights)


# ----------------------------------------------------------------- answers


def _list_column(values: Any) -> pa.Array:
    """A one-row ``list<float64>`` (or ``list<bool>``) column; non-finite floats become nulls."""
    array = np.asarray(values)
    if array.dtype == bool:
        child = pa.array(array, type=pa.bool_())
    else:
        array = np.ascontiguousarray(array, dtype=float)
        finite = np.isfinite(array)
        child = pa.array(array, type=pa.float64(), mask=None if finite.all() else ~finite)
    return pa.ListArray.from_arrays(pa.array([0, len(child)], type=pa.int32()), child)


def _take_arrays(result: dict[str, Any]) -> tuple[dict[str, Any], dict[str, Any]]:
    """Split an answer into its arrays (by JSON path) and the rest."""
    arrays: dict[str, Any] = {}
    rest: dict[str, Any] = {}
    for key, value in result.items():
        if key == "predictions":
            rows = value or []
            if rows:
                for name in rows[0]:
                    column = [row[name] for row in rows]
                    if name == "extrapolated":
                        arrays[f"predictions.{name}"] = np.array(column, dtype=bool)
                    else:
                        arrays[f"predictions.{name}"] = np.array([np.nan if v is None else v for v in column], dtype=float)
            rest["predictions"] = {"rows": len(rows)}
        elif key in ("curve", "fitted", "bandwidth") and isinstance(value, dict):
            scalars: dict[str, Any] = {}
            for name, item in value.items():
                path = f"{key}.{name}"
                if path in SMOOTH_ANSWER_COLUMNS:
                    if item is not None:
                        arrays[path] = item
                else:
                    scalars[name] = item
            rest[key] = scalars
        else:
            rest[key] = value
    return arrays, rest


def write_answer(result: dict[str, Any]) -> bytes:
    """Encode an answer (the dict of the JSON answer) as an Arrow IPC stream of one row.

    Parameters
    ----------
    result : dict
        The answer as the JSON path builds it.

    Returns
    -------
    bytes
        The stream: ``list`` columns named by JSON path, in the order of
        :data:`~service.contract.arrow_layout.SMOOTH_ANSWER_COLUMNS`, and the
        other fields as JSON in the schema metadata key ``bandwise.answer``.
    """
    arrays, rest = _take_arrays(result)
    names = [name for name in SMOOTH_ANSWER_COLUMNS if name in arrays]
    columns = [_list_column(arrays[name]) for name in names]
    schema = pa.schema([pa.field(name, column.type) for name, column in zip(names, columns, strict=True)], metadata={ANSWER_METADATA_KEY: orjson.dumps(rest, option=orjson.OPT_SERIALIZE_NUMPY)})
    batch = pa.RecordBatch.from_arrays(columns, schema=schema)
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, schema) as writer:
        writer.write_batch(batch)
    encoded: bytes = sink.getvalue().to_pybytes()
    return encoded
