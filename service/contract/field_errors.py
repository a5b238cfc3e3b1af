"""Field errors of a 422 ``validation-error`` problem: the service's own codes and sentences.

Each entry of a problem's ``errors`` list is ``{"field", "message", "type"}``.
``type`` is one of :data:`FIELD_ERROR_CODES`; ``message`` says what to change.
The validation library's own identifiers and sentences never reach the user:
:func:`field_errors` turns each of its failures into one of our codes with our
own message, and a failure it does not know becomes ``invalid``.
"""

from __future__ import annotations

import difflib
import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

MAX_FIELD_ERRORS = 50

FIELD_ERROR_CODES: dict[str, str] = {
    "missing": "A required field is absent.",
    "unknown_field": "A field the schema does not have; the message suggests the closest known name.",
    "wrong_type": "A value of the wrong JSON type (a string for a number, an object for an array, ...).",
    "not_finite": "NaN, Infinity, or a number too large for a double.",
    "too_small": "Below the minimum; the message gives the bound.",
    "too_large": "Above the maximum; the message gives the bound.",
    "too_short": "An array shorter than allowed.",
    "too_long": "An array longer than allowed; the message gives the limit and its setting.",
    "not_allowed": "Not one of the allowed choices; the message lists them.",
    "invalid": "A check on the value or between fields failed; the message says which and why.",
    "bad_timestamp": "A string that is not an RFC 3339 date-time with a time zone offset (or has a year outside 0001-9999), or a date-time where x is numeric; the message gives the index and how to write it.",
    "bad_duration": "A length that is not an ISO 8601 duration in fixed units (weeks, days, hours, minutes, seconds; years and months depend on the calendar), or a duration where x is numeric.",
    "repeated_field": "A name given twice in one JSON object; send each field once.",
    "null_value": "A null (a missing reading) in a request with missing: \"error\"; the message lists where.",
    "truncated": f"More errors than shown (the first {MAX_FIELD_ERRORS} are kept).",
}

RENAMED_FIELDS: dict[str, str] = {"candidates": "candidate_count"}
"""Request fields of earlier versions and their names now."""


class FieldProblem(ValueError):
    """A failed check raised inside a model, with our code and, optionally, the field it belongs to.

    Parameters
    ----------
    code : str
        Key of :data:`FIELD_ERROR_CODES`.
    message : str
        What is wrong and what to do.
    field : str, optional
        Field of the model the check belongs to (for checks between fields).
    """

    def __init__(self, code: str, message: str, field: str | None = None) -> None:
        super().__init__(message)
        self.code = code
        self.message = message
        self.field = field


_TYPE_NAMES = {
    "float_type": "a number",
    "float_parsing": "a number",
    "int_type": "a whole number",
    "int_parsing": "a whole number",
    "int_from_float": "a whole number",
    "bool_type": "true or false",
    "bool_parsing": "true or false",
    "string_type": "a string",
    "list_type": "an array",
    "tuple_type": "an array",
    "dict_type": "an object",
    "model_type": "an object",
    "model_attributes_type": "an object",
}
_SMALL = {"greater_than": ("gt", "greater than"), "greater_than_equal": ("ge", "at least")}
_LARGE = {"less_than": ("lt", "less than"), "less_than_equal": ("le", "at most")}


def _number(value: Any) -> str:
    if isinstance(value, float) and value.is_integer() and abs(value) < 1e15:
        return str(int(value))
    return str(value)


def _location(loc: Sequence[Any], prefix: str) -> str:
    text = prefix
    for part in loc:
        if isinstance(part, int):
            text += f"[{part}]"
        else:
            text = f"{text}.{part}" if text else str(part)
    return text or "body"


def _choices(expected: Any) -> str:
    """The allowed values of a choice, from the failure's context (``'a', 'b' or 'c'``), as ``a, b, c``."""
    found = re.findall(r"'([^']*)'|(-?\d+(?:\.\d+)?)", str(expected))
    values = [a or b for a, b in found]
    return ", ".join(values)


def _unknown_field_message(name: str, known: Sequence[str]) -> str:
    if name in RENAMED_FIELDS:
        return f"unknown field {name!r}: it is now called {RENAMED_FIELDS[name]!r}; send {RENAMED_FIELDS[name]!r} instead."
    close = difflib.get_close_matches(name, known, n=1, cutoff=0.6)
    if close:
        return f"unknown field {name!r}; did you mean {close[0]!r}? Remove it or correct the name."
    listed = f" Known fields: {', '.join(known)}." if known else ""
    return f"unknown field {name!r}; remove it.{listed}"


def _translate(error: Mapping[str, Any], known_fields: Mapping[str, Sequence[str]]) -> tuple[tuple[Any, ...], str, str]:
    """One failure of the validation library as (location, our code, our message)."""
    loc = tuple(error.get("loc", ()))
    kind = str(error.get("type", ""))
    ctx: Mapping[str, Any] = error.get("ctx") or {}
    cause = ctx.get("error")
    if isinstance(cause, FieldProblem):
        return (loc + (cause.field,) if cause.field else loc), cause.code, cause.message
    if kind == "missing":
        return loc, "missing", "this field is required; add it."
    if kind == "extra_forbidden":
        parent = ".".join(str(p) for p in loc[:-1] if not isinstance(p, int))
        return loc, "unknown_field", _unknown_field_message(str(loc[-1]) if loc else "", known_fields.get(parent, ()))
    if kind == "finite_number":
        return loc, "not_finite", "must be a finite number (not NaN or Infinity, and within the range of a double)."
    if kind in _TYPE_NAMES:
        return loc, "wrong_type", f"must be {_TYPE_NAMES[kind]}."
    if kind in _SMALL:
        key, words = _SMALL[kind]
        return loc, "too_small", f"must be {words} {_number(ctx.get(key))}."
    if kind in _LARGE:
        key, words = _LARGE[kind]
        return loc, "too_large", f"must be {words} {_number(ctx.get(key))}."
    if kind == "too_short":
        return loc, "too_short", f"must hold at least {ctx.get('min_length')} items."
    if kind == "too_long":
        return loc, "too_long", f"must hold at most {ctx.get('max_length')} items."
    if kind in ("literal_error", "enum"):
        return loc, "not_allowed", f"must be one of: {_choices(ctx.get('expected', ''))}."
    if kind == "union_tag_invalid" or kind.startswith("union"):
        return loc, "wrong_type", "has the wrong type; see the OpenAPI document for what this field takes."
    return loc, "invalid", "this value is not valid here; see the OpenAPI document (GET /openapi.json) for what this field takes."


def field_errors(errors: Sequence[Mapping[str, Any]], prefix: str = "", known_fields: Mapping[str, Sequence[str]] | None = None) -> list[dict[str, str]]:
    """Turn the validation library's failures into the ``errors`` list of a problem.

    Parameters
    ----------
    errors : sequence of mapping
        Failures as the validation library lists them (``loc``, ``type``, ``ctx``).
    prefix : str
        Put before every field location (e.g. ``series[3]``).
    known_fields : mapping, optional
        Field names of the request at each nested location (``""`` for the top
        level, ``"bands"``, ...), for the suggestion of an ``unknown_field``.

    Returns
    -------
    list of dict
        ``{"field", "message", "type"}`` per failure; at most :data:`MAX_FIELD_ERRORS`,
        then one ``truncated`` entry saying how many more there were.
    """
    known = known_fields or {}
    out: list[dict[str, str]] = []
    for error in errors[:MAX_FIELD_ERRORS]:
        loc, code, message = _translate(error, known)
        out.append({"field": _location(loc, prefix), "message": message, "type": code})
    if len(errors) > MAX_FIELD_ERRORS:
        out.append({"field": prefix or "body", "message": f"{len(errors) - MAX_FIELD_ERRORS} more errors not shown; correct these and send again.", "type": "truncated"})
    return out


def is_finite_number(value: Any) -> bool:
    """A JSON number (not a boolean) with a finite value."""
    return not isinstance(value, bool) and isinstance(value, (int, float)) and math.isfinite(float(value))
