"""Client errors: one exception class per kind of failure, each carrying the RFC 9457 problem details."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from service.contract.errors import REASON_PHRASES
from service.contract.models import (
    FieldErrorOut,
)

# ------------------------------------------------------------------ errors


class BandwiseError(Exception):
    """Base of every error this client raises.

    Attributes
    ----------
    status : int or None
        HTTP status of the answer; None when nothing was answered (refused
        before sending, connection failure, timeout).
    title, detail, type : str
        RFC 9457 problem details: ``type`` names the kind of problem (a
        ``/problems/<slug>`` path on the service), ``title`` is its summary,
        ``detail`` explains this occurrence.
    errors : list of FieldErrorOut
        Offending fields (validation failures), each with ``field``, ``message`` and ``type``.
    request_id : str or None
        ``X-Request-ID`` of the failed request; quote it when reporting a problem.
    instance : str or None
        The request path (``#series[i]`` for one series of a batch).
    retry_after : float or None
        Seconds the service asked to wait (429/503).
    attempts : int
        Requests sent for this call (1 without retries).
    problem : dict
        The problem document as received (including any extension members).
    """

    hint = ""

    def __init__(
        self,
        detail: str,
        *,
        status: int | None = None,
        title: str = "",
        type: str = "about:blank",
        errors: Sequence[FieldErrorOut] = (),
        request_id: str | None = None,
        instance: str | None = None,
        retry_after: float | None = None,
        attempts: int = 0,
        problem: Mapping[str, Any] | None = None,
        note: str = "",
    ) -> None:
        self.status = status
        self.title = title or type_title(status)
        self.detail = detail
        self.type = type
        self.errors = list(errors)
        self.request_id = request_id
        self.instance = instance
        self.retry_after = retry_after
        self.attempts = attempts
        self.problem = dict(problem or {})
        self.note = note
        super().__init__(self._message())

    def __reduce__(self) -> tuple[Any, ...]:
        # Keyword-only fields: rebuild from the instance dict (pickling, multiprocessing).
        return (_rebuild_error, (type(self), dict(self.__dict__)))

    @property
    def slug(self) -> str:
        """The last part of ``type`` (e.g. ``validation-error``), or an empty string."""
        return self.type.rsplit("/", 1)[-1] if self.type.startswith("/problems/") else ""

    def _message(self) -> str:
        head = f"{self.status} {self.title}" if self.status is not None else self.title
        lines = [f"{head}: {self.detail}" if head else self.detail]
        for error in self.errors[:20]:
            lines.append(f"  - {error.field}: {error.message}")
        if len(self.errors) > 20:
            lines.append(f"  ... and {len(self.errors) - 20} more")
        if self.note:
            lines.append(self.note)
        if self.hint:
            lines.append(self.hint)
        if self.request_id:
            lines.append(f"(request id {self.request_id})")
        return "\n".join(lines)


def _rebuild_error(cls: type[BandwiseError], state: dict[str, Any]) -> BandwiseError:
    error = cls.__new__(cls)
    error.__dict__.update(state)
    Exception.__init__(error, error._message())
    return error


class ValidationFailed(BandwiseError):
    """The request was refused as invalid (400 or 422), or refused by the client before sending (``status`` None)."""

    hint = "Fix the fields listed above; the request is not retried."


class UnsuitableData(ValidationFailed):
    """The request was valid but the data cannot be fitted as asked (422 ``unsuitable-data``)."""

    hint = "The detail says what the data lacks for this fit; change the data or the options."


class Unauthorized(BandwiseError):
    """The service wants an API key and none, or a wrong one, was sent (401 / 403)."""

    hint = "Pass api_key=... to the client (it is sent as Authorization: Bearer <key>) and check that the service accepts that key."


class PayloadTooLarge(BandwiseError):
    """The body is larger than the service accepts (413)."""

    hint = "Split the data over several requests (fewer points per series, fewer series per batch)."


class Overloaded(BandwiseError):
    """The service shed load (429 rate limit or 503) and retries did not get through."""

    hint = "Retry later, lower the request rate, or allow more time with RetryPolicy(total=...)."


class DeadlineExceeded(Overloaded):
    """The work took longer than the service's deadline and was stopped (503 ``deadline-exceeded``); not retried."""

    hint = "The same request would run out of time again: use fewer points, fewer bootstrap replicates or a fixed bandwidth."


class ServerError(BandwiseError):
    """The service (or a gateway in front of it) failed (5xx other than 503)."""

    hint = "This is not caused by the request; report it with the request id."


class ConnectionFailed(BandwiseError):
    """No answer could be had: connection refused or reset, DNS failure, connect timeout."""

    hint = "Check base_url and that the service is running and reachable."


class Timeout(BandwiseError):
    """The service did not answer within the client's timeout."""

    hint = "The work may be heavy: use fewer points or replicates or a fixed bandwidth, or pass a larger timeout=."


class UnexpectedResponse(BandwiseError):
    """The answer is not what the Bandwise contract describes (wrong base URL, a proxy's error page, version skew)."""

    hint = "Check that base_url points at a Bandwise service."




def type_title(status: int | None) -> str:
    """A short title for an HTTP status (used when the answer carries no problem document)."""
    if status is None:
        return ""
    return REASON_PHRASES.get(status, f"HTTP {status}")


def _error_class(status: int, slug: str) -> type[BandwiseError]:
    if status == 422 and slug == "unsuitable-data":
        return UnsuitableData
    if status in (400, 422):
        return ValidationFailed
    if status in (401, 403):
        return Unauthorized
    if status == 413:
        return PayloadTooLarge
    if status == 503 and slug == "deadline-exceeded":
        return DeadlineExceeded
    if status in (429, 503):
        return Overloaded
    if status >= 500:
        return ServerError
    return BandwiseError


def error_from_problem(doc: Mapping[str, Any], status: int, *, series: int | None = None, **extra: Any) -> BandwiseError:
    """The exception for a problem document answered with ``status``."""
    errors = []
    for item in doc.get("errors") or ():
        if isinstance(item, Mapping):
            errors.append(FieldErrorOut(field=str(item.get("field", "")), message=str(item.get("message", "")), type=str(item.get("type", ""))))
    kind = str(doc.get("type") or "about:blank")
    slug = kind.rsplit("/", 1)[-1] if kind.startswith("/problems/") else ""
    detail = str(doc.get("detail") or type_title(status))
    if series is not None:
        detail = f"series {series}: {detail}"
    return _error_class(status, slug)(
        detail,
        status=status,
        title=str(doc.get("title") or type_title(status)),
        type=kind,
        errors=errors,
        request_id=extra.pop("request_id", None) or (str(doc["request_id"]) if doc.get("request_id") else None),
        instance=str(doc["instance"]) if doc.get("instance") else None,
        problem=doc,
        **extra,
    )


