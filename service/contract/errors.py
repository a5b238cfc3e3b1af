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
from http import HTTPStatus
from typing import Any

import orjson

PROBLEM_MEDIA_TYPE = "application/problem+json"


REASON_PHRASES: dict[int, str] = {
    400: "Bad Request",
    401: "Unauthorized",
    403: "Forbidden",
    404: "Not Found",
    405: "Method Not Allowed",
    408: "Request Timeout",
    413: "Content Too Large",
    415: "Unsupported Media Type",
    422: "Unprocessable Content",
    429: "Too Many Requests",
    500: "Internal Server Error",
    502: "Bad Gateway",
    503: "Service Unavailable",
    504: "Gateway Timeout",
}
"""RFC 9110 (section 15) reason phrases: the ``title`` of every problem with that status."""


def reason_phrase(status: int) -> str:
    """RFC 9110's reason phrase of ``status`` (the standard library's phrase for a status not listed)."""
    return REASON_PHRASES.get(status) or HTTPStatus(status).phrase


@dataclass(frozen=True)
class ProblemType:
    """One kind of problem: URI slug, HTTP status and a description; the title is the status's reason phrase."""

    slug: str
    status: int
    description: str

    @property
    def title(self) -> str:
        return REASON_PHRASES[self.status]

    @property
    def uri(self) -> str:
        return f"/problems/{self.slug}"


_TYPES = [
    ProblemType("malformed-request", 400, "The body is not valid JSON (syntax error, bad encoding, or nested too deeply). Send one JSON object."),
    ProblemType("unauthorized", 401, "This service needs an API key: send `Authorization: Bearer <key>`."),
    ProblemType("not-found", 404, "No resource at this path. GET /docs lists the API."),
    ProblemType("method-not-allowed", 405, "The path exists but not for this method; the Allow header lists the methods it takes."),
    ProblemType("request-timeout", 408, "The body did not arrive within BANDWISE_DEADLINE_SECONDS. Send it at once, not trickled."),
    ProblemType("payload-too-large", 413, "The body is larger than BANDWISE_MAX_BODY_BYTES. Split the data over several requests."),
    ProblemType("unsupported-media-type", 415, "Send the body as JSON with `Content-Type: application/json`."),
    ProblemType("validation-error", 422, "The JSON is well formed but some fields are missing, unknown, of the wrong type or out of range; `errors` lists each one."),
    ProblemType("unsuitable-data", 422, "The request is valid but the data cannot be fitted as asked (for example all x values equal). `detail` says why."),
    ProblemType("memory-budget-exceeded", 422, "The request would need more memory in its worker than BANDWISE_REQUEST_MEMORY_BYTES allows (modelled from its size before work starts). Send fewer points, curve points or predict_at values, or leave out bootstrap bands."),
    ProblemType("rate-limited", 429, "This client sent more requests than BANDWISE_RATE_LIMIT_PER_MINUTE allows. Wait for Retry-After seconds."),
    ProblemType("overloaded", 503, "All workers are busy and the waiting queue is full; retry after Retry-After seconds, preferably on another replica."),
    ProblemType("receive-capacity-reached", 503, "The service is already receiving as many bytes of request bodies as BANDWISE_BODY_BYTES_IN_FLIGHT allows; retry after Retry-After seconds, preferably on another replica."),
    ProblemType("deadline-exceeded", 503, "The work did not finish within BANDWISE_DEADLINE_SECONDS and was stopped. Use fewer points, fewer replicates or a fixed bandwidth."),
    ProblemType("out-of-memory", 503, "The worker computing the request was killed by the system, most likely at the replica's memory limit. Send less work per request or retry on a replica with more memory."),
    ProblemType("shutting-down", 503, "This process is draining before it stops; retry on another replica."),
    ProblemType("not-ready", 503, "The worker processes are still starting; retry shortly."),
    ProblemType("internal-error", 500, "An unexpected failure inside the service. It has been logged with the request id; quote it when reporting."),
]
PROBLEM_TYPES: dict[str, ProblemType] = {t.slug: t for t in _TYPES}
STATUS_PROBLEMS: dict[int, str] = {}
"""The problem slug for a bare HTTP status raised by the framework (the first type of that status above)."""
for _type in _TYPES:
    STATUS_PROBLEMS.setdefault(_type.status, _type.slug)


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
        Offending fields (``field``, ``message``, ``type``; see :mod:`service.contract.field_errors`).
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
