"""The client against a real ``bandwise serve`` process on loopback, and the README example.

The README example is taken from the "Python client" section of the repository's
README.md (or from the Markdown file named by ``BANDWISE_README``, for checking a
draft) and run unchanged in a fresh interpreter, pointed at the live server
through the ``BANDWISE_URL`` and ``BANDWISE_API_KEY`` variables it reads.
"""

from __future__ import annotations

import asyncio
import os
import re
import subprocess
import sys
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from estimators.demo import cold_store
from service.client import AsyncBandwiseClient, BandwiseClient, PayloadTooLarge, RetryPolicy, SmoothResult, Unauthorized, ValidationFailed

from .conftest import LiveServer

pytestmark = pytest.mark.system

REPO = Path(__file__).resolve().parents[2]
DEMO = cold_store()
RETRY = RetryPolicy(attempts=3, backoff=0.05, total=10.0)
SMOOTH_OPTIONS: dict[str, Any] = {
    "kernel": "biweight",
    "degree": 1,
    "curve": {"points": 40},
    "predict_at": [0.0, 12.5, 35.0],
    "bands": {"method": "wild_bootstrap", "replicates": 50, "seed": 7},
    "include_fitted": True,
}
BATCH = [
    {"x": DEMO.x, "y": DEMO.y, "bandwidth": 1.5, "curve": {"points": 10}},
    {"x": DEMO.x[:200], "y": DEMO.y[:200], "kernel": "tricube", "selector": "loocv", "curve": {"at": [5.0, 10.0]}},
    {"x": [2.0, 2.0, 2.0], "y": [30.0, 31.0, 29.5]},
]


def run_everything_sync(server: LiveServer) -> tuple[Any, ...]:
    with BandwiseClient(server.url, api_key=server.api_key, retry=RETRY, timeout=30) as client:
        return (
            client.smooth(DEMO.x, DEMO.y, **SMOOTH_OPTIONS),
            client.bandwidth(DEMO.x, DEMO.y, kernel="biweight", selector="aicc", rule="one_se"),
            client.kernels(),
            client.smooth_batch(BATCH),
        )


async def run_everything_async(server: LiveServer) -> tuple[Any, ...]:
    async with AsyncBandwiseClient(server.url, api_key=server.api_key, retry=RETRY, timeout=30) as client:
        # Concurrently, as an asyncio service would.
        return tuple(
            await asyncio.gather(
                client.smooth(DEMO.x, DEMO.y, **SMOOTH_OPTIONS),
                client.bandwidth(DEMO.x, DEMO.y, kernel="biweight", selector="aicc", rule="one_se"),
                client.kernels(),
                client.smooth_batch(BATCH),
            )
        )


def test_every_method_sync_and_async_agree(live_server: LiveServer) -> None:
    sync = run_everything_sync(live_server)
    asynchronous = asyncio.run(run_everything_async(live_server))
    assert sync == asynchronous
    smooth, selection, kernels, batch = sync
    assert isinstance(smooth, SmoothResult)
    assert smooth.diagnostics.kernel == "biweight" and smooth.diagnostics.n == DEMO.x.size
    curve = smooth.curve.arrays()
    assert curve.lower is not None and curve.upper is not None
    ok = ~np.isnan(curve.estimate)
    assert np.all(curve.lower[ok] <= curve.upper[ok])
    assert smooth.diagnostics.bands is not None and smooth.diagnostics.bands.simultaneous is False
    lo, hi = DEMO.x.min(), DEMO.x.max()
    assert smooth.prediction_arrays().extrapolated.tolist() == [bool(p < lo or p > hi) for p in SMOOTH_OPTIONS["predict_at"]]
    assert selection.bandwidth.rule == "one_se" and selection.bandwidth.selector == "aicc"
    assert len(kernels.kernels) == 8
    assert [type(slot).__name__ for slot in batch.results] == ["SmoothResult", "SmoothResult", "ProblemSlot"]
    assert batch.succeeded()[1].curve.x == [5.0, 10.0]
    assert all(r.request_id for r in sync) and len({r.request_id for r in sync + asynchronous}) == 8


def test_errors_from_the_live_server(live_server: LiveServer) -> None:
    with BandwiseClient(live_server.url, retry=RETRY) as client, pytest.raises(Unauthorized) as info:
        client.kernels()
    assert info.value.status == 401 and info.value.request_id
    n = 100_000  # 1.6 MB as Arrow columns (two float64 columns), 3.8 MB as JSON: above the 1 MiB limit of this server
    x = np.linspace(-5.0, 30.0, n)
    with BandwiseClient(live_server.url, api_key=live_server.api_key, retry=RETRY) as client:
        with pytest.raises(PayloadTooLarge) as too_large:
            client.smooth(x, 25.0 + 0.5 * x)
        assert too_large.value.status == 413 and too_large.value.attempts == 1
        # The connection is still usable afterwards.
        assert len(client.kernels().kernels) == 8


def readme_example() -> str:
    """The first python block of the README's "Python client" section."""
    sources = [REPO / "README.md"]
    if os.environ.get("BANDWISE_README"):
        sources.insert(0, Path(os.environ["BANDWISE_README"]))
    for source in sources:
        if not source.exists():
            continue
        text = source.read_text(encoding="utf-8")
        section = re.search(r"^## Python client\n(.*?)(?=^## |\Z)", text, re.M | re.S)
        if section:
            block = re.search(r"^```python\n(.*?)^```", section.group(1), re.M | re.S)
            if block:
                return block.group(1)
    pytest.skip(f"no '## Python client' section with a python block in {', '.join(str(s.name) for s in sources)}")


def test_readme_example_runs_as_written(live_server: LiveServer, tmp_path: Path) -> None:
    code = readme_example()
    env = {**os.environ, "BANDWISE_URL": live_server.url, "BANDWISE_API_KEY": live_server.api_key, "PYTHONIOENCODING": "utf-8"}
    done = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, env=env, capture_output=True, text=True, timeout=60, encoding="utf-8")
    assert done.returncode == 0, done.stderr[-3000:]
    out = done.stdout
    # The same call made here must report the same bandwidth the example printed.
    with BandwiseClient(live_server.url, api_key=live_server.api_key) as client:
        expected = client.smooth(DEMO.x, DEMO.y, kernel="gaussian", predict_at=[0.0, 15.0, 35.0])
    assert f"bandwidth {expected.bandwidth.value:.2f} °C, chosen by gcv" in out
    assert out.count("(extrapolated") == sum(p.extrapolated for p in expected.predictions) == 2
    for warning in expected.warnings:
        assert f"caution [{warning.code}]" in out
    # The refused call printed an actionable message naming both lengths.
    assert f"y has {DEMO.x.size - 1} values but x has {DEMO.x.size}" in out
    with pytest.raises(ValidationFailed):
        BandwiseClient(live_server.url).smooth(DEMO.x, DEMO.y[:-1])
