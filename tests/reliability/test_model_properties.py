"""Properties of the request models against the running app (in-process, httpx ASGITransport, real workers).

For JSON bodies drawn from a wide strategy (valid and invalid fields, NaN and
Infinity tokens, epoch-millisecond x values, bands, explicit curves,
predictions, weights, unknown keys):

* the request models decide: a body ``SmoothRequest`` / ``BandwidthRequest``
  accepts (``model_validate_json`` with the app's limits, as the workers do)
  is answered 200, or 422 with an RFC 9457 problem body (data that cannot be
  fitted as asked); a body they reject is answered 422 listing the offending
  fields. Never anything else, never a traceback.
* a 200 is strict JSON (no ``NaN``/``Infinity`` tokens) whose numbers are all
  finite (DESIGN.md: undefined numbers are ``null``), with one entry per
  requested curve point, prediction and data point, and bands that are
  ordered (``lower <= upper``) wherever both ends are defined.

Magnitudes stay below 1e13 (epoch milliseconds); values near the float limit
are the schema fuzzer's and ``test_regressions.py``'s business.
"""

from __future__ import annotations

import json
import math
from collections import Counter
from collections.abc import Iterator
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from pydantic import ValidationError

from service.contract.models import KERNEL_NAMES, SELECTOR_NAMES, BandwidthRequest, SmoothRequest
from tests.service.conftest import Harness

from .figures import record

LIMITS = {
    "max_points": 120,
    "max_predict_points": 12,
    "max_curve_points": 60,
    "max_replicates": 60,
    "max_candidates": 12,
    "default_curve_points": 25,
}
EXAMPLES = 250
OUTCOMES: Counter[str] = Counter()
DETAILS: Counter[str] = Counter()


@pytest.fixture(scope="module")
def api() -> Iterator[Harness]:
    h = Harness(workers=2, access_log=False, log_level="critical", **LIMITS)
    yield h
    h.close()
    record("model properties (hypothesis) outcomes", json.dumps(dict(sorted(OUTCOMES.items()))))
    record("model properties: 422 details for accepted bodies", json.dumps(DETAILS.most_common(6)))


# ------------------------------------------------------------------ strategies

ordinary = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False)
small_ints = st.integers(min_value=-1000, max_value=1000)
epoch_ms = st.integers(min_value=1_700_000_000_000, max_value=1_800_000_000_000)
non_finite = st.sampled_from([math.nan, math.inf, -math.inf])
# Mostly good numbers, now and then a NaN/Infinity token or a wrong type.
number = st.one_of(ordinary, ordinary, ordinary, small_ints, st.just(0.0))
odd_value = st.one_of(non_finite, st.none(), st.booleans(), st.text(max_size=3))


def pick(clean: bool, valid: list[Any], invalid: list[Any]) -> st.SearchStrategy[Any]:
    """One of ``valid``; in a body that may be wrong, sometimes one of ``invalid``."""
    return st.sampled_from(valid if clean else valid + invalid)


@st.composite
def column(draw: st.DrawFn, values: st.SearchStrategy[Any], n: int, clean: bool) -> list[Any]:
    out = draw(st.lists(values, min_size=n, max_size=n))
    if out and not clean and draw(st.integers(0, 9)) == 0:
        out[draw(st.integers(0, len(out) - 1))] = draw(odd_value)
    return out


@st.composite
def data_fields(draw: st.DrawFn, clean: bool | None = None) -> dict[str, Any]:
    """Data and selection fields; ``clean`` bodies use only allowed values (half of them, when not given)."""
    if clean is None:
        clean = draw(st.booleans())
    n = draw(st.integers(min_value=2 if clean else 0, max_value=40))
    xs = draw(st.sampled_from(["ordinary", "ordinary", "integers", "epoch", "clustered"]))
    x_values = {"ordinary": number, "integers": small_ints, "epoch": epoch_ms, "clustered": st.sampled_from([1.0, 2.0, 2.5, 7.0])}[xs]
    body: dict[str, Any] = {"x": draw(column(x_values, n, clean))}
    ny = n if clean or draw(st.integers(0, 4)) else draw(st.integers(0, 42))
    body["y"] = draw(column(number, ny, clean))
    if draw(st.booleans()):
        body["kernel"] = draw(pick(clean, list(KERNEL_NAMES), ["boxcar"]))
    if draw(st.booleans()):
        body["degree"] = draw(pick(clean, [0, 1, 2], [3, -1, 1.0]))
    if draw(st.integers(0, 3)) == 0:
        nw = n if clean or draw(st.integers(0, 4)) else draw(st.integers(0, 42))
        weight = st.floats(min_value=0.0 if clean else -1.0, max_value=10.0, allow_nan=False)
        body["weights"] = draw(column(st.one_of(weight, st.just(0.0), st.just(1.0)), nw, clean))
    if draw(st.integers(0, 3)) == 0:
        body["selector"] = draw(pick(clean, list(SELECTOR_NAMES), ["cv"]))
    if draw(st.integers(0, 4)) == 0:
        body["rule"] = draw(pick(clean, ["min", "one_se"], ["max"]))
    if draw(st.integers(0, 4)) == 0:
        body["candidate_count"] = draw(st.integers(min_value=2 if clean else 0, max_value=LIMITS["max_candidates"] + (0 if clean else 8)))
    if draw(st.integers(0, 5)) == 0:
        body["bandwidth_min"] = draw(st.floats(min_value=1e-3 if clean else -1.0, max_value=50.0, allow_nan=False))
    if draw(st.integers(0, 5)) == 0:
        body["bandwidth_max"] = draw(st.floats(min_value=60.0 if clean else -1.0, max_value=1e4, allow_nan=False))
    if not clean and draw(st.integers(0, 9)) == 0:
        body[draw(st.sampled_from(["bandwith", "Kernel", "extra"]))] = 1
    return body


@st.composite
def smooth_bodies(draw: st.DrawFn) -> dict[str, Any]:
    clean = draw(st.booleans())
    body = draw(data_fields(clean))
    if draw(st.booleans()):
        given_h = st.floats(min_value=1e-3, max_value=1e4)
        body["bandwidth"] = draw(st.one_of(given_h, st.just("auto")) if clean else st.one_of(given_h, st.sampled_from(["auto", 0, -1.0, "2.5", None])))
    if draw(st.integers(0, 3)) == 0:
        body["engine"] = draw(pick(clean, ["auto", "exact", "binned"], ["fast"]))
    if draw(st.integers(0, 2)) == 0:
        options = [
            st.fixed_dictionaries({"points": st.integers(min_value=2 if clean else 0, max_value=LIMITS["max_curve_points"] + (0 if clean else 10))}),
            st.fixed_dictionaries({"at": st.lists(number, min_size=1 if clean else 0, max_size=8)}),
        ]
        if not clean:
            options.append(st.just({"points": 5, "at": [1.0]}))
        body["curve"] = draw(st.one_of(options))
    if draw(st.integers(0, 2)) == 0:
        body["predict_at"] = draw(st.lists(number, min_size=0, max_size=LIMITS["max_predict_points"] + (0 if clean else 2)))
    if draw(st.integers(0, 2)) == 0:
        bands: dict[str, Any] = {}
        if draw(st.booleans()):
            bands["method"] = draw(pick(clean, ["wild_bootstrap", "residual_bootstrap", "analytic"], ["jackknife"]))
        if draw(st.booleans()):
            level = st.floats(min_value=0.01, max_value=0.999)
            bands["level"] = draw(level if clean else st.one_of(level, st.sampled_from([0.0, 1.0, 95])))
        bands["replicates"] = draw(st.integers(min_value=1 if clean else 0, max_value=LIMITS["max_replicates"] + (0 if clean else 5)))
        if draw(st.booleans()):
            bands["seed"] = draw(st.integers(min_value=0 if clean else -1, max_value=2**63 - 1 if clean else 2**63))
        if draw(st.booleans()):
            bands["simultaneous"] = draw(st.booleans())
        body["bands"] = bands
    if draw(st.booleans()):
        body["include_fitted"] = draw(pick(clean, [True, False], [1]))
    return body


# ------------------------------------------------------------------ checks


def _strict_json(text: str) -> Any:
    def refuse(token: str) -> Any:
        raise AssertionError(f"non-finite token {token} in a JSON answer")

    return json.loads(text, parse_constant=refuse)


def _numbers(node: Any, path: str = "$") -> Iterator[tuple[str, float]]:
    if isinstance(node, bool) or node is None or isinstance(node, str):
        return
    if isinstance(node, (int, float)):
        yield path, float(node)
    elif isinstance(node, list):
        for i, item in enumerate(node):
            yield from _numbers(item, f"{path}[{i}]")
    elif isinstance(node, dict):
        for key, item in node.items():
            yield from _numbers(item, f"{path}.{key}")


def _assert_problem(response: Any, status: int) -> dict[str, Any]:
    assert response.status_code == status, (response.status_code, response.text[:400])
    assert response.headers["content-type"].startswith("application/problem+json")
    assert "Traceback" not in response.text
    doc = _strict_json(response.text)
    for key in ("type", "title", "status", "detail"):
        assert key in doc, (key, doc)
    assert doc["status"] == status
    return doc


def _ordered(lower: list[Any] | None, upper: list[Any] | None) -> None:
    if lower is None or upper is None:
        return
    assert len(lower) == len(upper)
    for lo, hi in zip(lower, upper, strict=False):
        if lo is not None and hi is not None:
            assert lo <= hi, (lo, hi)


def _check_smooth_answer(doc: dict[str, Any], req: SmoothRequest) -> None:
    bad = [(path, value) for path, value in _numbers(doc) if not math.isfinite(value)]
    assert not bad, bad[:5]
    curve = doc["curve"]
    expected_points = len(req.curve.at) if req.curve is not None and req.curve.at is not None else (req.curve.points if req.curve is not None and req.curve.points is not None else LIMITS["default_curve_points"])
    assert len(curve["x"]) == len(curve["estimate"]) == expected_points
    _ordered(curve.get("lower"), curve.get("upper"))
    assert len(doc["predictions"]) == len(req.predict_at or [])
    for given_x, prediction in zip(req.predict_at or [], doc["predictions"], strict=False):
        assert prediction["x"] == pytest.approx(given_x)
        _ordered([prediction.get("lower")], [prediction.get("upper")])
        _ordered([prediction.get("interval_lower")], [prediction.get("interval_upper")])
    if req.include_fitted:
        assert len(doc["fitted"]["estimate"]) == len(doc["fitted"]["residuals"]) == len(req.x)
    assert doc["bandwidth"]["value"] > 0
    assert doc["diagnostics"]["n"] == len(req.x)


# ------------------------------------------------------------------ properties


def _post_checked(api: Harness, route: str, model: Any, body: dict[str, Any]) -> tuple[Any, Any] | None:
    """POST ``body`` to ``/v1/<route>``; a body the model refuses must get a 422 listing the errors.

    Returns ``(request, answer)`` for a 200, ``None`` after a checked problem
    (a valid request the data cannot serve may also get a 422).
    """
    raw = json.dumps(body).encode()  # NaN/Infinity become the JSON5-style tokens the service must refuse
    try:
        req = model.model_validate_json(raw, context={"limits": LIMITS})
    except ValidationError:
        req = None
    response = api.post(f"/v1/{route}", content=raw, headers={"content-type": "application/json"})
    OUTCOMES[f"{route} {'accepted' if req else 'rejected'} {response.status_code}"] += 1
    if req is None:
        doc = _assert_problem(response, 422)
        assert doc.get("errors"), doc
        return None
    if response.status_code == 422:
        doc = _assert_problem(response, 422)
        DETAILS[f"{route}: {doc['detail'][:70]}"] += 1
        return None
    assert response.status_code == 200, (response.status_code, response.text[:400])
    return req, _strict_json(response.text)


@settings(max_examples=EXAMPLES, deadline=None, derandomize=True, database=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(body=smooth_bodies())
def test_smooth_answers_follow_the_request_model(api: Harness, body: dict[str, Any]) -> None:
    answered = _post_checked(api, "smooth", SmoothRequest, body)
    if answered is not None:
        req, doc = answered
        _check_smooth_answer(doc, req)


@settings(max_examples=EXAMPLES // 2, deadline=None, derandomize=True, database=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(body=data_fields())
def test_bandwidth_answers_follow_the_request_model(api: Harness, body: dict[str, Any]) -> None:
    answered = _post_checked(api, "bandwidth", BandwidthRequest, body)
    if answered is None:
        return
    doc = answered[1]
    bad = [(path, value) for path, value in _numbers(doc) if not math.isfinite(value)]
    assert not bad, bad[:5]
    chosen = doc["bandwidth"]
    assert chosen["value"] > 0
    assert len(chosen["candidates"]) == len(chosen["scores"]) <= LIMITS["max_candidates"]
    assert min(chosen["candidates"]) <= chosen["value"] <= max(chosen["candidates"])
