"""GET /v1/kernels (against published constants) and the demo-data endpoints."""

from __future__ import annotations

import math

import numpy as np
import pytest

from estimators.demo import DEMOS
from service.contract.models import DemoData, DemoList, KernelsResponse

from .conftest import Harness

# R(K) = integral K^2 and mu2(K) = integral u^2 K for kernels on their usual scale.
# Source: Wand & Jones (1995), "Kernel Smoothing", Table 2.1 and section 2.7 (values from memory,
# each re-derivable by elementary integration).
PUBLISHED = {
    "gaussian": (1.0 / (2.0 * math.sqrt(math.pi)), 1.0, None),
    "epanechnikov": (3.0 / 5.0, 1.0 / 5.0, 1.0),
    "uniform": (1.0 / 2.0, 1.0 / 3.0, 1.0),
    "triangular": (2.0 / 3.0, 1.0 / 6.0, 1.0),
    "biweight": (5.0 / 7.0, 1.0 / 7.0, 1.0),
    "triweight": (350.0 / 429.0, 1.0 / 9.0, 1.0),
    "tricube": (175.0 / 247.0, 35.0 / 243.0, 1.0),
    "cosine": (math.pi**2 / 16.0, 1.0 - 8.0 / math.pi**2, 1.0),
}


def test_kernels_constants(api: Harness) -> None:
    response = api.get("/v1/kernels")
    assert response.status_code == 200
    doc = response.json()
    KernelsResponse.model_validate(doc)
    by_name = {k["name"]: k for k in doc["kernels"]}
    assert set(by_name) == set(PUBLISHED)
    for name, (roughness, mu2, support) in PUBLISHED.items():
        k = by_name[name]
        assert math.isclose(k["roughness"], roughness, rel_tol=1e-9), name
        assert math.isclose(k["second_moment"], mu2, rel_tol=1e-9), name
        assert k["support"] == support, name
        # AMISE efficiency relative to Epanechnikov (Wand & Jones 1995, section 2.7).
        eff = (math.sqrt(0.2) * 0.6) / (math.sqrt(mu2) * roughness)
        assert math.isclose(k["efficiency"], eff, rel_tol=1e-9), name
        # Canonical bandwidth factor delta_0 = (R / mu2^2)^(1/5) (Marron & Nolan 1988).
        assert math.isclose(k["canonical_factor"], (roughness / mu2**2) ** 0.2, rel_tol=1e-9), name
    # Published efficiency of the gaussian kernel: about 0.951 (Wand & Jones 1995, Table 2.1).
    assert abs(by_name["gaussian"]["efficiency"] - 0.951) < 5e-4


def test_kernels_is_served_again_from_cache(api: Harness) -> None:
    first = api.get("/v1/kernels")
    second = api.get("/v1/kernels")
    assert first.content == second.content


def test_demo_list(api: Harness) -> None:
    response = api.get("/v1/demo")
    assert response.status_code == 200
    doc = response.json()
    DemoList.model_validate(doc)
    names = [d["name"] for d in doc["demos"]]
    assert names == list(DEMOS)
    for entry in doc["demos"]:
        assert entry["n"] == len(DEMOS[entry["name"]]().x)


@pytest.mark.parametrize("name", list(DEMOS))
def test_demo_series(api: Harness, name: str) -> None:
    response = api.get(f"/v1/demo/{name}")
    assert response.status_code == 200
    doc = response.json()
    DemoData.model_validate(doc)
    series = DEMOS[name]()
    np.testing.assert_array_equal(np.array(doc["x"]), series.x)
    np.testing.assert_array_equal(np.array(doc["y"]), series.y)
    for key in ("title", "x_label", "y_label", "x_unit", "y_unit", "description"):
        assert doc[key] == getattr(series, key)


def test_demo_series_smooths(api: Harness) -> None:
    demo = api.get("/v1/demo/cold_store").json()
    response = api.post("/v1/smooth", json={"x": demo["x"], "y": demo["y"], "bandwidth": 1.5, "curve": {"points": 30}})
    assert response.status_code == 200
    estimate = response.json()["curve"]["estimate"]
    assert all(v is not None for v in estimate)
    # Compressor power rises with outdoor temperature in the scenario.
    assert estimate[-1] > estimate[0]
