"""``HEAD`` is answered wherever ``GET`` is, with the same status and header fields and no content.

RFC 9110, 9.3.2: "The HEAD method is identical to GET except that the server
MUST NOT send content in the response"; 9.1: all general-purpose servers
MUST support GET and HEAD.  Monitoring probes and caches rely on it.
"""

from __future__ import annotations

import pytest

from .conftest import Harness


@pytest.mark.parametrize("path", ["/healthz", "/readyz", "/v1/kernels", "/v1/demo", "/v1/demo/parcel_depot", "/", "/docs", "/openapi.json", "/static/app.js", "/problems/validation-error"])
def test_head_has_the_status_and_headers_of_get_and_no_content(api: Harness, path: str) -> None:
    got = api.get(path)
    head = api.request("HEAD", path)
    assert got.status_code == 200, (path, got.status_code)
    assert head.status_code == got.status_code
    assert head.content == b""
    assert head.headers["content-type"] == got.headers["content-type"]
    assert int(head.headers["content-length"]) == len(got.content)
    assert head.headers["x-request-id"] and head.headers["x-request-id"] != got.headers["x-request-id"]


def test_head_on_a_post_only_route_is_405_naming_post(api: Harness) -> None:
    head = api.request("HEAD", "/v1/smooth")
    assert head.status_code == 405
    assert head.headers["allow"] == "POST"
    assert head.content == b""


def test_head_is_counted_as_head_under_its_route(api: Harness) -> None:
    def count() -> float:
        for line in api.get("/metrics").text.splitlines():
            if line.startswith('bandwise_requests_total{method="HEAD",route="/v1/kernels",status="200"}'):
                return float(line.rsplit(" ", 1)[1])
        return 0.0

    before = count()
    api.request("HEAD", "/v1/kernels")
    assert count() == before + 1
