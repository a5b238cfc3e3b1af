"""POST /v1/smooth: every request field and response field of the contract.

The service must be a thin layer: numbers in the answer are compared with
``estimators`` called directly in this process (the reference), and with
identities that hold for any smoother (residual = y - fitted, a weight of
0 is the same as leaving the point out, a prediction interval is wider than
the band for the curve).
"""

from __future__ import annotations

import gzip
import math
from typing import Any

import numpy as np
import pytest

import estimators
from estimators.demo import cold_store, parcel_depot
from service.contract.models import KERNEL_NAMES, SCORED_SELECTORS, SmoothResponse

from .conftest import Harness

COLD = cold_store()
X = COLD.x[::8].tolist()
Y = COLD.y[::8].tolist()


def _smooth(api: Harness, **body: Any) -> dict[str, Any]:
    body.setdefault("x", X)
    body.setdefault("y", Y)
    response = api.post("/v1/smooth", json=body)
    assert response.status_code == 200, response.text[:800]
    assert response.headers["content-type"] == "application/json"
    assert "NaN" not in response.text and "Infinity" not in response.text
    doc = response.json()
    SmoothResponse.model_validate(doc)
    return doc


def _codes(doc: dict[str, Any]) -> list[str]:
    return [w["code"] for w in doc["warnings"]]


def _close(a: list[float | None], b: np.ndarray, rtol: float = 1e-10) -> None:
    got = np.array([np.nan if v is None else v for v in a], dtype=float)
    np.testing.assert_allclose(got, b, rtol=rtol, atol=1e-12 * max(1.0, float(np.nanmax(np.abs(b)))), equal_nan=True)


def test_automatic_bandwidth_matches_estimators(api: Harness) -> None:
    doc = _smooth(api)
    ref = estimators.fit(np.array(X), np.array(Y))
    bw = doc["bandwidth"]
    assert bw["selector"] == "gcv" and bw["rule"] == "min"
    assert math.isclose(bw["value"], ref.bandwidth, rel_tol=1e-12)
    assert len(bw["candidates"]) == len(bw["scores"]) == 40
    _close(bw["candidates"], np.asarray(ref.selection.candidates))
    _close(bw["scores"], np.asarray(ref.selection.scores))
    assert math.isclose(bw["gaussian_equivalent"], ref.selection.gaussian_equivalent, rel_tol=1e-12)
    curve = doc["curve"]
    assert len(curve["x"]) == 200
    assert curve["x"][0] == min(X) and curve["x"][-1] == max(X)
    _close(curve["estimate"], ref.predict(np.array(curve["x"])))
    assert "lower" not in curve and "se" not in curve
    diag = doc["diagnostics"]
    assert diag["n"] == diag["n_used"] == len(X)
    assert math.isclose(diag["effective_df"], ref.effective_df, rel_tol=1e-9)
    assert math.isclose(diag["residual_scale"], ref.residual_scale, rel_tol=1e-9)
    assert diag["kernel"] == "gaussian" and diag["degree"] == 1 and diag["bands"] is None
    assert diag["x_min"] == min(X) and diag["x_max"] == max(X)
    assert doc["predictions"] == []
    assert "fitted" not in doc


def test_fixed_bandwidth_has_no_selection(api: Harness) -> None:
    doc = _smooth(api, bandwidth=1.75, kernel="epanechnikov")
    assert doc["bandwidth"] == {"value": 1.75, "selector": None, "rule": None, "candidates": None, "scores": None, "gaussian_equivalent": None}
    ref = estimators.fit(np.array(X), np.array(Y), bandwidth=1.75, kernel="epanechnikov")
    _close(doc["curve"]["estimate"], ref.predict(np.array(doc["curve"]["x"])))


@pytest.mark.parametrize("kernel", KERNEL_NAMES)
@pytest.mark.parametrize("degree", [0, 1, 2])
def test_every_kernel_and_degree(api: Harness, kernel: str, degree: int) -> None:
    doc = _smooth(api, kernel=kernel, degree=degree, bandwidth=2.5, curve={"points": 25})
    ref = estimators.fit(np.array(X), np.array(Y), kernel=kernel, degree=degree, bandwidth=2.5)
    assert doc["diagnostics"]["kernel"] == kernel and doc["diagnostics"]["degree"] == degree
    _close(doc["curve"]["estimate"], ref.predict(np.array(doc["curve"]["x"])))


@pytest.mark.parametrize("selector", ["loocv", "gcv", "aicc", "plugin", "rule_of_thumb"])
@pytest.mark.parametrize("rule", ["min", "one_se"])
def test_selectors_and_rules(api: Harness, selector: str, rule: str) -> None:
    if rule == "one_se" and selector not in SCORED_SELECTORS:
        response = api.post("/v1/smooth", json={"x": X, "y": Y, "selector": selector, "rule": rule})
        assert response.status_code == 422
        assert [e["field"] for e in response.json()["errors"]] == ["rule"]
        return
    doc = _smooth(api, selector=selector, rule=rule, candidate_count=12, curve={"points": 10})
    ref = estimators.select_bandwidth(np.array(X), np.array(Y), selector=selector, rule=rule, candidates=12)
    assert doc["bandwidth"]["selector"] == selector and doc["bandwidth"]["rule"] == rule
    assert math.isclose(doc["bandwidth"]["value"], ref.chosen, rel_tol=1e-12)


def test_scored_selectors_match_estimators() -> None:
    from estimators.bandwidth import SCORED_SELECTORS as NUMERICS_SCORED
    from estimators.bandwidth import SELECTORS

    assert tuple(SCORED_SELECTORS) == tuple(NUMERICS_SCORED)
    from service.contract.models import SELECTOR_NAMES

    assert tuple(SELECTOR_NAMES) == tuple(SELECTORS)


def test_candidate_range(api: Harness) -> None:
    doc = _smooth(api, candidate_count=7, bandwidth_min=0.5, bandwidth_max=4.0, curve={"points": 5})
    cands = doc["bandwidth"]["candidates"]
    assert len(cands) == 7
    assert math.isclose(cands[0], 0.5) and math.isclose(cands[-1], 4.0)


@pytest.mark.parametrize("engine", ["exact", "binned", "auto"])
def test_engine_field(api: Harness, engine: str) -> None:
    doc = _smooth(api, bandwidth=2.0, engine=engine, curve={"points": 9})
    assert doc["diagnostics"]["engine"] in ("exact", "binned")
    if engine != "auto":
        assert doc["diagnostics"]["engine"] == engine


def test_curve_at_keeps_order_and_flags_extrapolation(api: Harness) -> None:
    at = [20.0, 5.0, 12.5, 40.0]
    doc = _smooth(api, bandwidth=2.0, curve={"at": at})
    assert doc["curve"]["x"] == at
    assert "extrapolation" in _codes(doc)  # 5.0 and 40.0 lie outside the data range
    assert min(X) > 5.0 and max(X) < 40.0


def test_predictions_flag_extrapolation(api: Harness) -> None:
    pts = [min(X) - 3.0, 15.0, 21.5, max(X) + 2.0]
    doc = _smooth(api, bandwidth=2.0, predict_at=pts)
    preds = doc["predictions"]
    assert [p["x"] for p in preds] == pts
    assert [p["extrapolated"] for p in preds] == [True, False, False, True]
    ref = estimators.fit(np.array(X), np.array(Y), bandwidth=2.0)
    _close([p["estimate"] for p in preds], ref.predict(np.array(pts)))
    assert set(preds[0]) == {"x", "estimate", "extrapolated"}
    codes = _codes(doc)
    assert "extrapolation" in codes
    message = next(w["message"] for w in doc["warnings"] if w["code"] == "extrapolation")
    assert "2 prediction points" in message


def test_include_fitted(api: Harness) -> None:
    doc = _smooth(api, bandwidth=2.0, include_fitted=True, curve={"points": 5})
    fitted = doc["fitted"]
    assert len(fitted["estimate"]) == len(fitted["residuals"]) == len(X)
    np.testing.assert_allclose(np.array(fitted["residuals"]), np.array(Y) - np.array(fitted["estimate"]), atol=1e-9)
    ref = estimators.fit(np.array(X), np.array(Y), bandwidth=2.0)
    _close(fitted["estimate"], ref.fitted())


def test_zero_weight_equals_leaving_the_point_out(api: Harness) -> None:
    weights = [1.0] * len(X)
    for i in (3, 50, 100):
        weights[i] = 0.0
    with_weights = _smooth(api, bandwidth=2.0, weights=weights, curve={"at": [12.0, 16.0, 20.0]})
    keep = [i for i, w in enumerate(weights) if w > 0]
    dropped = _smooth(api, bandwidth=2.0, x=[X[i] for i in keep], y=[Y[i] for i in keep], curve={"at": [12.0, 16.0, 20.0]})
    assert with_weights["diagnostics"]["n"] == len(X)
    assert with_weights["diagnostics"]["n_used"] == len(X) - 3
    np.testing.assert_allclose(with_weights["curve"]["estimate"], dropped["curve"]["estimate"], rtol=1e-9)


def test_empty_window_gives_null_and_a_warning(api: Harness) -> None:
    x = [float(v) for v in range(0, 11)] + [float(v) for v in range(20, 31)]
    y = [math.sin(v / 3.0) for v in x]
    response = api.post("/v1/smooth", json={"x": x, "y": y, "kernel": "epanechnikov", "bandwidth": 1.5, "curve": {"at": [5.0, 15.0, 25.0]}, "predict_at": [15.5]})
    assert response.status_code == 200
    assert "NaN" not in response.text
    doc = response.json()
    assert doc["curve"]["estimate"][1] is None
    assert doc["curve"]["estimate"][0] is not None and doc["curve"]["estimate"][2] is not None
    assert doc["predictions"][0]["estimate"] is None
    assert doc["predictions"][0]["extrapolated"] is False
    assert "empty_window" in _codes(doc)


def test_bands_pointwise(api: Harness) -> None:
    pts = [12.0, max(X) + 1.0]
    doc = _smooth(api, bandwidth=2.0, curve={"points": 30}, predict_at=pts, bands={"replicates": 200, "seed": 7, "level": 0.9})
    curve = doc["curve"]
    for key in ("lower", "upper", "se"):
        assert len(curve[key]) == 30
    lo, hi = (np.array(curve[k], dtype=float) for k in ("lower", "upper"))
    assert np.all(lo < hi)
    assert all(s > 0 for s in curve["se"])
    assert doc["diagnostics"]["bands"] == {"method": "wild_bootstrap", "level": 0.9, "simultaneous": False, "replicates": 200, "seed": 7}
    assert "pointwise_bands" in _codes(doc)
    for p in doc["predictions"]:
        assert set(p) == {"x", "estimate", "lower", "upper", "interval_lower", "interval_upper", "extrapolated"}
        # A prediction interval covers a new observation: curve uncertainty plus noise, so it is wider.
        assert p["interval_upper"] - p["interval_lower"] > p["upper"] - p["lower"]
    ref = estimators.fit(np.array(X), np.array(Y), bandwidth=2.0)
    b = ref.bands(np.array(curve["x"]), level=0.9, replicates=200, seed=7)
    _close(curve["lower"], np.asarray(b.lower), rtol=1e-9)
    _close(curve["upper"], np.asarray(b.upper), rtol=1e-9)


def test_bands_are_reproducible_with_a_seed(api: Harness) -> None:
    body = {"bandwidth": 2.0, "curve": {"points": 12}, "bands": {"replicates": 100, "seed": 3}}
    assert _smooth(api, **body)["curve"] == _smooth(api, **body)["curve"]


def test_simultaneous_band_is_wider_and_not_flagged_pointwise(api: Harness) -> None:
    common = {"bandwidth": 2.0, "curve": {"points": 40}}
    pointwise = _smooth(api, **common, bands={"replicates": 300, "seed": 1})
    simultaneous = _smooth(api, **common, bands={"replicates": 300, "seed": 1, "simultaneous": True})
    width = lambda d: np.array(d["curve"]["upper"]) - np.array(d["curve"]["lower"])  # noqa: E731
    # A band covering the whole curve at once is at least as wide as the pointwise one, everywhere.
    assert np.all(width(simultaneous) >= width(pointwise) - 1e-9)
    assert "pointwise_bands" not in _codes(simultaneous)
    assert simultaneous["diagnostics"]["bands"]["simultaneous"] is True


def test_analytic_bands(api: Harness) -> None:
    doc = _smooth(api, bandwidth=2.0, curve={"points": 10}, bands={"method": "analytic", "level": 0.95})
    assert doc["diagnostics"]["bands"] == {"method": "analytic", "level": 0.95, "simultaneous": False, "replicates": None, "seed": None}
    s = estimators.fit(np.array(X), np.array(Y), bandwidth=2.0)
    ref = s.bands(np.array(doc["curve"]["x"]), level=0.95, method="analytic")
    for key in ("lower", "upper"):
        _close(doc["curve"][key], np.asarray(getattr(ref, key)), rtol=1e-9)
    # Contract (issue 22): curve.se is the SE of curve.estimate; the bands' own centre comes as band_center.
    _close(doc["curve"]["se"], np.asarray(s.standard_error(np.array(doc["curve"]["x"]))), rtol=1e-9)
    _close(doc["curve"]["band_center"], np.asarray(ref.estimate), rtol=1e-9)


def test_curve_se_is_the_standard_error_of_the_estimate(api: Harness) -> None:
    # Closed form (common practice): a local-constant fit with a uniform kernel is the window mean, whose
    # standard error is sigma / sqrt(count); with a fixed sigma estimate the ratio of SEs at two points with
    # 3 and 5 points in the window is sqrt(5/3).
    x = [float(i) for i in range(40)]
    y = [float((i * 7) % 5) for i in range(40)]
    doc = _smooth(api, x=x, y=y, kernel="uniform", degree=0, bandwidth=1.5, curve={"at": [0.0, 20.0]}, bands={"method": "analytic"})
    se = doc["curve"]["se"]
    # window [x - 1.5, x + 1.5]: 2 points at the edge x=0 (0, 1), 3 inside (19, 20, 21)
    assert se[0] / se[1] == pytest.approx(math.sqrt(3 / 2), rel=1e-9)
    assert "band_center" in doc["curve"]


def test_degree_reduced_is_reported(api: Harness) -> None:
    # Evenly spaced x, epanechnikov (support [-1, 1]) with bandwidth 1.5: at the first data point the window holds
    # two distinct x values, too few for the degree-2 centre of local-linear bands.
    x = [float(i) for i in range(30)]
    y = [float((i * 3) % 7) for i in range(30)]
    doc = _smooth(api, x=x, y=y, kernel="epanechnikov", bandwidth=1.5, curve={"at": [0.0, 15.0]}, bands={"method": "analytic"})
    assert "degree_reduced" in _codes(doc)


def test_default_curve_points(small: Harness) -> None:
    response = small.post("/v1/smooth", json={"x": X[:40], "y": Y[:40], "bandwidth": 2.0})
    assert response.status_code == 200
    assert len(response.json()["curve"]["x"]) == small.settings.default_curve_points


def test_epoch_millisecond_timestamps(api: Harness) -> None:
    depot = parcel_depot()
    three_hours = 3 * 3_600_000.0
    x, y = depot.x.tolist(), depot.y.tolist()
    noon = 1_749_038_400_000.0  # Wednesday 2025-06-04 12:00 UTC
    doc = _smooth(api, x=x, y=y, bandwidth=three_hours, predict_at=[noon, x[-1] + 6 * 3_600_000.0], curve={"points": 50})
    ref = estimators.fit(depot.x, depot.y, bandwidth=three_hours)
    cx, estimate = np.array(doc["curve"]["x"]), np.array(doc["curve"]["estimate"], dtype=float)
    (gap,) = doc["gaps"]  # the 31-hour scanner outage: the curve is null strictly inside it, as estimators.fit elsewhere
    hole = (cx > gap["start"]) & (cx < gap["end"])
    assert hole.any() and np.isnan(estimate[hole]).all()
    _close(estimate[~hole], ref.predict(cx[~hole]))
    assert doc["curve"]["x"][0] == x[0] and doc["curve"]["x"][-1] == x[-1]
    assert [p["extrapolated"] for p in doc["predictions"]] == [False, True]
    assert doc["predictions"][0]["x"] == noon  # 13-digit timestamps survive the round trip exactly


def test_large_response_is_gzipped_when_accepted(api: Harness) -> None:
    x = np.linspace(0, 100, 20_000)
    body = {"x": x.tolist(), "y": np.sin(x).tolist(), "bandwidth": 1.0, "include_fitted": True}
    zipped = api.post("/v1/smooth", json=body, headers={"accept-encoding": "gzip"})
    assert zipped.status_code == 200
    assert zipped.headers["content-encoding"] == "gzip"
    assert "Accept-Encoding" in [v.strip() for v in zipped.headers["vary"].split(",")]  # RFC 9110, section 12.5.5
    plain = api.post("/v1/smooth", json=body, headers={"accept-encoding": "identity"})
    assert "content-encoding" not in plain.headers
    assert zipped.json() == plain.json()
    assert int(zipped.headers["content-length"]) < len(plain.content) / 2
    assert len(gzip.decompress(gzip.compress(plain.content))) == len(plain.content)


def test_small_response_is_not_gzipped(api: Harness) -> None:
    response = api.post("/v1/smooth", json={"x": X, "y": Y, "bandwidth": 2.0, "curve": {"points": 10}}, headers={"accept-encoding": "gzip"})
    assert response.status_code == 200
    assert "content-encoding" not in response.headers


@pytest.mark.parametrize("method", ["analytic", "wild_bootstrap"])
def test_bands_of_a_fit_through_every_point_are_null_with_a_warning(api: Harness, method: str) -> None:
    # Two points, local linear: the curve is the line through them and the residuals are 0
    # whatever the noise (Hastie & Tibshirani 1990, Section 3.4): no band can be given.
    body = {"x": [1.0, 2.0], "y": [1.0, 2.0], "bandwidth": 1.0, "curve": {"points": 3}, "predict_at": [1.5], "bands": {"method": method, "replicates": 50}}
    response = api.post("/v1/smooth", json=body)
    assert response.status_code == 200, response.text
    doc = response.json()
    SmoothResponse.model_validate(doc)
    assert all(v is not None for v in doc["curve"]["estimate"])
    assert doc["curve"]["lower"] == [None] * 3 and doc["curve"]["upper"] == [None] * 3
    assert [doc["predictions"][0][k] for k in ("lower", "upper", "interval_lower", "interval_upper")] == [None] * 4
    assert doc["diagnostics"]["residual_scale"] is None
    assert "noise_not_estimable" in [w["code"] for w in doc["warnings"]]


def _ar1_series(n: int, phi: float, seed: int) -> tuple[list[float], list[float]]:
    """Readings every 15 minutes (x in minutes): a daily-scale curve plus stationary AR(1) noise of sd 0.3."""
    rng = np.random.default_rng(seed)
    e = np.empty(n)
    e[0] = rng.standard_normal()
    for i in range(1, n):
        e[i] = phi * e[i - 1] + math.sqrt(1.0 - phi * phi) * rng.standard_normal()
    x = np.arange(n) * 15.0
    return x.tolist(), (np.sin(2.0 * math.pi * x / x[-1]) + 0.3 * e).tolist()


@pytest.mark.parametrize("noise", ["auto", "independent", "correlated"])
def test_noise_field_matches_estimators(api: Harness, noise: str) -> None:
    # the service is a thin layer: path, estimate, bands and intervals equal estimators.fit(..., noise=...)
    x, y = _ar1_series(400, 0.6, 3)
    doc = _smooth(api, x=x, y=y, noise=noise, bandwidth=150.0, curve={"points": 15}, predict_at=[3000.0],
                  bands={"method": "analytic"})
    ref = estimators.fit(np.array(x), np.array(y), bandwidth=150.0, noise=noise)
    assert doc["bandwidth"]["selector"] is None  # a fixed bandwidth keeps no selection record
    assert doc["diagnostics"]["noise"] == ref.noise
    assert math.isclose(doc["diagnostics"]["noise_autocorrelation"], ref.noise_autocorrelation, rel_tol=1e-12)
    cx = np.array(doc["curve"]["x"])
    band = ref.bands(cx, method="analytic")
    _close(doc["curve"]["upper"], band.upper)
    _close(doc["curve"]["se"], ref.standard_error(cx))
    lo, hi = ref.prediction_interval(np.array([3000.0]))
    _close([doc["predictions"][0]["interval_lower"], doc["predictions"][0]["interval_upper"]], np.array([lo[0], hi[0]]))
    codes = {w["code"]: w["message"] for w in doc["warnings"]}
    assert ("correlated_noise" in codes) == (ref.noise == "correlated")
    if ref.noise == "correlated":
        assert f"{ref.noise_autocorrelation:.2f}" in codes["correlated_noise"]


def test_unknown_noise_is_a_field_error(api: Harness) -> None:
    response = api.post("/v1/smooth", json={"x": X, "y": Y, "noise": "ar1"})
    assert response.status_code == 422
    errors = response.json()["errors"]
    assert [e["field"] for e in errors] == ["noise"]
    assert "ar1" not in errors[0]["type"] and "literal" not in errors[0]["type"]  # the service's own code
