"""The client sends long series as Arrow IPC streams and reads Arrow answers into numpy.

Outside reference: the JSON answer of the same service to the same request (the
Arrow path must give the same result), and pyarrow as the reference reader.
"""

from __future__ import annotations

from typing import Any

import httpx
import numpy as np

from estimators.demo import cold_store
from service.client import arrow
from service.contract.arrow_layout import ARROW_STREAM
from tests.client.conftest import API_KEY, InProcessApp, LoopTransport

AUTH = {"authorization": f"Bearer {API_KEY}"}


class Recording(LoopTransport):
    """Notes the Content-Type of every request it forwards."""

    def __init__(self, app: Any, loop: Any) -> None:
        super().__init__(app, loop)
        self.content_types: list[str] = []

    def handle_request(self, request: httpx.Request) -> httpx.Response:
        self.content_types.append(request.headers.get("content-type", ""))
        return super().handle_request(request)


def test_long_series_go_as_arrow_with_the_same_result(app: InProcessApp) -> None:
    from service.client import BandwiseClient

    data = cold_store()
    options = {"kernel": "epanechnikov", "bandwidth": 2.5, "include_fitted": True, "predict_at": [10.0, 30.0]}
    transport = Recording(app.app, app.loop)
    with BandwiseClient("http://bandwise.test", api_key=API_KEY, transport=transport) as client:
        client.arrow_min_points = None
        as_json = client.smooth(data.x, data.y, **options)
        client.arrow_min_points = 10
        as_arrow = client.smooth(data.x, data.y, **options)
        chosen = client.bandwidth(data.x, data.y, candidate_count=8)
        client.arrow_min_points = None
        chosen_json = client.bandwidth(data.x, data.y, candidate_count=8)
    assert transport.content_types == ["application/json", ARROW_STREAM, ARROW_STREAM, "application/json"]
    assert as_arrow.model_dump() == as_json.model_dump()
    assert chosen.model_dump() == chosen_json.model_dump()


def test_default_threshold_keeps_small_series_json(app: InProcessApp) -> None:
    from service.client import BandwiseClient

    data = cold_store()
    transport = Recording(app.app, app.loop)
    with BandwiseClient("http://bandwise.test", api_key=API_KEY, transport=transport) as client:
        assert client.arrow_min_points is not None and data.x.size < client.arrow_min_points
        client.smooth(data.x, data.y, bandwidth=2.5)
    assert transport.content_types == ["application/json"]


def test_read_answer_gives_the_json_numbers(app: InProcessApp) -> None:
    data = cold_store()
    body = {"x": data.x, "y": data.y, "bandwidth": 2.5, "kernel": "epanechnikov", "curve": {"points": 40}, "include_fitted": True}
    stream = arrow.request_stream(body)
    reference = app.raw("POST", "/v1/smooth", json={**body, "x": data.x.tolist(), "y": data.y.tolist()}, headers=AUTH).json()
    answer = app.raw("POST", "/v1/smooth", content=stream, headers={**AUTH, "content-type": ARROW_STREAM, "accept": ARROW_STREAM})
    assert answer.status_code == 200, answer.text
    read = arrow.read_answer(answer.content)
    for part in ("curve", "fitted"):
        for name, values in reference[part].items():
            expected = np.array([np.nan if v is None else v for v in values], dtype=float)
            np.testing.assert_array_equal(read.arrays[f"{part}.{name}"], expected)
    assert read.fields["diagnostics"] == reference["diagnostics"]
    assert read.fields["bandwidth"]["value"] == reference["bandwidth"]["value"]
