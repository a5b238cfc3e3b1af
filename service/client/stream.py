"""Reading a streamed batch answer: one NDJSON line per series, as the service finishes them.

Each line (NDJSON: one JSON text per line) is ``{"index": i, ...}`` with the
fields of a smooth answer, or ``{"index": i, "problem": {...}}`` (RFC 9457)
when that series failed, was not reached before the deadline, or the replica
shut down first.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import orjson
from pydantic import ValidationError

from service.client.errors import BandwiseError, UnexpectedResponse, error_from_problem
from service.client.results import SmoothResult

__all__ = ["NDJSON_ACCEPT", "RETRYABLE_SLOT_PROBLEMS", "SlotAnswer", "read_line"]

#: the Accept header asking for the streamed form (problem documents still come as JSON)
NDJSON_ACCEPT = "application/x-ndjson, application/problem+json"
#: slot problems worth sending again (to the same or another replica): nothing was wrong with the series
RETRYABLE_SLOT_PROBLEMS = frozenset({"deadline-exceeded", "shutting-down", "overloaded", "out-of-memory", "internal-error", "receive-capacity-reached", "rate-limited"})


@dataclass(frozen=True)
class SlotAnswer:
    """The answer for one series of a batch.

    Attributes
    ----------
    index : int
        Position of the series in the list the caller gave.
    result : SmoothResult or None
        The fit, when the series was smoothed.
    error : BandwiseError or None
        Why it was not (``error.slug`` names the problem, e.g. ``deadline-exceeded``).
    """

    index: int
    result: SmoothResult | None = None
    error: BandwiseError | None = None

    @property
    def ok(self) -> bool:
        """True when the series was smoothed."""
        return self.result is not None

    @property
    def retryable(self) -> bool:
        """True when the series failed for a reason that sending it again may cure."""
        return self.error is not None and (self.error.slug in RETRYABLE_SLOT_PROBLEMS or self.error.status in (429, 502, 503))


def _slot(doc: dict[str, Any], index: int, request_id: str | None) -> SlotAnswer:
    problem = doc.get("problem")
    if isinstance(problem, dict):
        status = problem.get("status")
        return SlotAnswer(index, error=error_from_problem(problem, status if isinstance(status, int) else 500, series=index, request_id=request_id))
    result = SmoothResult.model_validate(doc, extra="ignore")
    result._request_id = request_id
    return SlotAnswer(index, result=result)


def read_line(line: bytes | str, request_id: str | None = None, offset: int = 0) -> SlotAnswer:
    """The slot answer one line of the stream holds.

    Parameters
    ----------
    line : bytes or str
        One line of an ``application/x-ndjson`` batch answer, without its line feed.
    request_id : str, optional
        The answer's ``X-Request-ID``, kept on the result or error.
    offset : int, default 0
        Added to the line's index (when the batch was one part of a longer list).

    Raises
    ------
    UnexpectedResponse
        The line is not a slot of the Bandwise contract.
    """
    try:
        doc = orjson.loads(line)
        index = doc.pop("index")
        if not isinstance(index, int) or isinstance(index, bool):
            raise TypeError(index)
        return _slot(doc, index + offset, request_id)
    except (orjson.JSONDecodeError, KeyError, TypeError, AttributeError, ValidationError):
        shown = line[:120] if isinstance(line, str) else line[:120].decode("utf-8", "replace")
        raise UnexpectedResponse(f"a line of the streamed batch answer is not a slot of the Bandwise contract: {shown!r}", title="Unexpected response", request_id=request_id) from None
