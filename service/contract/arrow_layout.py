"""Apache Arrow IPC streams on the wire: media type, metadata keys and column names.

Both sides import this module; it holds names only (no pyarrow, no numpy), so the
HTTP process can recognise an Arrow body and hand it to a worker without decoding it.
The layout is documented in ``docs/api.md`` ("Apache Arrow bodies and answers").
"""

from __future__ import annotations

from service.contract.accept import names_media_type

ARROW_STREAM = "application/vnd.apache.arrow.stream"
"""The IANA-registered media type of an Arrow IPC stream."""

REQUEST_METADATA_KEY = "bandwise.request"
"""Schema metadata key of a request stream: the other request fields as one JSON object."""

ANSWER_METADATA_KEY = "bandwise.answer"
"""Schema metadata key of an answer stream: every field that is not an array, as JSON."""

DATA_COLUMNS = ("x", "y", "weights")
"""Columns a request stream may hold; ``x`` and ``y`` are required."""

REQUIRED_COLUMNS = ("x", "y")

ARROW_KINDS = ("smooth", "bandwidth")
"""Job kinds that take an Arrow body and can answer in Arrow."""

SMOOTH_ANSWER_COLUMNS = (
    "bandwidth.candidates",
    "bandwidth.scores",
    "curve.x",
    "curve.estimate",
    "curve.lower",
    "curve.upper",
    "curve.se",
    "curve.band_center",
    "fitted.estimate",
    "fitted.residuals",
    "predictions.x",
    "predictions.estimate",
    "predictions.lower",
    "predictions.upper",
    "predictions.interval_lower",
    "predictions.interval_upper",
    "predictions.extrapolated",
)
"""Columns an answer stream may hold, in this order (each present only when the JSON answer has it)."""


def media_type_of(header: str | None) -> str:
    """The bare, lower-case media type of a Content-Type header (``""`` when absent)."""
    return (header or "").partition(";")[0].strip().lower()


def is_arrow(content_type: str | None) -> bool:
    """Whether a Content-Type header names an Arrow IPC stream."""
    return media_type_of(content_type) == ARROW_STREAM


def accepts_arrow(accept: str | None) -> bool:
    """Whether an Accept header asks for an Arrow answer (and does not refuse it with ``q=0``)."""
    return names_media_type(accept, ARROW_STREAM)
