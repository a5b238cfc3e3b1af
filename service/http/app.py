"""The HTTP app: ``build_app(settings, entry)`` builds one FastAPI app with its own worker pool.

:func:`service.app.create_app` calls it with the worker side's entry point.
"""

from __future__ import annotations

import logging
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager
from typing import Any

import orjson
from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import Response
from fastapi.routing import APIRoute
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.middleware.cors import CORSMiddleware
from starlette.staticfiles import StaticFiles

from service import __version__
from service.contract.errors import PROBLEM_MEDIA_TYPE, STATUS_PROBLEMS, ProblemError, problem_document, reason_phrase
from service.contract.field_errors import field_errors
from service.contract.jobs import WorkerEntry
from service.http.core import Service
from service.http.docs_text import API_DESCRIPTION
from service.http.head import HeadAsGetMiddleware
from service.http.hot_routes import HOT_KINDS, HotRoutesMiddleware
from service.http.observability import ObservabilityMiddleware, request_id_of
from service.http.openapi import build_openapi
from service.http.routes import install_routes
from service.http.static_files import STATIC_DIR, swagger_ui_dir
from service.runtime.logs import flush_access_log
from service.runtime.settings import Settings

log = logging.getLogger("bandwise.app")

def _problem_response(request: Request, status: int, document: dict[str, Any], headers: dict[str, str] | None = None) -> Response:
    request.state.problem = str(document.get("type", "")).removeprefix("/problems/")
    return Response(orjson.dumps(document), status_code=status, media_type=PROBLEM_MEDIA_TYPE, headers=headers)


async def _on_problem(request: Request, exc: Exception) -> Response:
    assert isinstance(exc, ProblemError)
    if exc.slug == "internal-error":
        log.error("internal error", extra={"fields": {"request_id": request_id_of(request.scope), "detail": exc.detail}})
    doc = problem_document(exc.slug, exc.detail, instance=request.url.path, request_id=request_id_of(request.scope), errors=exc.errors)
    return _problem_response(request, exc.status, doc, exc.headers)


async def _on_http_error(request: Request, exc: Exception) -> Response:
    assert isinstance(exc, StarletteHTTPException)
    slug = STATUS_PROBLEMS.get(exc.status_code)
    detail = exc.detail if isinstance(exc.detail, str) else reason_phrase(exc.status_code)
    if exc.status_code == 404:
        detail = f"No resource at {request.url.path}. GET /docs lists the API."
    elif exc.status_code == 405:
        detail = f"{request.method} is not allowed on {request.url.path}; see the Allow header."
    if slug is not None:
        doc = problem_document(slug, detail, instance=request.url.path, request_id=request_id_of(request.scope))
    else:
        doc = {"type": "about:blank", "title": reason_phrase(exc.status_code), "status": exc.status_code, "detail": detail, "instance": request.url.path, "request_id": request_id_of(request.scope)}
    return _problem_response(request, exc.status_code, doc, dict(exc.headers or {}))


async def _on_request_validation(request: Request, exc: Exception) -> Response:
    assert isinstance(exc, RequestValidationError)
    doc = problem_document("validation-error", "The request has invalid parameters; see errors.", instance=request.url.path, request_id=request_id_of(request.scope), errors=field_errors(list(exc.errors())))
    return _problem_response(request, 422, doc)


class ProblemCORSMiddleware(CORSMiddleware):
    """CORS allow-list whose refused preflights are problem documents like every other error."""

    def preflight_response(self, request_headers: Any) -> Response:
        response = super().preflight_response(request_headers)
        if response.status_code == 400:
            detail = bytes(response.body).decode("utf-8", "replace") + " (not in BANDWISE_CORS_ORIGINS or not an allowed method/header)."
            body = orjson.dumps({"type": "/problems/malformed-request", "title": reason_phrase(400), "status": 400, "detail": "CORS preflight refused: " + detail})
            headers = {k: v for k, v in response.headers.items() if k.lower() not in ("content-length", "content-type")}
            return Response(body, status_code=400, media_type=PROBLEM_MEDIA_TYPE, headers=headers)
        return response


def build_app(settings: Settings, entry: WorkerEntry) -> FastAPI:
    """Build the Bandwise app.

    Parameters
    ----------
    settings : Settings
        Limits, pool size, security options.
    entry : WorkerEntry
        How the pool starts a worker process.

    Returns
    -------
    FastAPI
        The app; ``app.state.service`` is its :class:`~service.http.core.Service`.
        The worker pool starts and stops with the app's lifespan.
    """
    service = Service(settings, entry)

    @asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        await service.start()
        try:
            yield
        finally:
            await service.stop()
            flush_access_log()

    app = FastAPI(
        title="Bandwise",
        version=__version__,
        description=API_DESCRIPTION,
        docs_url=None,
        redoc_url=None,
        openapi_url="/openapi.json",
        lifespan=lifespan,
        openapi_tags=[
            {"name": "smoothing", "description": "Fits, bands, predictions and bandwidth selection."},
            {"name": "reference", "description": "Kernels and their constants."},
            {"name": "demo", "description": "Invented Harbour Street demo data."},
            {"name": "operations", "description": "Health, readiness and metrics."},
        ],
    )
    app.state.service = service
    # no trailing-slash redirects: their Location would be built from the client's Host header
    app.router.redirect_slashes = False
    app.state.settings = settings
    app.add_exception_handler(ProblemError, _on_problem)
    app.add_exception_handler(StarletteHTTPException, _on_http_error)
    app.add_exception_handler(RequestValidationError, _on_request_validation)
    routers = install_routes(app, service)
    app.mount("/static", StaticFiles(directory=STATIC_DIR, check_dir=False), name="static")
    assets = swagger_ui_dir()
    if assets is not None:
        app.mount("/docs/assets", StaticFiles(directory=assets), name="docs-assets")
    app.openapi = lambda: build_openapi(app)  # type: ignore[method-assign]
    hot = {r.path: r for router in routers for r in router.routes if isinstance(r, APIRoute) and r.path in HOT_KINDS and "POST" in (r.methods or ())}
    if set(hot) != set(HOT_KINDS):  # the direct path must not answer for a route that does not exist
        raise RuntimeError(f"numerical POST routes not registered: {sorted(set(HOT_KINDS) - set(hot))}")
    app.add_middleware(HeadAsGetMiddleware)  # innermost: HEAD is logged and counted as HEAD
    app.add_middleware(HotRoutesMiddleware, service=service, routes=hot, on_problem=_on_problem)  # inside CORS and logging
    if settings.cors_origins:
        app.add_middleware(
            ProblemCORSMiddleware,
            allow_origins=settings.cors_origins,
            allow_methods=["GET", "POST"],
            allow_headers=["Authorization", "Content-Type", "X-Request-ID"],
            expose_headers=["X-Request-ID", "Retry-After"],
            max_age=600,
        )
    app.add_middleware(ObservabilityMiddleware, metrics=service.metrics, counters=service.counters, access=settings.access_log)
    return app
