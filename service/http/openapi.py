"""The OpenAPI document: FastAPI's generated paths plus request schemas, problem media types and examples."""

from __future__ import annotations

from typing import Any

from fastapi import FastAPI
from fastapi.openapi.utils import get_openapi
from pydantic import BaseModel

from service.contract.arrow_layout import ARROW_STREAM
from service.contract.errors import PROBLEM_MEDIA_TYPE, PROBLEM_TYPES
from service.contract.field_errors import FIELD_ERROR_CODES
from service.contract.models import BandwidthRequest, BatchRequest, SmoothRequest
from service.contract.warnings import WARNING_CODES
from service.http.examples import load_examples

#: paths that take an Arrow IPC stream and answer one on request (``Accept``)
ARROW_PATHS = ("/v1/smooth", "/v1/bandwidth")
_ARROW_REQUEST = (
    "An Apache Arrow IPC stream: columns x, y and optionally weights (numbers; x may be an Arrow timestamp), the other "
    "request fields as one JSON object in the schema metadata key bandwise.request. Same limits and answers as JSON."
)
_ARROW_ANSWER = "Sent when the request's Accept names this type: the answer's arrays as Arrow columns named by JSON path, the rest as JSON metadata (docs/api.md)."

REQUEST_MODELS: dict[str, type[BaseModel]] = {
    "/v1/smooth": SmoothRequest,
    "/v1/smooth/batch": BatchRequest,
    "/v1/bandwidth": BandwidthRequest,
}


def _add_schema(components: dict[str, Any], model: type[BaseModel]) -> None:
    schema = model.model_json_schema(ref_template="#/components/schemas/{model}")
    for name, definition in schema.pop("$defs", {}).items():
        components.setdefault(name, definition)
    components[model.__name__] = schema


def build_openapi(app: FastAPI) -> dict[str, Any]:
    """Generate the document once; FastAPI caches it on ``app.openapi_schema``."""
    if app.openapi_schema:
        return app.openapi_schema
    doc = get_openapi(title=app.title, version=app.version, description=app.description, routes=app.routes, tags=app.openapi_tags)
    components = doc.setdefault("components", {}).setdefault("schemas", {})
    for path, model in REQUEST_MODELS.items():
        _add_schema(components, model)
        operation = doc["paths"].get(path, {}).get("post")
        if operation is not None:
            operation["requestBody"] = {
                "required": True,
                "content": {"application/json": {"schema": {"$ref": f"#/components/schemas/{model.__name__}"}}},
            }
    for path in ARROW_PATHS:
        operation = doc["paths"].get(path, {}).get("post")
        if operation is None:
            continue
        binary = {"type": "string", "format": "binary", "contentMediaType": ARROW_STREAM}
        operation["requestBody"]["content"][ARROW_STREAM] = {"schema": binary, "description": _ARROW_REQUEST}
        ok = operation.setdefault("responses", {}).setdefault("200", {"description": "Successful Response"})
        ok.setdefault("content", {})[ARROW_STREAM] = {"schema": binary, "description": _ARROW_ANSWER}
    for methods in doc["paths"].values():
        for operation in methods.values():
            for status, response in operation.get("responses", {}).items():
                content = response.get("content")
                if status.isdigit() and int(status) >= 400 and content and "application/json" in content:
                    content[PROBLEM_MEDIA_TYPE] = content.pop("application/json")
    for example in load_examples():
        operation = doc["paths"].get(example.path, {}).get(example.method)
        if operation is None:
            continue
        body = operation.get("requestBody", {}).get("content", {}).get("application/json")
        if body is not None:
            body.setdefault("examples", {})[example.name] = {"summary": example.summary, "description": example.description, "value": example.request}
        if example.response is not None:
            response = operation.setdefault("responses", {}).setdefault(str(example.status), {"description": example.summary})
            media = PROBLEM_MEDIA_TYPE if example.status >= 400 else "application/json"
            slot = response.setdefault("content", {}).setdefault(media, {})
            slot.setdefault("examples", {})[example.name] = {"summary": example.summary, "value": example.response}
    doc["x-problem-types"] = {t.uri: {"status": t.status, "title": t.title, "description": t.description} for t in PROBLEM_TYPES.values()}
    doc["x-warning-codes"] = dict(WARNING_CODES)
    doc["x-field-error-codes"] = dict(FIELD_ERROR_CODES)
    app.openapi_schema = doc
    return doc
