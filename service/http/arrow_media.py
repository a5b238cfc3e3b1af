"""Which media type a request body has: JSON, or an Apache Arrow IPC stream on the routes that take one.

The HTTP process only recognises the media type; the worker decodes the stream
(:mod:`service.worker.arrow_codec`), so this process never loads pyarrow.
"""

from __future__ import annotations

from starlette.requests import Request

from service.contract.arrow_layout import ARROW_KINDS, ARROW_STREAM, is_arrow
from service.contract.errors import ProblemError
from service.http.limits import check_json_content_type, check_uncompressed


def body_media_type(request: Request, kind: str) -> str:
    """``ARROW_STREAM`` for an Arrow body on a route that takes one, else ``application/json`` after the JSON media-type checks.

    Raises
    ------
    ProblemError
        415 for an Arrow body on a route without Arrow support, or a compressed one;
        the JSON checks' 415 for a body that is neither.
    """
    if not is_arrow(request.headers.get("content-type")):
        check_json_content_type(request)
        return "application/json"
    if kind not in ARROW_KINDS:
        raise ProblemError("unsupported-media-type", "Arrow bodies are taken by POST /v1/smooth and /v1/bandwidth only; send this request as JSON.")
    check_uncompressed(request)
    return ARROW_STREAM
