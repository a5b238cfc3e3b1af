"""When and how long the client waits before sending a request again (RFC 9110 Retry-After, full jitter)."""

from __future__ import annotations

import email.utils
import math
import random
from dataclasses import dataclass
from datetime import UTC, datetime

# ------------------------------------------------------------------- retry


@dataclass(frozen=True)
class RetryPolicy:
    """When and how long to retry.

    Retrying is safe for every Bandwise call: each is a pure function of its
    request (nothing is stored, bootstrap bands are seeded), so a repeated
    ``POST`` cannot change anything and gets the same answer.

    Parameters
    ----------
    attempts : int, default 4
        Most requests sent per call, the first included (1 turns retries off).
    backoff : float, default 0.25
        Base of the exponential backoff, in seconds.
    max_backoff : float, default 8.0
        Cap of one backoff wait, in seconds.
    total : float, default 30.0
        Most seconds a call may spend, counted from its start, before another
        attempt is begun: a wait that would end past it is not started and
        the last error is raised.  Each attempt is bounded by the client's
        timeout as well, so a call ends within about ``total + timeout``.
    statuses : frozenset of int, default {429, 502, 503}
        Answers to retry.  502 is how a gateway reports a replica it could
        not reach.  A 503 ``deadline-exceeded`` is never retried: the same
        work would run out of time again.
    retry_timeouts : bool, default False
        Also retry when the service did not answer within the read timeout.
        Off by default: the service may still be working on the request.

    Notes
    -----
    Waits follow exponential backoff with full jitter: before retry ``k``
    (``k = 0, 1, ...``) the client sleeps a uniform random time in
    ``[0, min(max_backoff, backoff * 2**k)]``.  When the answer carries
    ``Retry-After`` the client waits that long plus the jittered backoff, so
    it never returns early and clients told the same time do not all return
    at once.
    """

    attempts: int = 4
    backoff: float = 0.25
    max_backoff: float = 8.0
    total: float = 30.0
    statuses: frozenset[int] = frozenset({429, 502, 503})
    retry_timeouts: bool = False

    def __post_init__(self) -> None:
        if self.attempts < 1:
            raise ValueError("RetryPolicy.attempts must be >= 1 (1 means no retries)")
        if not (self.backoff >= 0 and self.max_backoff >= 0 and self.total >= 0):
            raise ValueError("RetryPolicy.backoff, max_backoff and total must be >= 0 seconds")
        object.__setattr__(self, "statuses", frozenset(self.statuses))

    def backoff_cap(self, retry: int) -> float:
        """Upper end of the wait before retry number ``retry`` (0-based)."""
        return min(self.max_backoff, self.backoff * 2.0 ** min(retry, 60))

    def delay(self, retry: int, rng: random.Random) -> float:
        """Full-jitter wait before retry number ``retry`` (0-based), in seconds."""
        return rng.uniform(0.0, self.backoff_cap(retry))


def parse_retry_after(value: str | None, now: datetime | None = None) -> float | None:
    """Seconds to wait according to a ``Retry-After`` header value.

    Parameters
    ----------
    value : str or None
        Either delay-seconds (``"120"``) or an HTTP-date
        (``"Wed, 21 Oct 2026 07:28:00 GMT"``), RFC 9110 section 10.2.3.
    now : datetime, optional
        The current time (UTC) for HTTP-dates; defaults to the clock.

    Returns
    -------
    float or None
        Seconds, at least 0 (a date in the past means "now"); None when the
        header is missing or unreadable.
    """
    if value is None:
        return None
    text = value.strip()
    if not text:
        return None
    try:
        seconds = float(text)
    except ValueError:
        pass
    else:
        return max(0.0, seconds) if math.isfinite(seconds) else None
    try:
        when = email.utils.parsedate_to_datetime(text)
    except (TypeError, ValueError, IndexError):
        return None
    if when is None:
        return None
    if when.tzinfo is None:
        when = when.replace(tzinfo=UTC)
    current = now if now is not None else datetime.now(UTC)
    return max(0.0, (when - current).total_seconds())


