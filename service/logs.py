"""Structured logging: one JSON object per line on stderr."""

from __future__ import annotations

import logging
import sys
import time
from typing import Any

import orjson

_RESERVED = {"fields"}


class JsonFormatter(logging.Formatter):
    """Format a record as one JSON line: ts, level, logger, message and ``extra={"fields": {...}}``."""

    def format(self, record: logging.LogRecord) -> str:
        entry: dict[str, Any] = {
            "ts": time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(record.created)) + f".{int(record.msecs):03d}Z",
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


def configure_logging(level: str = "info") -> None:
    """Send the ``bandwise`` and ``uvicorn`` loggers to stderr as JSON lines."""
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(JsonFormatter())
    for name in ("bandwise", "uvicorn", "uvicorn.error"):
        logger = logging.getLogger(name)
        logger.handlers[:] = [handler]
        logger.setLevel(level.upper())
        logger.propagate = False
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
