"""/openapi.json, /docs (no CDN), the demo page routes."""

from __future__ import annotations

import re

import jsonschema
import pytest

from service.contract.models import SmoothRequest

from .conftest import Harness, problem_ok

ABSOLUTE_URL = re.compile(r"""(?:src|href)\s*=\s*["']?\s*(?:https?:)?//""", re.IGNORECASE)


def test_openapi_lists_every_contract_path(api: Harness) -> None:
    doc = api.get("/openapi.json").json()
    assert doc["openapi"].startswith("3.")
    paths = doc["paths"]
    for path, method in [
        ("/v1/smooth", "post"),
        ("/v1/smooth/batch", "post"),
        ("/v1/bandwidth", "post"),
        ("/v1/kernels", "get"),
        ("/v1/demo", "get"),
        ("/v1/demo/{name}", "get"),
        ("/healthz", "get"),
        ("/readyz", "get"),
        ("/metrics", "get"),
    ]:
        assert method in paths[path], (path, method)
    smooth = paths["/v1/smooth"]["post"]
    assert smooth["requestBody"]["content"]["application/json"]["schema"]["$ref"] == "#/components/schemas/SmoothRequest"
    for status in ("400", "401", "413", "415", "422", "429", "503"):
        assert "application/problem+json" in smooth["responses"][status]["content"], status
    schemas = doc["components"]["schemas"]
    for name in ("SmoothRequest", "BatchRequest", "BandwidthRequest", "SmoothResponse", "BatchResponse", "BandwidthResponse", "Problem", "KernelsResponse"):
        assert name in schemas, name
    assert schemas["SmoothRequest"]["additionalProperties"] is False


def test_openapi_states_the_cautions(api: Harness) -> None:
    doc = api.get("/openapi.json").json()
    text = doc["info"]["description"] + doc["paths"]["/v1/smooth"]["post"]["description"]
    assert "pointwise" in text
    assert "xtrapolat" in text
    assert "implausible" in text


def test_request_schema_accepts_a_valid_request_and_rejects_a_typo(api: Harness) -> None:
    doc = api.get("/openapi.json").json()
    schema = {"$ref": "#/components/schemas/SmoothRequest", "components": doc["components"]}
    resolver_doc = {**schema}
    jsonschema.validate({"x": [1, 2], "y": [3, 4], "bandwidth": "auto", "bands": {"level": 0.9}}, resolver_doc, cls=jsonschema.Draft202012Validator)
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate({"x": [1, 2], "y": [3, 4], "bandwith": 2}, resolver_doc, cls=jsonschema.Draft202012Validator)
    # The schema the docs show is the one the service enforces.
    assert SmoothRequest.model_json_schema()["properties"].keys() == doc["components"]["schemas"]["SmoothRequest"]["properties"].keys()


def test_docs_page_loads_no_asset_from_the_internet(api: Harness) -> None:
    page = api.get("/docs")
    assert page.status_code == 200
    assert page.headers["content-type"].startswith("text/html")
    html = page.text
    assert not ABSOLUTE_URL.search(html), ABSOLUTE_URL.search(html)
    assets = re.findall(r"""(?:src|href)="([^"]+)\"""", html)
    assert "docs/assets/swagger-ui-bundle.js" in assets and "docs/assets/swagger-ui.css" in assets
    for asset in assets:
        response = api.get("/" + asset)
        assert response.status_code == 200, asset
        assert len(response.content) > 100, asset


def test_swagger_ui_licence_is_served(api: Harness) -> None:
    licence = api.get("/docs/assets/LICENSE")
    assert licence.status_code == 200
    assert "Apache License" in licence.text and "Version 2.0" in licence.text


def test_demo_page_and_static_files(api: Harness) -> None:
    index = api.get("/")
    assert index.status_code == 200
    assert index.headers["content-type"].startswith("text/html")
    assert not ABSOLUTE_URL.search(index.text), ABSOLUTE_URL.search(index.text)
    assert api.get("/static/index.html").status_code == 200
    problem_ok(api.get("/static/no-such-file.js"), 404)
