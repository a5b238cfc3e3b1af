"""Input the client can judge by itself is refused before anything is sent.

The client under test points at a loopback port nobody listens on, with
retries off: had it sent anything, the call would end in ConnectionFailed,
not in ValidationFailed with ``status`` None.  Where the service has the same
rule, the tests also send the bad request (with local checks off) to the real
in-process app and compare field paths, so client and service agree.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest

from service.client import BandwiseClient, ConnectionFailed, RetryPolicy, ValidationFailed

from .conftest import API_KEY, InProcessApp, free_port

GOOD_X = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0]
GOOD_Y = [2.0, 2.4, 3.9, 4.2, 5.8, 6.1]


@pytest.fixture(scope="module")
def offline() -> BandwiseClient:
    client = BandwiseClient(f"http://127.0.0.1:{free_port()}", retry=RetryPolicy(attempts=1), timeout=2.0)
    yield client
    client.close()


def refused(call: Any, *args: Any, **kwargs: Any) -> ValidationFailed:
    with pytest.raises(ValidationFailed) as info:
        call(*args, **kwargs)
    error = info.value
    assert error.status is None, "refused locally: nothing was answered"
    assert error.attempts == 0
    assert error.errors, "each refusal names the offending fields"
    return error


def fields(error: ValidationFailed) -> list[str]:
    return [e.field for e in error.errors]


def test_the_offline_client_really_cannot_send(offline: BandwiseClient) -> None:
    # The premise of this module: a request that passes the local checks fails to connect.
    with pytest.raises(ConnectionFailed):
        offline.smooth(GOOD_X, GOOD_Y)


def test_lengths_differ(offline: BandwiseClient) -> None:
    error = refused(offline.smooth, GOOD_X, GOOD_Y[:-1])
    assert fields(error) == ["y"]
    assert "5 values but x has 6" in str(error)
    error = refused(offline.smooth, GOOD_X, GOOD_Y, weights=[1.0, 1.0])
    assert fields(error) == ["weights"]


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf])
def test_non_finite_values(offline: BandwiseClient, bad: float) -> None:
    x = np.array(GOOD_X)
    x[3] = bad
    error = refused(offline.smooth, x, GOOD_Y)
    assert fields(error) == ["x"]
    assert error.errors[0].type == "not_finite"
    assert "index 3" in error.errors[0].message
    y = list(GOOD_Y)
    y[0] = bad
    error = refused(offline.bandwidth, GOOD_X, y)
    assert fields(error) == ["y"]
    error = refused(offline.smooth, GOOD_X, GOOD_Y, weights=[1, 1, bad, 1, 1, 1])
    assert fields(error) == ["weights"]


def test_empty_and_single_point(offline: BandwiseClient) -> None:
    error = refused(offline.smooth, [], [])
    assert set(fields(error)) == {"x", "y"}
    assert "empty" in str(error)
    error = refused(offline.smooth, np.array([1.0]), np.array([2.0]))
    assert fields(error) == ["x"]
    assert "at least 2 points" in str(error)


@pytest.mark.parametrize(
    "x",
    [
        ["1", "2", "3"],  # strings are date-times on the wire (RFC 3339, section 5.6), never numbers
        [1.0, None, 3.0],
        [True, False, True],
        [[1.0, 2.0], [3.0, 4.0]],
        "1,2,3",
        ["2025-06-02T00:00:00Z", "2025-06-02T00:15:00", "2025-06-02T00:30:00Z"],  # no offset: not RFC 3339 (section 5.6)
    ],
)
def test_not_a_flat_list_of_numbers(offline: BandwiseClient, x: Any) -> None:
    error = refused(offline.smooth, x, [1.0, 2.0, 3.0])
    assert fields(error) == ["x"]


def test_weights_must_be_non_negative_and_not_all_zero(offline: BandwiseClient) -> None:
    error = refused(offline.smooth, GOOD_X, GOOD_Y, weights=[1, 1, -0.5, 1, 1, 1])
    assert fields(error) == ["weights"] and "weights[2]" in str(error)
    error = refused(offline.smooth, GOOD_X, GOOD_Y, weights=np.zeros(6))
    assert "at least one weight" in str(error)


def test_unknown_option_names_the_closest_known_one(offline: BandwiseClient) -> None:
    error = refused(offline.smooth, GOOD_X, GOOD_Y, kernal="epanechnikov")
    assert fields(error) == ["kernal"]
    assert "did you mean 'kernel'" in str(error)
    # bandwidth() takes the data and selection options only.
    error = refused(offline.bandwidth, GOOD_X, GOOD_Y, predict_at=[1.0])
    assert fields(error) == ["predict_at"]


def test_x_and_y_are_positional(offline: BandwiseClient) -> None:
    with pytest.raises(TypeError):
        offline.smooth(GOOD_X, GOOD_Y, **{"x": GOOD_X})


BAD_OPTIONS: list[dict[str, Any]] = [
    {"bandwidth": -1.0},
    {"bandwidth": "wide"},
    {"degree": 3},
    {"kernel": "parabolic"},
    {"selector": "aic"},
    {"bands": {"level": 1.5}},
    {"bands": {"method": "jackknife"}},
    {"curve": {"points": 5, "at": [1.0]}},
    {"predict_at": [1.0, math.nan]},
    {"bandwidth_min": 3.0, "bandwidth_max": 1.0},
    {"include_fitted": "yes"},
]


@pytest.mark.parametrize("options", BAD_OPTIONS, ids=[",".join(o) for o in BAD_OPTIONS])
def test_bad_options_are_refused_with_the_service_field_paths(offline: BandwiseClient, app: InProcessApp, options: dict[str, Any]) -> None:
    local = refused(offline.smooth, GOOD_X, GOOD_Y, **options)
    # The same request sent with local checks off: the service must object to the same fields.
    with app.client(api_key=API_KEY, validate=False) as client, pytest.raises(ValidationFailed) as info:
        client.smooth(GOOD_X, GOOD_Y, **options)
    remote = info.value
    assert remote.status == 422
    assert remote.request_id
    assert set(fields(local)) == set(fields(remote)), (local, remote)


def test_batch_errors_name_the_series(offline: BandwiseClient) -> None:
    error = refused(
        offline.smooth_batch,
        [
            {"x": GOOD_X, "y": GOOD_Y},
            {"x": GOOD_X, "y": GOOD_Y[:3]},
            {"x": GOOD_X, "y": GOOD_Y, "degree": 5},
            {"y": GOOD_Y},
        ],
    )
    assert fields(error) == ["series[1].y", "series[2].degree", "series[3].x"]
    refused(offline.smooth_batch, [])
    with pytest.raises(TypeError):
        offline.smooth_batch({"x": GOOD_X, "y": GOOD_Y})  # type: ignore[arg-type]


@pytest.mark.parametrize(
    "kwargs",
    [
        {"base_url": "127.0.0.1:8000"},
        {"base_url": "ftp://127.0.0.1"},
        {"base_url": "http://127.0.0.1:8000", "api_key": "key\r\nX-Injected: 1"},
        {"base_url": "http://127.0.0.1:8000", "api_key": ""},
        {"base_url": "http://127.0.0.1:8000", "timeout": 0},
    ],
)
def test_bad_client_settings(kwargs: dict[str, Any]) -> None:
    with pytest.raises(ValueError):
        BandwiseClient(**kwargs)


@pytest.mark.parametrize("kwargs", [{"attempts": 0}, {"backoff": -1.0}, {"total": -1.0}])
def test_bad_retry_policy(kwargs: dict[str, Any]) -> None:
    with pytest.raises(ValueError):
        RetryPolicy(**kwargs)


def test_api_key_is_not_in_repr() -> None:
    with BandwiseClient("http://127.0.0.1:8000", api_key=API_KEY) as client:
        assert API_KEY not in repr(client)
        assert "***" in repr(client)
