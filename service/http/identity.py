"""Who a client is, for the rate limit, and the brake on guessing API keys.

The identity is documented and cannot be invented by the client:

- with API keys on, a client is its key (a request without a valid key is refused
  before it is counted, so made-up keys open no new buckets);
- with keys off, a client is the peer address of the connection.  ``Authorization``
  headers are ignored for this, and ``X-Forwarded-For`` is read only when the
  connection comes from an address in ``BANDWISE_TRUSTED_PROXIES`` (the server
  then puts the forwarded client address in the connection's peer; none is
  trusted by default).

Failed authentications are counted per peer address
(``BANDWISE_AUTH_FAILURES_PER_MINUTE``); once a peer is out of attempts, its
requests are answered 429 without looking at the key until the bucket refills,
so a guesser learns nothing from its further guesses.
"""

from __future__ import annotations

from starlette.requests import Request

from service.contract.errors import ProblemError
from service.http.auth import KeyChecker
from service.http.limits import RateLimiter, retry_after
from service.http.metrics import Metrics


def peer_of(request: Request) -> str:
    """The connection's peer address (the forwarded client's only behind a trusted proxy)."""
    return request.client.host if request.client else "unknown"


class Admission:
    """API key check, failed-authentication brake and per-client rate limit.

    Parameters
    ----------
    keys : KeyChecker
        The configured API keys (may be none).
    limiter : RateLimiter
        Requests per client identity.
    failures : RateLimiter
        Failed authentications per peer address.
    metrics : Metrics
        Counts the refusals (``bandwise_requests_shed_total{reason}``).
    per_minute : int
        The request limit, quoted in the 429 answer.
    """

    def __init__(self, keys: KeyChecker, limiter: RateLimiter, failures: RateLimiter, metrics: Metrics, per_minute: int) -> None:
        self.keys = keys
        self.limiter = limiter
        self.failures = failures
        self.metrics = metrics
        self.per_minute = per_minute

    def identity(self, request: Request) -> str:
        """The rate-limit identity: ``key:<digest prefix>`` with keys on, else ``peer:<address>``."""
        if self.keys.enabled:
            client = self.keys.client_of(request)
            if client is not None:
                return "key:" + client
        return "peer:" + peer_of(request)

    def admit(self, request: Request) -> None:
        """Raise 401 or 429 problems, or return when the request may go on."""
        if self.keys.enabled:
            peer = peer_of(request)
            wait = self.failures.pending(peer)
            if wait > 0:
                self.metrics.shed.labels("auth_failures").inc()
                raise ProblemError("rate-limited", "Too many requests with a missing or wrong API key from this address; wait before trying again.", headers=retry_after(wait))
            try:
                self.keys.check(request)
            except ProblemError:
                self.failures.acquire(peer)
                raise
        if self.limiter.enabled:
            wait = self.limiter.acquire(self.identity(request))
            if wait > 0:
                self.metrics.shed.labels("rate_limited").inc()
                raise ProblemError("rate-limited", f"More than {self.per_minute} requests per minute from this client.", headers=retry_after(wait))
