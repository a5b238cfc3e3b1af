"""The byte budget for request bodies in flight in the HTTP process.

Each body is held in the HTTP process from its first byte until the worker
has taken it, a few copies over (chunks, the joined body, the framed job).
Without a cap, many clients sending large bodies at once take the process
past any memory limit.  A :class:`ByteBudget` counts the bytes of every body
being received or handed over; a body is admitted when its declared
``Content-Length`` fits in what is left (or, without a length, chunk by chunk
as it arrives) and refused at once otherwise with a 503 and ``Retry-After``,
before its bytes are read.  The reservation is returned when the request is
done with its body.
"""

from __future__ import annotations

from types import TracebackType

from starlette.requests import Request

from service.contract.errors import ProblemError
from service.http.limits import retry_after


class ByteBudget:
    """Bytes of request bodies that may be in flight at once.

    Parameters
    ----------
    limit : int
        Most bytes reserved at any time (``BANDWISE_BODY_BYTES_IN_FLIGHT``).
    retry_seconds : int
        ``Retry-After`` of the refusal.
    """

    def __init__(self, limit: int, retry_seconds: int) -> None:
        self.limit = limit
        self.used = 0
        self.retry_seconds = retry_seconds

    def reservation(self) -> Reservation:
        """A new, empty reservation; use it as a context manager so it is always returned."""
        return Reservation(self)

    def _take(self, size: int) -> bool:
        if self.used + size > self.limit:
            return False
        self.used += size
        return True


class Reservation:
    """Bytes one request holds from a :class:`ByteBudget` (returned on exit)."""

    def __init__(self, budget: ByteBudget) -> None:
        self.budget = budget
        self.held = 0

    def cover(self, total: int) -> None:
        """Make sure ``total`` bytes are reserved; raise a 503 problem when the budget cannot cover them."""
        more = total - self.held
        if more <= 0:
            return
        if not self.budget._take(more):
            raise ProblemError(
                "receive-capacity-reached",
                f"The service is already receiving {self.budget.used} bytes of request bodies, its limit for bodies in flight; retry later or on another replica.",
                headers={**retry_after(self.budget.retry_seconds), "Connection": "close"},
            )
        self.held += more

    def release(self) -> None:
        self.budget.used -= self.held
        self.held = 0

    def __enter__(self) -> Reservation:
        return self

    def __exit__(self, kind: type[BaseException] | None, exc: BaseException | None, tb: TracebackType | None) -> None:
        self.release()


async def read_body_within(request: Request, limit: int, reservation: Reservation) -> bytes:
    """Read the body under both the per-request ``limit`` (413) and the shared budget (503).

    A declared ``Content-Length`` is checked against both before anything is
    read; without one, each chunk is covered as it arrives.
    """
    declared = request.headers.get("content-length")
    if declared is not None:
        try:
            length = int(declared)
        except ValueError:
            raise ProblemError("malformed-request", "Content-Length is not a number.") from None
        if length > limit:
            raise ProblemError("payload-too-large", f"The body declares {length} bytes; the limit is {limit} bytes.")
        reservation.cover(length)
    chunks: list[bytes] = []
    total = 0
    async for chunk in request.stream():
        total += len(chunk)
        if total > limit:
            raise ProblemError("payload-too-large", f"The body is larger than the limit of {limit} bytes.")
        reservation.cover(total)
        chunks.append(chunk)
    return b"".join(chunks)
