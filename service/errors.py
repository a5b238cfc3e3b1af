"""RFC 9457 problem details for every failure class.

Every error the service sends is ``application/problem+json`` with ``type``,
``title``, ``status``, ``detail`` and, for validation failures, ``errors`` (one
entry per offending field).  ``type`` is a relative URI ``/problems/<slug>``;
``GET`` on it returns a short description.

This module has no web-framework imports so the worker processes can use it.

References
----------
RFC 9457, "Problem Details for HTTP APIs", IETF, 2023.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import orjson

PROBLEM_MEDIA_TYPE = "application/problem+json"
MAX_FIELD_ERRORS = 50


@dataclass(frozen=True)
class ProblemType:
    """One kind of problem: URI slug, HTTP status, title and a description."""

    slug: str
    status: int
    title: str
    description: str

    @property
    def uri(self) -> str:
        return f"/problems/{self.slug}"


_TYPES = [
    ProblemType("malformed-request", 400, "Malformed request body", "The body is not valid JSON (syntax error, bad encoding, or nested too deeply). Send one JSON object."),
    ProblemType("unauthorized", 401, "Unauthorized", "This service needs an API key: send `Authorization: Bearer <key>`."),
    ProblemType("not-found", 404, "Not found", "No resource at this path. GET /docs lists the API."),
    ProblemType("method-not-allowed", 405, "Method not allowed", "The path exists but not for this method; the Allow header lists the methods it takes."),
    ProblemType("request-timeout", 408, "Request body too slow", "The body did not arrive within BANDWISE_DEADLINE_SECONDS. Send it at once, not trickled."),
    ProblemType("payload-too-large", 413, "Request body too large", "The body is larger than BANDWISE_MAX_BODY_BYTES. Split the data over several requests."),
    ProblemType("unsupported-media-type", 415, "Unsupported media type", "Send the body as JSON with `Content-Type: application/json`."),
    ProblemType("validation-error", 422, "Invalid request", "The JSON is well formed but some fields are missing, unknown, of the wrong type or out of range; `errors` lists each one."),
    ProblemType("unsuitable-data", 422, "Data unsuitable for this fit", "The request is valid but the data cannot be fitted as asked (for example all x values equal). `detail` says why."),
    ProblemType("rate-limited", 429, "Too many requests", "This client sent more requests than BANDWISE_RATE_LIMIT_PER_MINUTE allows. Wait for Retry-After seconds."),
    ProblemType("overloaded", 503, "Service overloaded", "All workers are busy and the waiting queue is full; retry after Retry-After seconds, preferably on another replica."),
    ProblemType("deadline-exceeded", 503, "Deadline exceeded", "The work did not finish within BANDWISE_DEADLINE_SECONDS and was stopped. Use fewer points, fewer replicates or a fixed bandwidth."),
    ProblemType("shutting-down", 503, "Shutting down", "This process is draining before it stops; retry on another replica."),
    ProblemType("out-of-memory", 503, "Out of memory", "The worker computing the request was killed by the system, most likely at the replica's memory limit. Send less work per request or retry on a replica with more memory."),
    ProblemType("not-ready", 503, "Not ready", "The worker processes are still starting; retry shortly."),
    ProblemType("internal-error", 500, "Internal error", "An unexpected failure inside the service. It has been logged with the request id; quote it when reporting."),
]
PROBLEM_TYPES: dict[str, ProblemType] = {t.slug: t for t in _TYPES}


@dataclass
class ProblemError(Exception):
    """Raise to answer with a problem document.

    Parameters
    ----------
    slug : str
        Key of :data:`PROBLEM_TYPES`.
    detail : str
        Explanation for this occurrence.
    errors : list of dict, optional
        Offending fields (``field``, ``message``, ``type``).
    headers : dict, optional
        Extra response headers (e.g. ``Retry-After``, ``Allow``).
    """

    slug: str
    detail: str
    errors: list[dict[str, str]] | None = None
    headers: dict[str, str] = field(default_factory=dict)

    def __post_init__(self) -> None:
        super().__init__(self.detail)

    @property
    def status(self) -> int:
        return PROBLEM_TYPES[self.slug].status


def problem_document(
    slug: str,
    detail: str,
    *,
    instance: str | None = None,
    request_id: str | None = None,
    errors: list[dict[str, str]] | None = None,
) -> dict[str, Any]:
    """Build the problem details object for ``slug``."""
    kind = PROBLEM_TYPES[slug]
    doc: dict[str, Any] = {"type": kind.uri, "title": kind.title, "status": kind.status, "detail": detail}
    if instance is not None:
        doc["instance"] = instance
    if request_id is not None:
        doc["request_id"] = request_id
    if errors is not None:
        doc["errors"] = errors
    return doc


def problem_bytes(slug: str, detail: str, **kwargs: Any) -> bytes:
    """Serialised :func:`problem_document`."""
    return orjson.dumps(problem_document(slug, detail, **kwargs))


def _location(loc: tuple[Any, ...], prefix: str) -> str:
    text = prefix
    for part in loc:
        if isinstance(part, int):
            text += f"[{part}]"
        else:
            text = f"{text}.{part}" if text else str(part)
    return text or "body"


def field_errors(errors: list[dict[str, Any]], prefix: str = "") -> list[dict[str, str]]:
    """Turn pydantic error dicts into the ``errors`` list of a problem.

    Model-level checks that name a field (``_FieldError``) are reported at that
    field.  At most :data:`MAX_FIELD_ERRORS` entries are kept, followed by one
    ``truncated`` entry saying how many more there were.
    """
    out: list[dict[str, str]] = []
    for error in errors[:MAX_FIELD_ERRORS]:
        loc = tuple(error.get("loc", ()))
        message = str(error.get("msg", "invalid"))
        kind = str(error.get("type", "invalid"))
        cause = (error.get("ctx") or {}).get("error")
        if kind == "value_error":
            message = str(cause) if cause is not None else message.removeprefix("Value error, ")
            target = getattr(cause, "field", None)
            if target is not None:
                loc = loc + (target,)
        out.append({"field": _location(loc, prefix), "message": message, "type": kind})
    if len(errors) > MAX_FIELD_ERRORS:
        out.append({"field": prefix or "body", "message": f"{len(errors) - MAX_FIELD_ERRORS} more errors not shown", "type": "truncated"})
    return out
