"""The largest documented batch, sent as ordinary JSON to a service with default limits, is answered.

Every number is written at full precision (17 significant digits, as a JSON
library writes a double by default). The fits use a fixed bandwidth and a
two-point curve, so the request costs its size (reading, checking, splitting
and parsing the body) rather than bandwidth selection.
"""

from __future__ import annotations

import json

import numpy as np

from .conftest import Harness


def test_largest_batch_of_full_precision_json_is_answered(api: Harness) -> None:
    settings = api.settings
    per_series = settings.max_batch_points // settings.max_batch_series
    rng = np.random.default_rng(29)
    x = np.sort(rng.uniform(-1000.0, 1000.0, per_series)) + np.pi * 1e-13
    series = [
        {"x": x.tolist(), "y": (rng.normal(0.0, 1.0, per_series) * np.e).tolist(), "bandwidth": 50.0, "curve": {"points": 2}}
        for _ in range(settings.max_batch_series)
    ]
    body = json.dumps({"series": series}).encode()
    assert len(body) <= settings.max_body_bytes
    response = api.post("/v1/smooth/batch", content=body, headers={"content-type": "application/json"})
    assert response.status_code == 200, response.text[:500]
    results = response.json()["results"]
    assert len(results) == settings.max_batch_series
    problems = [slot["problem"] for slot in results if "problem" in slot]
    assert not problems, problems[:2]
    assert all(len(slot["curve"]["x"]) == 2 for slot in results)
