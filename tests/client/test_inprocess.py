"""Every client method against the real app in this process (its real worker processes).

The sync client goes through :class:`LoopTransport`, the async one through
:class:`httpx.ASGITransport`; plain httpx requests to the same app are the
reference for what the wire says.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest

from estimators.demo import cold_store
from service.client import (
    AsyncBandwiseClient,
    BandwidthResult,
    BatchResult,
    KernelsResult,
    Overloaded,
    PayloadTooLarge,
    RetryPolicy,
    SmoothResult,
    Unauthorized,
    UnsuitableData,
    ValidationFailed,
    to_numpy,
)
from service.contract.models import BandwidthResponse, KernelsResponse, ProblemSlot, SmoothResponse

from .conftest import API_KEY, InProcessApp

DEMO = cold_store()
TEMPERATURE_C, POWER_KW = DEMO.x, DEMO.y
OPTIONS: dict[str, Any] = {"kernel": "epanechnikov", "curve": {"points": 60}, "predict_at": [-10.0, 5.0, 15.0, 45.0], "include_fitted": True}
AUTH = {"Authorization": f"Bearer {API_KEY}"}


@pytest.fixture(scope="module")
def raw_smooth(app: InProcessApp) -> dict[str, Any]:
    response = app.raw("POST", "/v1/smooth", json={"x": TEMPERATURE_C.tolist(), "y": POWER_KW.tolist(), **OPTIONS}, headers=AUTH)
    assert response.status_code == 200, response.text
    return response.json()


@pytest.fixture(scope="module")
def result(app: InProcessApp) -> SmoothResult:
    with app.client(api_key=API_KEY) as client:
        return client.smooth(TEMPERATURE_C, POWER_KW, **OPTIONS)


def test_smooth_result_is_the_service_model_of_the_wire_answer(result: SmoothResult, raw_smooth: dict[str, Any]) -> None:
    assert isinstance(result, SmoothResponse)
    assert result == SmoothResult.model_validate(raw_smooth)
    assert result.model_dump(exclude_unset=True) == SmoothResponse.model_validate(raw_smooth).model_dump(exclude_unset=True)
    assert result.bandwidth.value == raw_smooth["bandwidth"]["value"] > 0
    assert result.bandwidth.selector == "gcv"
    assert len(result.curve.estimate) == 60
    assert result.diagnostics.n == DEMO.x.size
    assert result.request_id and len(result.request_id) >= 16


def test_numpy_helpers(result: SmoothResult, raw_smooth: dict[str, Any]) -> None:
    curve = result.curve.arrays()
    assert curve.x.dtype == np.float64 and curve.x.shape == (60,)
    wire = raw_smooth["curve"]["estimate"]
    assert np.array_equal(np.isnan(curve.estimate), np.array([v is None for v in wire]))
    assert np.allclose(curve.estimate[~np.isnan(curve.estimate)], [v for v in wire if v is not None], rtol=0, atol=0)
    assert curve.lower is None and curve.upper is None and curve.se is None  # no bands asked for
    # An even grid over the data range (numpy reference).
    assert np.allclose(curve.x, np.linspace(DEMO.x.min(), DEMO.x.max(), 60))

    fitted = result.fitted.arrays() if result.fitted else None
    assert fitted is not None and fitted.estimate.shape == DEMO.y.shape
    defined = ~np.isnan(fitted.estimate)
    assert defined.mean() > 0.99
    assert np.allclose(fitted.residuals[defined], DEMO.y[defined] - fitted.estimate[defined], atol=1e-9)

    predictions = result.prediction_arrays()
    assert predictions.x.tolist() == OPTIONS["predict_at"]
    # Outside the data range [min, max] the service must flag extrapolation.
    assert predictions.extrapolated.tolist() == [bool(p < DEMO.x.min() or p > DEMO.x.max()) for p in OPTIONS["predict_at"]]
    assert predictions.lower is None and predictions.interval_lower is None
    assert "extrapolation" in result.warning_codes()

    selection = result.bandwidth.arrays()
    assert selection is not None and selection.candidates.size == len(result.bandwidth.candidates or [])
    assert np.isclose(selection.candidates, result.bandwidth.value).any()


def test_to_numpy() -> None:
    assert np.array_equal(to_numpy([1.0, None, 3]), np.array([1.0, math.nan, 3.0]), equal_nan=True)
    assert to_numpy(None).shape == (0,)


def test_lists_numpy_and_integer_inputs_give_the_same_answer(app: InProcessApp) -> None:
    x_int = np.arange(40)
    y = np.sin(x_int / 6.0) * 10 + 20
    with app.client(api_key=API_KEY) as client:
        a = client.smooth(x_int, y, bandwidth=3.0, curve={"points": 9})
        b = client.smooth(x_int.astype(float).tolist(), y.tolist(), bandwidth=3.0, curve={"points": 9})
        c = client.smooth(list(range(40)), tuple(y), bandwidth=np.float32(3.0), curve={"points": np.int64(9)})
    assert a == b == c
    assert a.bandwidth.selector is None and a.bandwidth.candidates is None and a.bandwidth.arrays() is None


def test_bandwidth_selection_agrees_with_smooth(app: InProcessApp, result: SmoothResult) -> None:
    with app.client(api_key=API_KEY) as client:
        selection = client.bandwidth(TEMPERATURE_C, POWER_KW, kernel="epanechnikov")
    assert isinstance(selection, BandwidthResult) and isinstance(selection, BandwidthResponse)
    assert selection.bandwidth.value == result.bandwidth.value
    assert selection.bandwidth.candidates == result.bandwidth.candidates
    arrays = selection.bandwidth.arrays()
    assert arrays is not None and arrays.scores.shape == arrays.candidates.shape
    # rule "min": the chosen candidate has the lowest score.
    assert arrays.candidates[np.nanargmin(arrays.scores)] == pytest.approx(selection.bandwidth.value)


# R(K) = integral of K^2 and mu2(K) = integral of u^2 K for the kernels on [-1, 1] (gaussian: unbounded),
# Wand and Jones (1995), Kernel Smoothing, Chapman & Hall, section 2.7 and appendix B (from memory,
# each re-derivable by integrating the kernel polynomial).
TEXTBOOK = {
    "gaussian": (1 / (2 * math.sqrt(math.pi)), 1.0),
    "uniform": (1 / 2, 1 / 3),
    "epanechnikov": (3 / 5, 1 / 5),
    "triangular": (2 / 3, 1 / 6),
    "biweight": (5 / 7, 1 / 7),
    "triweight": (350 / 429, 1 / 9),
    "tricube": (175 / 247, 35 / 243),
    "cosine": (math.pi**2 / 16, 1 - 8 / math.pi**2),
}


def test_kernels(app: InProcessApp) -> None:
    with app.client(api_key=API_KEY) as client:
        kernels = client.kernels()
    assert isinstance(kernels, KernelsResult) and isinstance(kernels, KernelsResponse)
    table = kernels.by_name()
    assert set(table) == set(TEXTBOOK)
    for name, (roughness, mu2) in TEXTBOOK.items():
        k = table[name]
        assert k.roughness == pytest.approx(roughness, rel=1e-9), name
        assert k.second_moment == pytest.approx(mu2, rel=1e-9), name
        # Canonical bandwidth delta_0 = (R / mu2^2)^(1/5), Marron and Nolan (1988).
        assert k.canonical_factor == pytest.approx((roughness / mu2**2) ** 0.2, rel=1e-9), name
    assert table["gaussian"].support is None and table["epanechnikov"].support == 1.0


def test_batch(app: InProcessApp) -> None:
    good = {"x": TEMPERATURE_C, "y": POWER_KW, "bandwidth": 2.0, "curve": {"points": 12}}
    flat = {"x": [4.0] * 10, "y": np.linspace(20.0, 30.0, 10)}  # every temperature equal: nothing to smooth over
    with app.client(api_key=API_KEY) as client:
        batch = client.smooth_batch([good, flat, good])
        single = client.smooth(TEMPERATURE_C, POWER_KW, bandwidth=2.0, curve={"points": 12})
    assert isinstance(batch, BatchResult)
    assert not batch.ok
    assert isinstance(batch.results[1], ProblemSlot)
    assert batch.succeeded() == {0: single, 2: single}
    errors = batch.errors()
    assert list(errors) == [1]
    assert isinstance(errors[1], UnsuitableData) and errors[1].status == 422
    assert str(errors[1]).count("series 1") == 1 and errors[1].instance and errors[1].instance.endswith("#series[1]")
    with pytest.raises(UnsuitableData):
        batch.raise_for_errors()


def test_unauthorized(app: InProcessApp) -> None:
    for key in (None, "not-the-key"):
        with app.client(api_key=key) as client, pytest.raises(Unauthorized) as info:
            client.kernels()
        error = info.value
        assert error.status == 401 and error.attempts == 1
        assert error.slug == "unauthorized"
        assert "api_key" in str(error) and "Bearer" in str(error)
        assert error.request_id == error.problem["request_id"]


def test_payload_too_large(app: InProcessApp) -> None:
    n = 20_000  # about 0.75 MB of JSON; the app takes 256 KiB
    x = np.linspace(-5.0, 30.0, n)
    with app.client(api_key=API_KEY) as client, pytest.raises(PayloadTooLarge) as info:
        client.smooth(x, 25.0 + 0.5 * x)
    assert info.value.status == 413 and info.value.attempts == 1
    assert str(256 * 1024) in str(info.value) and "Split the data" in str(info.value)


def test_service_side_validation_and_unsuitable_data(app: InProcessApp) -> None:
    with app.client(api_key=API_KEY, validate=False) as client:
        with pytest.raises(ValidationFailed) as info:
            client.smooth([1.0, 2.0, 3.0], [1.0, 2.0, 3.0], smoothness=3)
        assert info.value.status == 422 and [e.field for e in info.value.errors] == ["smoothness"]
        assert not isinstance(info.value, UnsuitableData)
    with app.client(api_key=API_KEY) as client, pytest.raises(UnsuitableData) as unsuitable:
        client.smooth([3.0, 3.0, 3.0], [1.0, 2.0, 3.0])
    assert unsuitable.value.status == 422 and unsuitable.value.slug == "unsuitable-data"


def test_rate_limit_beyond_the_retry_budget(limited_app: InProcessApp) -> None:
    policy = RetryPolicy(attempts=5, total=5.0)
    with limited_app.client(retry=policy) as client:
        client.kernels()  # the one request per minute
        with pytest.raises(Overloaded) as info:
            client.kernels()
    error = info.value
    assert error.status == 429 and error.slug == "rate-limited"
    assert error.attempts == 1, "Retry-After of tens of seconds does not fit a 5 s budget"
    assert error.retry_after is not None and error.retry_after > 5.0
    assert "retry budget" in str(error)

    async def again(client: AsyncBandwiseClient) -> None:
        with pytest.raises(Overloaded):
            await client.kernels()

    limited_app.run_async(again, retry=policy)


def test_async_client_gives_the_same_results(app: InProcessApp, result: SmoothResult) -> None:
    series = [{"x": TEMPERATURE_C, "y": POWER_KW, "bandwidth": 2.0, "curve": {"points": 12}}, {"x": [4.0] * 10, "y": np.linspace(20.0, 30.0, 10)}]

    async def work(client: AsyncBandwiseClient) -> tuple[Any, ...]:
        return (
            await client.smooth(TEMPERATURE_C, POWER_KW, **OPTIONS),
            await client.bandwidth(TEMPERATURE_C, POWER_KW, kernel="epanechnikov"),
            await client.kernels(),
            await client.smooth_batch(series),
        )

    a_smooth, a_bandwidth, a_kernels, a_batch = app.run_async(work, api_key=API_KEY)
    with app.client(api_key=API_KEY) as client:
        s_bandwidth = client.bandwidth(TEMPERATURE_C, POWER_KW, kernel="epanechnikov")
        s_kernels = client.kernels()
        s_batch = client.smooth_batch(series)
    assert type(a_smooth) is SmoothResult and a_smooth == result
    assert a_bandwidth == s_bandwidth
    assert a_kernels == s_kernels
    assert a_batch == s_batch
    assert a_smooth.request_id != result.request_id

    async def unauthorized(client: AsyncBandwiseClient) -> None:
        with pytest.raises(Unauthorized):
            await client.kernels()
        with pytest.raises(ValidationFailed):
            await client.smooth([1.0, 2.0], [1.0])

    app.run_async(unauthorized)


def test_bands_as_arrays(app: InProcessApp) -> None:
    pytest.importorskip("estimators.uncertainty", reason="bands need estimators.uncertainty")
    with app.client(api_key=API_KEY) as client:
        banded = client.smooth(TEMPERATURE_C, POWER_KW, bands={"method": "analytic", "level": 0.9}, curve={"points": 30}, predict_at=[10.0])
    curve = banded.curve.arrays()
    assert curve.lower is not None and curve.upper is not None and curve.se is not None
    ok = ~np.isnan(curve.estimate)
    assert np.all(curve.lower[ok] <= curve.estimate[ok]) and np.all(curve.estimate[ok] <= curve.upper[ok])
    predictions = banded.prediction_arrays()
    assert predictions.lower is not None and predictions.interval_lower is not None
    # A prediction interval for a new observation is wider than the band for the curve.
    assert predictions.interval_lower[0] <= predictions.lower[0]
    assert "pointwise_bands" in banded.warning_codes()
