"""The service benchmark's comparison servers answer the requests they are timed on.

A comparison server that refuses the benchmark's request (a 422 in a few
microseconds) would make every ratio against it meaningless, so each one is
checked in process (httpx with the ASGI transport) against the answer the
service's own handler gives for the same body.
"""

from __future__ import annotations

from pathlib import Path

import anyio
import httpx
import orjson
import pytest

from service.contract.jobs import Job
from service.runtime.settings import Settings
from service.worker.handlers import JobContext, run_job

from .bench_service import _data, bare_app, raw_app, threaded_app


def _body(kernel: str) -> bytes:
    x, y = _data(500, seed=1)
    return orjson.dumps({"x": x, "y": y, "bandwidth": 1.5, "kernel": kernel}, option=orjson.OPT_SERIALIZE_NUMPY)


def _service_answer(body: bytes) -> bytes:
    settings = Settings()
    outcome = run_job(Job("smooth", body), JobContext(settings.limits(), settings.gzip_min_bytes, settings.gzip_level))
    assert outcome.status == 200, outcome.body[:300]
    return outcome.body


async def _post(app: object, body: bytes) -> httpx.Response:
    async with httpx.AsyncClient(transport=httpx.ASGITransport(app=app), base_url="http://bench.test") as client:
        return await client.post("/v1/smooth", content=body, headers={"content-type": "application/json"})


@pytest.mark.parametrize("kernel", ["gaussian", "epanechnikov"])
def test_threaded_comparison_computes_the_same_answer_as_the_service(kernel: str) -> None:
    body = _body(kernel)
    response = anyio.run(_post, threaded_app(), body)
    assert response.status_code == 200, response.text[:300]
    assert orjson.loads(response.content) == orjson.loads(_service_answer(body))


@pytest.mark.parametrize("make", [bare_app, raw_app], ids=["bare", "raw"])
def test_fixed_body_comparisons_accept_the_request_and_return_the_answer_size(make: object, tmp_path: Path) -> None:
    body = _body("gaussian")
    answer = _service_answer(body)
    path = tmp_path / "answer.json"
    path.write_bytes(answer)
    response = anyio.run(_post, make(str(path)), body)  # type: ignore[operator]
    assert response.status_code == 200, response.text[:300]
    assert response.content == answer
