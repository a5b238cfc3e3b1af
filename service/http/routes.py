"""HTTP routes. Each numerical route reads the raw body and hands it to a worker."""

from __future__ import annotations

from typing import Any

import orjson
from fastapi import APIRouter, FastAPI, Request
from fastapi.responses import FileResponse, HTMLResponse, PlainTextResponse, Response

from service.contract.errors import PROBLEM_TYPES, ProblemError
from service.contract.models import (
    BandwidthResponse,
    BatchResponse,
    DemoData,
    DemoList,
    Health,
    KernelsResponse,
    Problem,
    Readiness,
    SmoothResponse,
)
from service.http.core import Service
from service.http.docs_text import BANDWIDTH_DESCRIPTION, BATCH_DESCRIPTION, SMOOTH_DESCRIPTION
from service.http.limits import retry_after
from service.http.ndjson import NDJSON_MEDIA_TYPE
from service.http.static_files import docs_html, index_file


def _problems(*statuses: int) -> dict[int | str, dict[str, Any]]:
    text = {
        400: "Malformed JSON body.",
        401: "Missing or wrong API key (only when keys are configured).",
        404: "Not found.",
        408: "The body did not arrive within the deadline.",
        413: "Body larger than BANDWISE_MAX_BODY_BYTES.",
        415: "Body not declared as JSON.",
        422: "Invalid fields (listed in `errors`), or data that cannot be fitted as asked.",
        429: "Per-client rate limit exceeded; see Retry-After.",
        503: "Overloaded, deadline exceeded or shutting down; see Retry-After.",
    }
    return {s: {"model": Problem, "description": text[s]} for s in statuses}


#: one line of the streamed batch answer (application/x-ndjson): the series' index and its slot
BATCH_LINE_SCHEMA: dict[str, Any] = {
    "title": "BatchLine",
    "type": "object",
    "description": "One line of the streamed batch answer: `index` (the series' position in the request) with the fields of a smooth answer, or with `problem` (RFC 9457) when that series failed.",
    "required": ["index"],
    "properties": {"index": {"type": "integer", "minimum": 0}, "problem": {"$ref": "#/components/schemas/Problem"}},
    "additionalProperties": True,
}

POST_PROBLEMS = _problems(400, 401, 408, 413, 415, 422, 429, 503)
GET_PROBLEMS = _problems(401, 429, 503)


def _json(data: Any, status: int = 200, headers: dict[str, str] | None = None) -> Response:
    return Response(orjson.dumps(data), status_code=status, media_type="application/json", headers=headers)


def api_router(service: Service) -> APIRouter:
    """The /v1 routes; each first checks the API key and the rate limit (``service.guard``)."""
    router = APIRouter(prefix="/v1")

    @router.post("/smooth", summary="Smooth one series", description=SMOOTH_DESCRIPTION, response_model=None, responses={200: {"model": SmoothResponse, "description": "The fit."}, **POST_PROBLEMS}, tags=["smoothing"])
    async def smooth(request: Request) -> Response:
        return await service.handle(request, "smooth")

    @router.post("/smooth/batch", summary="Smooth many series", description=BATCH_DESCRIPTION, response_model=None, responses={200: {"model": BatchResponse, "description": "One slot per series; with `Accept: application/x-ndjson`, one line per series as it finishes.", "content": {NDJSON_MEDIA_TYPE: {"schema": BATCH_LINE_SCHEMA}}}, **POST_PROBLEMS}, tags=["smoothing"])
    async def smooth_batch(request: Request) -> Response:
        return await service.handle(request, "batch")

    @router.post("/bandwidth", summary="Select a bandwidth", description=BANDWIDTH_DESCRIPTION, response_model=None, responses={200: {"model": BandwidthResponse, "description": "The chosen bandwidth with every candidate's score."}, **POST_PROBLEMS}, tags=["smoothing"])
    async def bandwidth(request: Request) -> Response:
        return await service.handle(request, "bandwidth")

    @router.get("/kernels", summary="Kernels and their constants", response_model=None, responses={200: {"model": KernelsResponse, "description": "All kernels."}, **GET_PROBLEMS}, tags=["reference"])
    async def kernels(request: Request) -> Response:
        await service.guard(request)
        return await service.submit(request, "kernels", with_body=False)

    @router.get("/demo", summary="List the demo series", response_model=None, responses={200: {"model": DemoList, "description": "The demo series (invented Harbour Street scenario)."}, **GET_PROBLEMS}, tags=["demo"])
    async def demo_list(request: Request) -> Response:
        await service.guard(request)
        return await service.submit(request, "demo_list", with_body=False)

    @router.get("/demo/{name}", summary="One demo series", response_model=None, responses={200: {"model": DemoData, "description": "Data, labels and units."}, **_problems(401, 404, 429, 503)}, tags=["demo"])
    async def demo(request: Request, name: str) -> Response:
        await service.guard(request)
        return await service.submit(request, "demo", params={"name": name}, with_body=False)

    return router


def ops_router(service: Service) -> APIRouter:
    """Health, readiness, metrics, the demo page, docs and problem descriptions."""
    router = APIRouter()

    @router.get("/healthz", summary="Liveness", response_model=Health, tags=["operations"])
    async def healthz() -> Response:
        return _json({"status": "ok"})

    @router.get("/readyz", summary="Readiness", response_model=None, responses={200: {"model": Readiness, "description": "Ready for work."}, **_problems(503)}, tags=["operations"])
    async def readyz(request: Request) -> Response:
        if service.draining:
            raise ProblemError("shutting-down", "This process is draining before it stops.", headers=retry_after(service.settings.retry_after_seconds))
        if not service.ready:
            raise ProblemError("not-ready", "No worker process is ready yet.", headers=retry_after(1))
        return _json({"status": "ready", "workers_ready": service.pool.ready_count, "workers": service.pool.size})

    @router.get("/metrics", summary="Prometheus metrics", response_class=PlainTextResponse, tags=["operations"])
    async def metrics() -> Response:
        return Response(service.metrics.render(), media_type=service.metrics.content_type)

    @router.get("/", include_in_schema=False)
    async def index() -> Response:
        path = index_file()
        if path is None:
            raise ProblemError("not-found", "The demo page is not installed.")
        return FileResponse(path, media_type="text/html")

    @router.get("/docs", include_in_schema=False)
    async def docs() -> Response:
        return HTMLResponse(docs_html())

    @router.get("/problems/{slug}", include_in_schema=False)
    async def problem_type(slug: str) -> Response:
        kind = PROBLEM_TYPES.get(slug)
        if kind is None:
            raise ProblemError("not-found", f"No problem type {slug!r}.")
        return PlainTextResponse(f"{kind.title} ({kind.status})\n\n{kind.description}\n")

    return router


def install_routes(app: FastAPI, service: Service) -> list[APIRouter]:
    """Include the routers in ``app``; returns them (their routes carry full paths)."""
    routers = [api_router(service), ops_router(service)]
    for router in routers:
        app.include_router(router)
    return routers
