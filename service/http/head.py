"""``HEAD`` wherever ``GET`` is served (RFC 9110, 9.3.2): the ``GET`` handler answers, its body is dropped.

Monitoring probes and caches send ``HEAD``; FastAPI's ``GET`` routes answer
it with 405.  This middleware runs the request as ``GET`` and passes on the
status and header fields (``Content-Length`` included, as the ``GET`` would
send it) without the content.  It sits inside the logging middleware, so the
request is still logged and counted as ``HEAD``.
"""

from __future__ import annotations

from starlette.types import ASGIApp, Message, Receive, Scope, Send


class HeadAsGetMiddleware:
    """Answer ``HEAD`` requests with the headers of the same ``GET`` request."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http" or scope["method"] != "HEAD":
            await self.app(scope, receive, send)
            return

        async def send_without_content(message: Message) -> None:
            if message["type"] == "http.response.body":
                if message.get("more_body", False):
                    return
                message = {"type": "http.response.body", "body": b"", "more_body": False}
            await send(message)

        as_get = {**scope, "method": "GET"}
        try:
            await self.app(as_get, receive, send_without_content)
        finally:
            if "route" in as_get:  # the matched route, which the logging middleware labels the request with
                scope["route"] = as_get["route"]
