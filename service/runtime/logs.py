"""Structured logging: one JSON object per line on stderr."""

from __future__ import annotations

import asyncio
import atexit
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


def flush_access_log() -> None:
    """Write out access-log lines still gathered (the app calls it when it stops)."""
    sink = access_sink
    if isinstance(sink, AccessLogWriter):
        sink.flush()


def _timestamp(created: float) -> str:
    return time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(created)) + f".{int((created % 1) * 1000):03d}Z"


class AccessLogWriter:
    """Access-log lines in the same JSON layout as :class:`JsonFormatter`, written in batches.

    One ``write`` system call per request costs the HTTP process about a tenth
    of a small request (and wakes the log reader each time).  Lines are
    gathered and written together when ``max_bytes`` have piled up, at most
    ``max_delay`` seconds after the first line of a batch (a timer on the
    running event loop), and when the process exits.  Called outside an event
    loop, a line is written at once.
    """

    def __init__(self, fd: int, max_bytes: int = 32 * 1024, max_delay: float = 0.05) -> None:
        self.fd = fd
        self.max_bytes = max_bytes
        self.max_delay = max_delay
        self._lines: list[bytes] = []
        self._size = 0
        self._timer: asyncio.TimerHandle | None = None
        atexit.register(self.flush)

    def __call__(self, fields: dict[str, Any]) -> None:
        entry = {"ts": _timestamp(time.time()), "level": "info", "logger": "bandwise.access", "message": "request", **fields}
        line = orjson.dumps(entry, default=str) + b"\n"
        self._lines.append(line)
        self._size += len(line)
        if self._size >= self.max_bytes:
            self.flush()
        elif self._timer is None:
            try:
                self._timer = asyncio.get_running_loop().call_later(self.max_delay, self.flush)
            except RuntimeError:
                self.flush()

    def flush(self) -> None:
        """Write every gathered line now."""
        if self._timer is not None:
            self._timer.cancel()
            self._timer = None
        if not self._lines:
            return
        data = b"".join(self._lines)
        self._lines.clear()
        self._size = 0
        try:
            while data:
                data = data[os.write(self.fd, data) :]
        except OSError:
            pass


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
        access_sink = AccessLogWriter(sys.stderr.fileno()) if level.lower() in ("debug", "info") else None
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
        "formatters": {"json": {"()": "service.runtime.logs.JsonFormatter"}},
        "handlers": {"stderr": {"class": "logging.StreamHandler", "formatter": "json", "stream": "ext://sys.stderr"}},
        "loggers": {
            "uvicorn": {"handlers": ["stderr"], "level": level.upper(), "propagate": False},
            "uvicorn.error": {"handlers": ["stderr"], "level": level.upper(), "propagate": False},
            "uvicorn.access": {"handlers": [], "level": "CRITICAL", "propagate": False},
            "bandwise": {"handlers": ["stderr"], "level": level.upper(), "propagate": False},
        },
    }
