"""Write the example requests and record their responses from the real app.

Run from the repository root::

    python openapi_examples/generate.py

Requests are built from the invented Harbour Street demo data
(``estimators.demo``).  Responses are recorded by sending each request to an
in-process app (real worker processes, real ``estimators``), so they are a
regression contract: ``tests/service/test_examples.py`` replays every request
and compares the answer with the recorded file field by field.  Re-run this
script when the numerics change on purpose, and review the diff.
"""

from __future__ import annotations

import asyncio
import json
import sys
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

HOUR_MS = 3_600_000.0
NOTE = (
    " The noise is sent as independent: the daily cycle moves more between hourly readings than the noise does,"
    " which the difference-based test of noise auto would read as correlated noise."
)


def _cold(step: int) -> tuple[list[float], list[float]]:
    from estimators.demo import cold_store

    d = cold_store()
    return d.x[::step].tolist(), d.y[::step].tolist()


def _depot(hours: int) -> tuple[list[float], list[float]]:
    from estimators.demo import parcel_depot

    d = parcel_depot()
    return d.x[:hours].tolist(), d.y[:hours].tolist()


def _depot_times(first: int, last: int) -> tuple[list[str], list[float | None]]:
    """Parcel depot readings ``first:last`` with x as RFC 3339 date-times (UTC) and two counts missing (null)."""
    import numpy as np

    from estimators.demo import parcel_depot

    d = parcel_depot()
    stamps = np.datetime_as_string(d.x[first:last].astype("int64").astype("datetime64[ms]"), unit="s", timezone="UTC").tolist()
    counts: list[float | None] = d.y[first:last].tolist()
    counts[5] = counts[6] = None  # the scanner dropped two hourly counts
    return stamps, counts


def build() -> list[dict[str, Any]]:
    """The examples: index entry plus request body each."""
    cx, cy = _cold(12)
    dx, dy = _depot(168)
    tx, ty = _depot_times(340, 460)
    wx, wy = _cold(1)
    wx, wy = wx[:672], wy[:672]
    return [
        {
            "name": "fixed_bandwidth",
            "path": "/v1/smooth",
            "status": 200,
            "summary": "Cold store, fixed bandwidth",
            "description": "Compressor power (kW) against outdoor temperature (°C), every third hour of the three weeks; Epanechnikov kernel, local linear, bandwidth 2.5 °C, curve at 25 points.",
            "request": {"x": cx, "y": cy, "kernel": "epanechnikov", "degree": 1, "bandwidth": 2.5, "curve": {"points": 25}},
        },
        {
            "name": "automatic_with_bands",
            "path": "/v1/smooth",
            "status": 200,
            "summary": "Cold store, automatic bandwidth with bootstrap bands",
            "description": "Bandwidth chosen by GCV over 15 candidates; 95 % pointwise wild-bootstrap bands from 200 replicates (seed 1). The answer carries the pointwise_bands caution.",
            "request": {"x": cx, "y": cy, "bandwidth": "auto", "selector": "gcv", "candidate_count": 15, "curve": {"points": 20}, "bands": {"method": "wild_bootstrap", "level": 0.95, "replicates": 200, "seed": 1}},
        },
        {
            "name": "predictions_with_extrapolation",
            "path": "/v1/smooth",
            "status": 200,
            "summary": "Cold store, predictions including extrapolation",
            "description": "Predicted compressor power at five outdoor temperatures with analytic bands and prediction intervals; 30 °C and 34 °C lie beyond the hottest reading and are flagged extrapolated.",
            "request": {"x": cx, "y": cy, "bandwidth": 2.0, "curve": {"points": 10}, "predict_at": [10.0, 18.0, 24.0, 30.0, 34.0], "bands": {"method": "analytic", "level": 0.9}},
        },
        {
            "name": "batch",
            "path": "/v1/smooth/batch",
            "status": 200,
            "summary": "Batch: cold store, parcel depot, and one broken series",
            "description": "Three series in one call. The third has one y value too few, so its slot holds a problem while the other two are answered." + NOTE,
            "request": {
                "series": [
                    {"x": cx, "y": cy, "bandwidth": 2.5, "curve": {"points": 12}},
                    {"x": dx, "y": dy, "bandwidth": 3 * HOUR_MS, "noise": "independent", "curve": {"points": 12}},
                    {"x": cx[:10], "y": cy[:9], "bandwidth": 2.5},
                ]
            },
        },
        {
            "name": "validation_error",
            "path": "/v1/smooth",
            "status": 422,
            "summary": "Validation error: every offending field listed",
            "description": "A typo in a field name, a negative bandwidth and a level given as a percentage: the 422 problem lists all three.",
            "request": {"x": cx[:6], "y": cy[:6], "bandwidth": -2.5, "kernal": "gaussian", "bands": {"level": 95}},
        },
        {
            "name": "epoch_ms_timestamps",
            "path": "/v1/smooth",
            "status": 200,
            "summary": "Parcel depot, epoch-millisecond timestamps",
            "description": "One week of hourly parcel counts; x is epoch milliseconds, so the bandwidth of three hours is 10,800,000 ms. The last prediction is one hour past the data and is flagged extrapolated." + NOTE,
            "request": {"x": dx, "y": dy, "bandwidth": 3 * HOUR_MS, "kernel": "gaussian", "noise": "independent", "curve": {"points": 28}, "predict_at": [dx[0] + 34 * HOUR_MS, dx[-1] + HOUR_MS]},
        },
        {
            "name": "time_axis_gap",
            "path": "/v1/smooth",
            "status": 200,
            "summary": "Parcel depot, RFC 3339 timestamps, a 31-hour outage and two missing counts",
            "description": "x as RFC 3339 date-times, a bandwidth of three hours as an ISO 8601 duration (answered in ms and as a duration), two null counts left out "
            "(missing_values), the scanner outage found as a gap: the curve is null inside it and the prediction there is flagged in_gap (data_gap)." + NOTE,
            "request": {"x": tx, "y": ty, "bandwidth": "PT3H", "noise": "independent", "curve": {"points": 24}, "predict_at": ["2025-06-17T12:00:00Z", "2025-06-19T06:00:00+02:00"], "bands": {"method": "analytic"}},
        },
        {
            "name": "robust_anomalies",
            "path": "/v1/smooth",
            "status": 200,
            "summary": "Cold store, robust fit with anomalies",
            "description": "The first week of 15-minute readings (672), defrost spikes included: a robust fit (spikes left out of the curve, the bandwidth criterion and the noise scale) and the readings outside its 99.9 % prediction interval, each with its position in the request.",
            "request": {"x": wx, "y": wy, "robust": True, "anomalies": {"level": 0.999}, "curve": {"points": 20}},
        },
        {
            "name": "counts",
            "path": "/v1/smooth",
            "status": 200,
            "summary": "Parcel depot as counts",
            "description": "One week of hourly parcel counts fitted as counts (family poisson): the estimate and the analytic 95 % band stay above zero, also in the quiet night hours; bandwidth two hours (7,200,000 ms).",
            "request": {"x": dx, "y": dy, "family": "poisson", "bandwidth": 2 * HOUR_MS, "curve": {"points": 28}, "bands": {"method": "analytic"}},
        },
        {
            "name": "bandwidth_selection",
            "path": "/v1/bandwidth",
            "status": 200,
            "summary": "Cold store, bandwidth selection only",
            "description": "Leave-one-out cross-validation over 12 candidates; every candidate's score is returned.",
            "request": {"x": cx, "y": cy, "kernel": "epanechnikov", "selector": "loocv", "candidate_count": 12},
        },
    ]


async def _record(examples: list[dict[str, Any]]) -> list[Any]:
    import httpx

    from service.app import create_app
    from service.runtime.settings import Settings

    app = create_app(Settings(workers=1))
    async with app.router.lifespan_context(app):
        assert await app.state.service.pool.wait_ready(60.0)
        transport = httpx.ASGITransport(app=app)
        async with httpx.AsyncClient(transport=transport, base_url="http://bandwise.example") as client:
            out = []
            for ex in examples:
                r = await client.post(ex["path"], json=ex["request"], headers={"x-request-id": f"example-{ex['name']}"})
                if r.status_code != ex["status"]:
                    raise SystemExit(f"{ex['name']}: expected {ex['status']}, got {r.status_code}: {r.text[:300]}")
                out.append(r.json())
            return out


def _dump(path: Path, data: Any) -> None:
    path.write_text(json.dumps(data, indent=1, ensure_ascii=False) + "\n", encoding="utf-8")


def main() -> None:
    examples = build()
    responses = asyncio.run(_record(examples))
    index = []
    for ex, response in zip(examples, responses, strict=True):
        _dump(HERE / f"{ex['name']}.request.json", ex["request"])
        _dump(HERE / f"{ex['name']}.response.json", response)
        index.append({k: ex[k] for k in ("name", "path", "status", "summary", "description")} | {"method": "post"})
    _dump(HERE / "index.json", index)
    print(f"wrote {len(examples)} examples to {HERE}")


if __name__ == "__main__":
    main()
