"""Each request's memory is modelled from its size and refused (422) before work starts when over the budget.

The figures of the model come from measurements (docs/reliability.md); here the
checks are that the refusal happens, names its setting, costs no fitting, and
that the documented limits taken all at once still fit in the default 1 GiB.
"""

from __future__ import annotations

import time

import orjson

from service.contract.jobs import Job
from service.runtime.settings import Settings
from service.worker.handlers import JobContext, run_job
from service.worker.memory import DRAW_BYTES, MIB, request_bytes

SMALL = {"x": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0], "y": [1.0, 3.0, 2.0, 5.0, 4.0, 6.0], "bandwidth": 1.5}


def _context(**overrides: int) -> JobContext:
    settings = Settings(**overrides)
    return JobContext(settings.limits(), settings.gzip_min_bytes, settings.gzip_level)


def test_bootstrap_request_over_a_small_budget_is_refused_before_work() -> None:
    n = 200_000  # 200,000 points and 5,000 replicates: minutes of work if it started
    body = orjson.dumps({"x": [i * 0.5 for i in range(n)], "y": [float(i % 9) for i in range(n)], "bands": {"replicates": 5000}})
    started = time.perf_counter()
    outcome = run_job(Job("smooth", body), _context(request_memory_bytes=128 * MIB))
    elapsed = time.perf_counter() - started
    assert outcome.status == 422
    doc = orjson.loads(outcome.body)
    assert doc["type"] == "/problems/memory-budget-exceeded" and "BANDWISE_REQUEST_MEMORY_BYTES" in doc["detail"]
    print(f"refused in {elapsed:.2f} s")


def test_the_same_request_without_bands_fits_and_runs() -> None:
    outcome = run_job(Job("smooth", orjson.dumps(SMALL)), _context(request_memory_bytes=64 * MIB))
    assert outcome.status == 200


def test_batch_series_over_the_budget_get_the_problem_in_their_slot() -> None:
    big = {**SMALL, "bands": {"replicates": 200}}
    body = orjson.dumps({"series": [SMALL, big]})
    outcome = run_job(Job("batch", body, path="/v1/smooth/batch"), _context(request_memory_bytes=64 * MIB))
    assert outcome.status == 200
    results = orjson.loads(outcome.body)["results"]
    assert "curve" in results[0] and results[1]["problem"]["type"] == "/problems/memory-budget-exceeded"


def test_every_documented_limit_at_once_fits_the_default_budget() -> None:
    """The default limits (README) taken together: 2,000,000 points (about 38 bytes of JSON each for x and y),
    10,000 curve points, 100,000 predict_at values and bootstrap bands stay within 1 GiB."""
    s = Settings()
    body = 38 * s.max_points + 20 * s.max_predict_points
    needed = request_bytes(body, s.max_points, s.max_curve_points + s.max_predict_points, True)
    assert needed <= s.request_memory_bytes, f"{needed / MIB:.0f} MiB"
    assert DRAW_BYTES < s.request_memory_bytes
