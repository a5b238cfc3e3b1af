"""Replay every recorded example in ``openapi_examples/`` and compare the answer field by field.

The response files were recorded from the real app by
``openapi_examples/generate.py`` (real worker processes, real
``estimators``); they are a regression contract, not an independent truth.
Comparison: same keys, same list lengths, same strings, booleans and nulls;
numbers within a relative tolerance of 1e-6 (absolute 1e-9 times the
magnitude of the value, for values near zero).  ``request_id`` is ignored
because it differs per request.
"""

from __future__ import annotations

import math
from typing import Any

import pytest

from service.http.examples import Example, load_examples

from .conftest import Harness

RTOL = 1e-6
ATOL = 1e-9
EXAMPLES = load_examples()
IGNORED = {"request_id"}


def _compare(got: Any, want: Any, where: str) -> list[str]:
    if isinstance(want, dict):
        if not isinstance(got, dict):
            return [f"{where}: expected an object, got {type(got).__name__}"]
        diffs = []
        if set(got) - IGNORED != set(want) - IGNORED:
            diffs.append(f"{where}: keys {sorted(set(got) - IGNORED)} != {sorted(set(want) - IGNORED)}")
        for key in (set(got) & set(want)) - IGNORED:
            diffs += _compare(got[key], want[key], f"{where}.{key}")
        return diffs
    if isinstance(want, list):
        if not isinstance(got, list) or len(got) != len(want):
            return [f"{where}: expected a list of {len(want)}, got {got if not isinstance(got, list) else len(got)}"]
        diffs = []
        for i, (g, w) in enumerate(zip(got, want, strict=False)):
            diffs += _compare(g, w, f"{where}[{i}]")
        return diffs
    if isinstance(want, bool) or want is None or isinstance(want, str):
        return [] if got == want and type(got) is type(want) else [f"{where}: {got!r} != {want!r}"]
    if isinstance(want, (int, float)):
        if isinstance(got, bool) or not isinstance(got, (int, float)):
            return [f"{where}: {got!r} is not a number"]
        if math.isclose(got, want, rel_tol=RTOL, abs_tol=ATOL * max(1.0, abs(want))):
            return []
        return [f"{where}: {got!r} != {want!r}"]
    return [f"{where}: unexpected value {want!r}"]


def test_enough_examples_cover_the_scenarios() -> None:
    names = {e.name for e in EXAMPLES}
    assert len(EXAMPLES) >= 6
    assert {"fixed_bandwidth", "automatic_with_bands", "predictions_with_extrapolation", "batch", "validation_error", "epoch_ms_timestamps"} <= names
    assert all(e.response is not None for e in EXAMPLES)


@pytest.mark.parametrize("example", EXAMPLES, ids=[e.name for e in EXAMPLES])
def test_example_replays(api: Harness, example: Example) -> None:
    response = api.request(example.method.upper(), example.path, json=example.request)
    assert response.status_code == example.status, response.text[:500]
    diffs = _compare(response.json(), example.response, "response")
    assert not diffs, "\n".join(diffs[:20])


def test_comparison_detects_differences() -> None:
    want = {"a": [1.0, None, {"b": "x"}], "c": True}
    assert _compare({"a": [1.0 + 1e-9, None, {"b": "x"}], "c": True}, want, "r") == []
    assert _compare({"a": [1.01, None, {"b": "x"}], "c": True}, want, "r")
    assert _compare({"a": [1.0, 0.0, {"b": "x"}], "c": True}, want, "r")
    assert _compare({"a": [1.0, None, {"b": "y"}], "c": True}, want, "r")
    assert _compare({"a": [1.0, None], "c": True}, want, "r")
    assert _compare({"a": [1.0, None, {"b": "x"}], "c": 1}, want, "r")
    assert _compare({"a": [1.0, None, {"b": "x"}]}, want, "r")


def test_examples_are_in_the_openapi_document(api: Harness) -> None:
    doc = api.get("/openapi.json").json()
    for example in EXAMPLES:
        operation = doc["paths"][example.path][example.method]
        body_examples = operation["requestBody"]["content"]["application/json"]["examples"]
        assert body_examples[example.name]["value"] == example.request
        media = "application/problem+json" if example.status >= 400 else "application/json"
        response_examples = operation["responses"][str(example.status)]["content"][media]["examples"]
        assert response_examples[example.name]["value"] == example.response
