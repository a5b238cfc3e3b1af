"""The gateway's own behaviour, with the system's nginx in front of one real replica.

nginx runs ``deploy/gateway/nginx.conf`` rendered to loopback ports; the replica
is started with the README's run command. Expected behaviour follows the nginx
documentation of the directives used (ngx_http_proxy_module, ngx_http_limit_req_module,
ngx_http_gzip_module) and RFC 9457 for problem documents.
"""

from __future__ import annotations

import json
import re
import subprocess
from collections import Counter
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

import httpx
import pytest

from estimators.demo import cold_store
from service.runtime.settings import Settings
from tests.conftest import require_program
from tests.deploy.support import free_port, start_gateway, start_replica, stop, wait_until_ok

MAX_BODY = int(Settings.model_fields["max_body_bytes"].default)  # type: ignore[arg-type]


@dataclass(frozen=True)
class Stack:
    gateway: str
    replica: str


@pytest.fixture(scope="module")
def stack(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Stack]:
    nginx = require_program("nginx")
    tmp = tmp_path_factory.mktemp("gateway-stack")
    port, gateway_port = free_port(), free_port()
    replica = start_replica(port, tmp / "replica.log", {"BANDWISE_WORKERS": "1"})
    gateway: subprocess.Popen[bytes] | None = None
    try:
        wait_until_ok(f"http://127.0.0.1:{port}/readyz", replica)
        gateway = start_gateway(nginx, tmp / "nginx", gateway_port, [port])
        wait_until_ok(f"http://127.0.0.1:{gateway_port}/gateway/healthz", gateway, timeout=10.0)
        yield Stack(gateway=f"http://127.0.0.1:{gateway_port}", replica=f"http://127.0.0.1:{port}")
    finally:
        if gateway is not None:
            stop(gateway)
        stop(replica)


def invalid_request() -> dict[str, object]:
    return {"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0]}  # lengths differ: a 4xx problem


def is_problem(response: httpx.Response, status: int) -> bool:
    body = response.json()
    return (
        response.status_code == status
        and response.headers["content-type"].startswith("application/problem+json")
        and body["status"] == status
        and {"type", "title"} <= set(body)
    )


@pytest.mark.system
def test_gateway_makes_a_request_id_and_the_replica_receives_it(stack: Stack) -> None:
    response = httpx.post(f"{stack.gateway}/v1/smooth", json=invalid_request(), timeout=10.0)
    assert 400 <= response.status_code < 500
    request_id = response.headers["x-request-id"]
    assert re.fullmatch(r"[0-9a-f]{32}", request_id), "nginx $request_id: 32 hex digits"
    assert response.json()["request_id"] == request_id, "the replica saw the same id"
    assert len(response.headers.get_list("x-request-id")) == 1


@pytest.mark.system
@pytest.mark.parametrize(
    ("sent", "kept"),
    [("cold-store-0042", True), ("a" * 128, True), ("a" * 129, False), ("bad id with spaces", False)],
)
def test_gateway_keeps_a_well_formed_client_request_id(stack: Stack, sent: str, kept: bool) -> None:
    response = httpx.post(
        f"{stack.gateway}/v1/smooth", json=invalid_request(), headers={"X-Request-ID": sent}, timeout=10.0
    )
    echoed = response.headers["x-request-id"]
    assert (echoed == sent) is kept
    assert response.json()["request_id"] == echoed


@pytest.mark.system
def test_body_limit_of_gateway_and_replica_agree(stack: Stack) -> None:
    # Not JSON on purpose: a body the limit lets through is then refused as bad input
    # (4xx, not 413), cheaply.
    at_limit = b" " * MAX_BODY
    over_limit = at_limit + b" "
    headers = {"content-type": "application/json"}
    through_gateway = httpx.post(f"{stack.gateway}/v1/smooth", content=at_limit, headers=headers, timeout=60.0)
    assert through_gateway.status_code != 413 and 400 <= through_gateway.status_code < 500
    refused_by_gateway = httpx.post(f"{stack.gateway}/v1/smooth", content=over_limit, headers=headers, timeout=60.0)
    assert is_problem(refused_by_gateway, 413)
    refused_by_replica = httpx.post(f"{stack.replica}/v1/smooth", content=over_limit, headers=headers, timeout=60.0)
    assert is_problem(refused_by_replica, 413)


@pytest.mark.system
def test_large_json_answers_are_gzip_compressed(stack: Stack) -> None:
    demo = cold_store(seed=3)
    body = {"x": demo.x[::4].tolist(), "y": demo.y[::4].tolist(), "bandwidth": 2.0, "curve": {"points": 300}}
    response = httpx.post(f"{stack.gateway}/v1/smooth", json=body, headers={"accept-encoding": "gzip"}, timeout=30.0)
    assert response.status_code == 200
    assert response.headers["content-encoding"] == "gzip"
    assert len(response.json()["curve"]["estimate"]) == 300  # httpx decompressed it


@pytest.mark.system
def test_one_client_over_its_rate_is_told_to_slow_down(stack: Stack) -> None:
    # rate=50r/s with burst=100 (nodelay): 300 requests in well under 2 s from one
    # address must see 429s. Sent from an address of its own (127.0.0.30) so other
    # tests' budgets are untouched.
    transport = httpx.HTTPTransport(local_address="127.0.0.30")
    with httpx.Client(base_url=stack.gateway, transport=transport, timeout=10.0) as client:
        with ThreadPoolExecutor(max_workers=16) as pool:
            responses = list(pool.map(lambda _: client.get("/healthz"), range(300)))
    statuses = Counter(r.status_code for r in responses)
    assert statuses[200] >= 100 and statuses[429] > 0, statuses
    limited = next(r for r in responses if r.status_code == 429)
    assert is_problem(limited, 429)
    assert int(limited.headers["retry-after"]) >= 1


@pytest.mark.system
def test_metrics_are_not_served_through_the_gateway(stack: Stack) -> None:
    assert is_problem(httpx.get(f"{stack.gateway}/metrics", timeout=10.0), 404)
    assert httpx.get(f"{stack.replica}/metrics", timeout=10.0).status_code == 200


@pytest.mark.system
def test_no_replica_reachable_is_a_503_problem_with_retry_after(tmp_path: Path) -> None:
    nginx = require_program("nginx")
    gateway_port = free_port()
    gateway = start_gateway(nginx, tmp_path / "nginx", gateway_port, [free_port(), free_port()])
    try:
        wait_until_ok(f"http://127.0.0.1:{gateway_port}/gateway/healthz", gateway, timeout=10.0)
        response = httpx.post(f"http://127.0.0.1:{gateway_port}/v1/smooth", json=invalid_request(), timeout=10.0)
        assert is_problem(response, 503)
        assert int(response.headers["retry-after"]) >= 1
        assert re.fullmatch(r"[0-9a-f]{32}", response.headers["x-request-id"])
    finally:
        stop(gateway)


@pytest.mark.system
def test_streamed_batch_passes_the_gateway_line_by_line(stack: Stack) -> None:
    # NDJSON: one JSON text per line; the gateway must neither buffer nor compress the stream.
    demo = cold_store(seed=5)
    series = [{"x": demo.x[::8].tolist(), "y": (demo.y[::8] + k).tolist(), "bandwidth": 2.0, "curve": {"points": 20}} for k in range(6)]
    headers = {"accept": "application/x-ndjson", "accept-encoding": "gzip"}
    with httpx.stream("POST", f"{stack.gateway}/v1/smooth/batch", json={"series": series}, headers=headers, timeout=60.0) as response:
        assert response.status_code == 200
        assert response.headers["content-type"].startswith("application/x-ndjson")
        assert "content-encoding" not in response.headers
        lines = [json.loads(line) for line in response.iter_lines() if line]
    assert sorted(line["index"] for line in lines) == list(range(len(series)))
    assert all(len(line["curve"]["estimate"]) == 20 for line in lines)
