"""A direct path for the numerical POST routes, in front of FastAPI's router.

``POST /v1/smooth``, ``/v1/smooth/batch`` and ``/v1/bandwidth`` take the raw
body and hand it to a worker; FastAPI's route matching, dependency solving
and wrapper layers add nothing to that but time on every small request.
This middleware answers those three exactly as their FastAPI routes do (same
guard, same submit, same problem documents) and lets everything else,
including other methods on the same paths and requests under a root path,
through to FastAPI.  The routes stay registered, so the OpenAPI schema,
``405`` answers and the metrics' route labels are unchanged.
"""

from __future__ import annotations

from collections.abc import Awaitable, Callable, Mapping

from starlette.requests import Request
from starlette.responses import Response
from starlette.routing import BaseRoute
from starlette.types import ASGIApp, Receive, Scope, Send

from service.contract.errors import ProblemError
from service.http.core import Service

HOT_KINDS = {"/v1/smooth": "smooth", "/v1/smooth/batch": "batch", "/v1/bandwidth": "bandwidth"}

ProblemHandler = Callable[[Request, Exception], Awaitable[Response]]


class HotRoutesMiddleware:
    """Answer the numerical POST routes without going through the router.

    Parameters
    ----------
    app : ASGIApp
        The rest of the application (FastAPI's exception layer and router).
    service : Service
        Does the work, as for the routed endpoints.
    routes : dict
        For each path of :data:`HOT_KINDS`, the registered route object, set as
        ``scope["route"]`` so logs and metrics name the route template as for
        routed requests.
    on_problem : callable
        The app's handler turning a :class:`ProblemError` into a response.
    """

    def __init__(self, app: ASGIApp, service: Service, routes: Mapping[str, BaseRoute], on_problem: ProblemHandler) -> None:
        self.app = app
        self.service = service
        self.targets = {path: (kind, routes[path]) for path, kind in HOT_KINDS.items()}
        self.on_problem = on_problem

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] == "http" and scope["method"] == "POST" and not scope.get("root_path"):
            target = self.targets.get(scope["path"])
            if target is not None:
                kind, scope["route"] = target
                request = Request(scope, receive, send)
                try:
                    response = await self.service.handle(request, kind)
                except ProblemError as exc:
                    response = await self.on_problem(request, exc)
                await response(scope, receive, send)
                return
        await self.app(scope, receive, send)
