"""A table of malformed requests: each must give a 4xx problem+json and leave the service healthy.

Expected statuses follow RFC 9110 (400 syntax, 404/405 routing, 413 size,
415 media type, 422 semantic validation) and RFC 9457 for the body.
"""

from __future__ import annotations

from typing import Any

import pytest

from .conftest import Harness, problem_ok

GOOD = {"x": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0], "y": [2.0, 1.0, 3.0, 2.5, 4.0, 3.5], "bandwidth": 1.5}
JSON = {"content-type": "application/json"}


def _with(**changes: Any) -> dict[str, Any]:
    body = dict(GOOD)
    for key, value in changes.items():
        if value is _DROP:
            body.pop(key, None)
        else:
            body[key] = value
    return body


_DROP = object()

# (id, method, path, kwargs, status, field expected in errors or None)
CASES: list[tuple[str, str, str, dict[str, Any], int, str | None]] = [
    ("empty body", "POST", "/v1/smooth", {"content": b"", "headers": JSON}, 400, None),
    ("not json", "POST", "/v1/smooth", {"content": b"x=1&y=2", "headers": JSON}, 400, None),
    ("truncated json", "POST", "/v1/smooth", {"content": b'{"x": [1, 2', "headers": JSON}, 400, None),
    ("trailing comma", "POST", "/v1/smooth", {"content": b'{"x": [1, 2], "y": [1, 2],}', "headers": JSON}, 400, None),
    ("invalid utf-8", "POST", "/v1/smooth", {"content": b'{"x": "\xff\xfe"}', "headers": JSON}, 400, None),
    ("deeply nested arrays", "POST", "/v1/smooth", {"content": b'{"x": ' + b"[" * 100_000 + b"]" * 100_000 + b"}", "headers": JSON}, 400, None),
    ("deeply nested objects", "POST", "/v1/smooth", {"content": b'{"a":' * 50_000 + b"1" + b"}" * 50_000, "headers": JSON}, 400, None),
    ("NaN token", "POST", "/v1/smooth", {"content": b'{"x": [1, NaN, 3], "y": [1, 2, 3]}', "headers": JSON}, 422, "x[1]"),
    ("Infinity token", "POST", "/v1/smooth", {"content": b'{"x": [1, 2, 3], "y": [1, -Infinity, 3]}', "headers": JSON}, 422, "y[1]"),
    ("overflowing literal", "POST", "/v1/smooth", {"content": b'{"x": [1, 2, 1e400], "y": [1, 2, 3]}', "headers": JSON}, 422, "x[2]"),
    ("huge integer literal", "POST", "/v1/smooth", {"content": b'{"x": [1, 2, ' + b"9" * 400 + b'], "y": [1, 2, 3]}', "headers": JSON}, 422, "x[2]"),
    ("top-level array", "POST", "/v1/smooth", {"json": [1, 2, 3]}, 422, None),
    ("top-level string", "POST", "/v1/smooth", {"json": "smooth please"}, 422, None),
    ("missing y", "POST", "/v1/smooth", {"json": _with(y=_DROP)}, 422, "y"),
    ("missing x", "POST", "/v1/smooth", {"json": _with(x=_DROP)}, 422, "x"),
    ("unknown field (typo)", "POST", "/v1/smooth", {"json": _with(bandwith=2.0)}, 422, "bandwith"),
    ("numbers as strings", "POST", "/v1/smooth", {"json": _with(x=["1", "2", "3", "4", "5", "6"])}, 422, "x[0]"),
    ("booleans as numbers", "POST", "/v1/smooth", {"json": _with(y=[True, 1, 2, 3, 4, 5])}, 422, "y[0]"),
    ("null in x", "POST", "/v1/smooth", {"json": _with(x=[1, None, 3, 4, 5, 6], missing="error")}, 422, "x"),  # nulls are dropped unless missing is "error"
    ("length mismatch", "POST", "/v1/smooth", {"json": _with(y=[1.0, 2.0])}, 422, "y"),
    ("one point", "POST", "/v1/smooth", {"json": _with(x=[1.0], y=[2.0])}, 422, "x"),
    ("negative weight", "POST", "/v1/smooth", {"json": _with(weights=[1, 1, -1, 1, 1, 1])}, 422, "weights[2]"),
    ("all weights zero", "POST", "/v1/smooth", {"json": _with(weights=[0, 0, 0, 0, 0, 0])}, 422, "weights"),
    ("weights wrong length", "POST", "/v1/smooth", {"json": _with(weights=[1, 1])}, 422, "weights"),
    ("bandwidth zero", "POST", "/v1/smooth", {"json": _with(bandwidth=0)}, 422, "bandwidth"),
    ("bandwidth negative", "POST", "/v1/smooth", {"json": _with(bandwidth=-2.5)}, 422, "bandwidth"),
    ("bandwidth as string number", "POST", "/v1/smooth", {"json": _with(bandwidth="2.5")}, 422, "bandwidth"),
    ("bandwidth wrong word", "POST", "/v1/smooth", {"json": _with(bandwidth="automatic")}, 422, "bandwidth"),
    ("unknown kernel", "POST", "/v1/smooth", {"json": _with(kernel="parabolic")}, 422, "kernel"),
    ("degree 3", "POST", "/v1/smooth", {"json": _with(degree=3)}, 422, "degree"),
    ("degree as float", "POST", "/v1/smooth", {"json": _with(degree=1.0)}, 422, "degree"),
    ("degree as boolean", "POST", "/v1/smooth", {"json": _with(degree=True)}, 422, "degree"),
    ("unknown selector", "POST", "/v1/smooth", {"json": _with(bandwidth="auto", selector="crossval")}, 422, "selector"),
    ("unknown rule", "POST", "/v1/smooth", {"json": _with(rule="max")}, 422, "rule"),
    ("unknown engine", "POST", "/v1/smooth", {"json": _with(engine="fast")}, 422, "engine"),
    ("level 1", "POST", "/v1/smooth", {"json": _with(bands={"level": 1.0})}, 422, "bands.level"),
    ("level 0", "POST", "/v1/smooth", {"json": _with(bands={"level": 0})}, 422, "bands.level"),
    ("level as percent", "POST", "/v1/smooth", {"json": _with(bands={"level": 95})}, 422, "bands.level"),
    ("unknown band method", "POST", "/v1/smooth", {"json": _with(bands={"method": "jackknife"})}, 422, "bands.method"),
    ("replicates zero", "POST", "/v1/smooth", {"json": _with(bands={"replicates": 0})}, 422, "bands.replicates"),
    ("negative seed", "POST", "/v1/smooth", {"json": _with(bands={"seed": -1})}, 422, "bands.seed"),
    ("unknown bands field", "POST", "/v1/smooth", {"json": _with(bands={"levels": 0.9})}, 422, "bands.levels"),
    ("curve points and at", "POST", "/v1/smooth", {"json": _with(curve={"points": 10, "at": [1.0]})}, 422, "curve"),
    ("curve one point", "POST", "/v1/smooth", {"json": _with(curve={"points": 1})}, 422, "curve.points"),
    ("curve empty at", "POST", "/v1/smooth", {"json": _with(curve={"at": []})}, 422, "curve"),
    ("predict_at not a list", "POST", "/v1/smooth", {"json": _with(predict_at=3.0)}, 422, "predict_at"),
    ("predict_at with NaN", "POST", "/v1/smooth", {"content": b'{"x":[1,2,3],"y":[1,2,3],"predict_at":[NaN]}', "headers": JSON}, 422, "predict_at[0]"),
    ("include_fitted as string", "POST", "/v1/smooth", {"json": _with(include_fitted="yes")}, 422, "include_fitted"),
    ("bandwidth_min above max", "POST", "/v1/smooth", {"json": _with(bandwidth="auto", bandwidth_min=5.0, bandwidth_max=1.0)}, 422, "bandwidth_max"),
    ("candidates one", "POST", "/v1/smooth", {"json": _with(bandwidth="auto", candidate_count=1)}, 422, "candidate_count"),
    ("all x equal with auto bandwidth", "POST", "/v1/smooth", {"json": {"x": [3.0] * 6, "y": [1, 2, 3, 4, 5, 6]}}, 422, None),
    ("form content type", "POST", "/v1/smooth", {"content": b'{"x":[1,2],"y":[1,2]}', "headers": {"content-type": "application/x-www-form-urlencoded"}}, 415, None),
    ("text content type", "POST", "/v1/smooth", {"content": b'{"x":[1,2],"y":[1,2]}', "headers": {"content-type": "text/plain"}}, 415, None),
    ("no content type", "POST", "/v1/smooth", {"content": b'{"x":[1,2],"y":[1,2]}'}, 415, None),
    ("latin-1 charset", "POST", "/v1/smooth", {"content": b'{"x":[1,2],"y":[1,2]}', "headers": {"content-type": "application/json; charset=latin-1"}}, 415, None),
    ("gzip request body", "POST", "/v1/smooth", {"content": b"\x1f\x8b", "headers": {"content-type": "application/json", "content-encoding": "gzip"}}, 415, None),
    ("GET on smooth", "GET", "/v1/smooth", {}, 405, None),
    ("PUT on bandwidth", "PUT", "/v1/bandwidth", {"json": GOOD}, 405, None),
    ("DELETE on kernels", "DELETE", "/v1/kernels", {}, 405, None),
    ("unknown path", "GET", "/v1/smoothing", {}, 404, None),
    ("unknown version", "POST", "/v2/smooth", {"json": GOOD}, 404, None),
    ("unknown demo", "GET", "/v1/demo/harbour_office", {}, 404, None),
    ("batch not a list", "POST", "/v1/smooth/batch", {"json": {"series": GOOD}}, 422, "series"),
    ("batch empty", "POST", "/v1/smooth/batch", {"json": {"series": []}}, 422, "series"),
    ("batch unknown field", "POST", "/v1/smooth/batch", {"json": {"series": [GOOD], "parallel": True}}, 422, "parallel"),
    ("batch item not an object", "POST", "/v1/smooth/batch", {"json": {"series": [[1, 2, 3]]}}, 422, "series[0]"),
    ("bandwidth endpoint with curve", "POST", "/v1/bandwidth", {"json": {"x": GOOD["x"], "y": GOOD["y"], "curve": {"points": 5}}}, 422, "curve"),
    ("repeated field", "POST", "/v1/smooth", {"content": b'{"x":[1,2,3,4],"y":[1,2,3,4],"bandwidth":1.5,"bandwidth":"auto"}', "headers": JSON}, 422, "bandwidth"),
    ("repeated nested field", "POST", "/v1/smooth", {"content": b'{"x":[1,2,3,4],"y":[1,2,3,4],"bandwidth":1.5,"bands":{"level":0.9,"level":0.5}}', "headers": JSON}, 422, "level"),
    ("repeated field in a batch", "POST", "/v1/smooth/batch", {"content": b'{"series":[{"x":[1,2,3],"y":[1,2,3],"bandwidth":1,"y":[3,2,1]}]}', "headers": JSON}, 422, "y"),
    ("repeated field on bandwidth", "POST", "/v1/bandwidth", {"content": b'{"x":[1,2,3,4],"x":[1,2,3,5],"y":[1,2,3,4]}', "headers": JSON}, 422, "x"),
    ("bandwidth endpoint malformed", "POST", "/v1/bandwidth", {"content": b"{", "headers": JSON}, 400, None),
]


def test_table_is_large_enough() -> None:
    assert len(CASES) >= 30


@pytest.mark.parametrize(("method", "path", "kwargs", "status", "field"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_malformed_request(api: Harness, method: str, path: str, kwargs: dict[str, Any], status: int, field: str | None) -> None:
    response = api.request(method, path, **kwargs)
    doc = problem_ok(response, status)
    assert doc["instance"] == path
    if status == 422 and field is not None:
        fields = [e["field"] for e in doc["errors"]]
        assert field in fields, fields
        for entry in doc["errors"]:
            assert entry["message"] and entry["type"]
    if status == 405:
        assert response.headers.get("allow")
    # The service is still healthy after each bad request.
    assert api.get("/healthz").status_code == 200
    good = api.post("/v1/smooth", json=GOOD)
    assert good.status_code == 200, good.text


@pytest.mark.parametrize("path", ["/v1/smooth", "/v1/smooth/batch", "/v1/bandwidth"])
def test_a_compressed_body_is_refused_naming_the_codings_accepted(api: Harness, path: str) -> None:
    # RFC 9110, 15.5.16: a 415 caused by the content coding ought to say in Accept-Encoding
    # which codings would have been accepted; here only the identity.
    response = api.post(path, content=b"\x1f\x8b\x08\x00", headers={"content-type": "application/json", "content-encoding": "gzip"})
    problem_ok(response, 415)
    assert response.headers["accept-encoding"] == "identity"
