"""Retry schedule and Retry-After parsing, checked against their published definitions.

References
----------
RFC 9110, "HTTP Semantics", section 10.2.3: ``Retry-After = HTTP-date / delay-seconds``,
with the examples ``Fri, 31 Dec 1999 23:59:59 GMT`` and ``120``; section 5.6.7:
IMF-fixdate is preferred, obsolete RFC 850 and asctime forms must be accepted.
M. Brooker, "Exponential Backoff And Jitter", AWS Architecture Blog, 2015:
full jitter is ``sleep = random_between(0, min(cap, base * 2 ** attempt))``.
"""

from __future__ import annotations

import random
from datetime import UTC, datetime, timedelta

import pytest

from service.client import RetryPolicy, parse_retry_after

NOW = datetime(1999, 12, 31, 23, 57, 59, tzinfo=UTC)


@pytest.mark.parametrize(
    ("header", "seconds"),
    [
        ("120", 120.0),  # RFC 9110 example
        ("0", 0.0),
        (" 7 ", 7.0),
        ("Fri, 31 Dec 1999 23:59:59 GMT", 120.0),  # RFC 9110 example, IMF-fixdate, 2 min after NOW
        ("Friday, 31-Dec-99 23:59:59 GMT", 120.0),  # RFC 850 form (RFC 9110 section 5.6.7)
        ("Fri Dec 31 23:59:59 1999", 120.0),  # asctime form (RFC 9110 section 5.6.7)
        ("Fri, 31 Dec 1999 23:00:00 GMT", 0.0),  # in the past: go now
        ("-5", 0.0),
    ],
)
def test_retry_after_values(header: str, seconds: float) -> None:
    assert parse_retry_after(header, now=NOW) == pytest.approx(seconds)


@pytest.mark.parametrize("header", [None, "", "soon", "NaN", "inf", "Fri, 99 Foo 1999"])
def test_unreadable_retry_after_is_ignored(header: str | None) -> None:
    assert parse_retry_after(header, now=NOW) is None


def test_retry_after_date_uses_the_clock_by_default() -> None:
    later = datetime.now(UTC) + timedelta(seconds=30)
    value = parse_retry_after(later.strftime("%a, %d %b %Y %H:%M:%S GMT"))
    assert value is not None and 28.0 <= value <= 30.0  # whole-second resolution of HTTP-dates


def test_backoff_cap_is_exponential_then_capped() -> None:
    policy = RetryPolicy(backoff=0.25, max_backoff=8.0)
    # min(cap, base * 2**attempt), Brooker (2015)
    assert [policy.backoff_cap(k) for k in range(8)] == [0.25, 0.5, 1.0, 2.0, 4.0, 8.0, 8.0, 8.0]
    assert policy.backoff_cap(10_000) == 8.0  # no overflow


def test_full_jitter_is_uniform_on_zero_to_cap() -> None:
    policy = RetryPolicy(backoff=1.0, max_backoff=4.0)
    rng = random.Random(20250602)
    for retry in range(5):
        cap = policy.backoff_cap(retry)
        draws = [policy.delay(retry, rng) for _ in range(4000)]
        assert 0.0 <= min(draws) and max(draws) <= cap
        # Uniform(0, cap) has mean cap/2 and sd cap/sqrt(12): the mean of 4000 draws lies
        # within 5 standard errors (cap / sqrt(12 * 4000) each) of cap/2.
        mean = sum(draws) / len(draws)
        assert abs(mean - cap / 2) < 5 * cap / (12 * 4000) ** 0.5
        # Full jitter reaches both ends of the range.
        assert min(draws) < 0.05 * cap and max(draws) > 0.95 * cap


def test_default_policy_is_bounded() -> None:
    policy = RetryPolicy()
    assert policy.attempts >= 1 and policy.total > 0
    assert {429, 503} <= policy.statuses
    assert not policy.retry_timeouts
