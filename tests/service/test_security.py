"""API keys (RFC 6750 bearer tokens), CORS allow-list, per-client rate limit, settings parsing."""

from __future__ import annotations

import hashlib

import pytest
from pydantic import ValidationError

from service.http.auth import KeyChecker, hash_key
from service.http.limits import RateLimiter
from service.runtime.settings import Settings

from .conftest import DASHBOARD_ORIGIN, TEST_KEY, Harness, problem_ok

BODY = {"x": [1.0, 2.0, 3.0, 4.0], "y": [1.0, 3.0, 2.0, 4.0], "bandwidth": 1.0}


def test_hash_key_is_sha256_hex() -> None:
    # SHA-256 of "abc" from FIPS 180-2, appendix B.1.
    assert hash_key("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


@pytest.mark.parametrize(
    "headers",
    [
        {},
        {"authorization": "Bearer wrong-key"},
        {"authorization": f"Basic {TEST_KEY}"},
        {"authorization": "Bearer"},
        {"authorization": f"Bearer {TEST_KEY}x"},
        {"authorization": hashlib.sha256(TEST_KEY.encode()).hexdigest()},
        {"authorization": f"Bearer {hashlib.sha256(TEST_KEY.encode()).hexdigest()}"},  # the digest is not the key
    ],
    ids=["missing", "wrong", "basic scheme", "empty token", "key plus one", "digest without scheme", "digest as key"],
)
def test_requests_without_a_valid_key_get_the_same_401(secured: Harness, headers: dict[str, str]) -> None:
    response = secured.post("/v1/smooth", json=BODY, headers=headers)
    doc = problem_ok(response, 401)
    assert response.headers["www-authenticate"].startswith("Bearer")
    # The answer does not say which part failed.
    assert doc["detail"] == "A valid API key is required: send Authorization: Bearer <key>."


def test_get_routes_need_the_key_too(secured: Harness) -> None:
    problem_ok(secured.get("/v1/kernels"), 401)
    problem_ok(secured.get("/v1/demo"), 401)


def test_valid_keys_pass(secured: Harness) -> None:
    for key in (TEST_KEY, "another-key"):
        response = secured.post("/v1/smooth", json=BODY, headers={"authorization": f"Bearer {key}"})
        assert response.status_code == 200, response.text
    assert secured.get("/v1/kernels", headers={"authorization": f"bearer {TEST_KEY}"}).status_code == 200


def test_auth_is_checked_before_the_body(secured: Harness) -> None:
    # A malformed body without a key is a 401, not a 400: nothing is parsed for strangers.
    response = secured.post("/v1/smooth", content=b"{", headers={"content-type": "application/json"})
    problem_ok(response, 401)


def test_operations_routes_stay_open(secured: Harness) -> None:
    for path in ("/healthz", "/readyz", "/metrics", "/openapi.json", "/docs"):
        assert secured.get(path).status_code == 200, path


def test_keys_off_by_default(api: Harness) -> None:
    assert api.post("/v1/smooth", json=BODY).status_code == 200


def test_key_checker_compares_every_digest() -> None:
    checker = KeyChecker([hash_key("one"), hash_key("two"), hash_key("three")])
    assert checker.matches("three") and checker.matches("one")
    assert not checker.matches("four") and not checker.matches("")


def test_cors_preflight_for_an_allowed_origin(secured: Harness) -> None:
    response = secured.request(
        "OPTIONS",
        "/v1/smooth",
        headers={"origin": DASHBOARD_ORIGIN, "access-control-request-method": "POST", "access-control-request-headers": "authorization, content-type"},
    )
    assert response.status_code == 200
    assert response.headers["access-control-allow-origin"] == DASHBOARD_ORIGIN
    assert "POST" in response.headers["access-control-allow-methods"]


def test_cors_headers_on_actual_responses(secured: Harness) -> None:
    response = secured.post("/v1/smooth", json=BODY, headers={"origin": DASHBOARD_ORIGIN, "authorization": f"Bearer {TEST_KEY}"})
    assert response.headers["access-control-allow-origin"] == DASHBOARD_ORIGIN
    assert "x-request-id" in response.headers["access-control-expose-headers"].lower()


def test_cors_refuses_other_origins(secured: Harness) -> None:
    response = secured.request("OPTIONS", "/v1/smooth", headers={"origin": "http://elsewhere.test", "access-control-request-method": "POST"})
    assert response.status_code == 400
    assert response.headers["content-type"] == "application/problem+json"
    assert "origin" in response.json()["detail"]
    assert "access-control-allow-origin" not in response.headers


def test_cors_off_by_default(api: Harness) -> None:
    response = api.post("/v1/smooth", json=BODY, headers={"origin": DASHBOARD_ORIGIN})
    assert "access-control-allow-origin" not in response.headers
    preflight = api.request("OPTIONS", "/v1/smooth", headers={"origin": DASHBOARD_ORIGIN, "access-control-request-method": "POST"})
    problem_ok(preflight, 405)


def test_rate_limiter_bucket() -> None:
    limiter = RateLimiter(per_minute=60, burst=2)
    assert limiter.acquire("a", now=0.0) == 0.0
    assert limiter.acquire("a", now=0.0) == 0.0
    wait = limiter.acquire("a", now=0.0)
    assert 0.9 < wait <= 1.0  # one token per second
    assert limiter.acquire("b", now=0.0) == 0.0  # clients are independent
    assert limiter.acquire("a", now=1.01) == 0.0


def test_rate_limit_answers_429_with_retry_after() -> None:
    h = Harness(workers=1, rate_limit_per_minute=2, rate_limit_burst=2)
    try:
        assert h.get("/v1/kernels").status_code == 200
        assert h.get("/v1/kernels").status_code == 200
        response = h.get("/v1/kernels")
        problem_ok(response, 429)
        assert int(response.headers["retry-after"]) >= 1
        assert h.get("/healthz").status_code == 200  # operations routes are not limited
        metrics = h.get("/metrics").text
        assert 'bandwise_requests_shed_total{reason="rate_limited"} 1.0' in metrics
    finally:
        h.close()


def test_settings_from_environment(monkeypatch: pytest.MonkeyPatch) -> None:
    digest = hash_key("k1")
    monkeypatch.setenv("BANDWISE_API_KEYS", f" {digest.upper()} ,{hash_key('k2')},")
    monkeypatch.setenv("BANDWISE_CORS_ORIGINS", "http://a.test, http://b.test")
    monkeypatch.setenv("BANDWISE_MAX_POINTS", "1234")
    monkeypatch.setenv("BANDWISE_WORKERS", "3")
    s = Settings()
    assert s.api_keys == [digest, hash_key("k2")]
    assert s.cors_origins == ["http://a.test", "http://b.test"]
    assert s.max_points == 1234 and s.workers == 3
    assert s.effective_queue_size == 12


def test_settings_refuse_a_raw_key(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("BANDWISE_API_KEYS", "my-plain-secret")
    with pytest.raises(ValidationError):
        Settings()
