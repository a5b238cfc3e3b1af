"""Structured logging: one JSON object per line on stderr."""

from __future__ import annotations

import logging
import os
import sys
import time
from collections.abc import Callable
from typing import Any

import orjson

_RESERVED = {"fields"}


class JsonFormatter(logging.Formatter):
    """Format a record as one JSON line: ts, level, logger, message and ``extra={"fields": {...}}``."""

    def format(self, record: logging.LogRecord) -> str:
        entry: dict[str, Any] = {
            "ts": _timestamp(record.created),
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": record.getMessage(),
        }
        fields = getattr(record, "fields", None)
        if isinstance(fields, dict):
            entry.update(fields)
        if record.exc_info:
            entry["traceback"] = self.formatException(record.exc_info)
        return orjson.dumps(entry, default=str).decode()


access_sink: Callable[[dict[str, Any]], None] | None = None
"""When set, access-log entries go straight to it instead of through :mod:`logging` (faster)."""


def _timestamp(created: float) -> str:
    return time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(created)) + f".{int((created % 1) * 1000):03d}Z"


def _direct_access_writer(stream: Any) -> Callable[[dict[str, Any]], None]:
    """A writer of access-log lines in the same JSON layout as :class:`JsonFormatter`, without logging's machinery."""
    fd = stream.fileno()

    def write(fields: dict[str, Any]) -> None:
        entry = {"ts": _timestamp(time.time()), "level": "info", "logger": "bandwise.access", "message": "request", **fields}
        try:
            os.write(fd, orjson.dumps(entry, default=str) + b"\n")
        except OSError:
            pass

    return write


def configure_logging(level: str = "info") -> None:
    """Send the ``bandwise`` and ``uvicorn`` loggers to stderr as JSON lines."""
    global access_sink
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(JsonFormatter())
    for name in ("bandwise", "uvicorn", "uvicorn.error"):
        logger = logging.getLogger(name)
        logger.handlers[:] = [handler]
        logger.setLevel(level.upper())
        logger.propagate = False
    try:
        access_sink = _direct_access_writer(sys.stderr) if level.lower() in ("debug", "info") else None
    except (AttributeError, OSError, ValueError):  # stderr without a file descriptor
        access_sink = None
    access = logging.getLogger("uvicorn.access")
    access.handlers[:] = []
    access.propagate = False
    access.disabled = True


def uvicorn_log_config(level: str = "info") -> dict[str, Any]:
    """A ``logging.config`` dict making uvicorn's own messages JSON lines too."""
    return {
        "version": 1,
        "disable_existing_loggers": False,
        "formatters": {"json": {"()": "service.logs.JsonFormatter"}},
        "handlers": {"stderr": {"class": "logging.StreamHandler", "formatter": "json", "stream": "ext://sys.stderr"}},
        "loggers": {
            "uvicorn": {"handlers": ["stderr"], "level": level.upper(), "propagate": False},
            "uvicorn.error": {"handlers": ["stderr"], "level": level.upper(), "propagate": False},
            "uvicorn.access": {"handlers": [], "level": "CRITICAL", "propagate": False},
            "bandwise": {"handlers": ["stderr"], "level": level.upper(), "propagate": False},
        },
    }
