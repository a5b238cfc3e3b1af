"""Recorded request/response examples (``openapi_examples/``) for the OpenAPI document.

``openapi_examples/index.json`` lists the examples; each has
``<name>.request.json`` and ``<name>.response.json`` beside it.  When the
directory is absent (an installed wheel without the repository) the OpenAPI
document simply has no examples.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import orjson


@dataclass(frozen=True)
class Example:
    name: str
    path: str
    method: str
    status: int
    summary: str
    description: str
    request: Any
    response: Any


def examples_dir() -> Path:
    """``BANDWISE_EXAMPLES_DIR`` if set, else ``openapi_examples/`` next to the package."""
    configured = os.environ.get("BANDWISE_EXAMPLES_DIR")
    if configured:
        return Path(configured)
    return Path(__file__).resolve().parents[2] / "openapi_examples"


def load_examples(directory: Path | None = None) -> list[Example]:
    """All examples listed in ``index.json`` whose files exist."""
    directory = directory or examples_dir()
    index = directory / "index.json"
    if not index.is_file():
        return []
    out: list[Example] = []
    for entry in orjson.loads(index.read_bytes()):
        request_file = directory / f"{entry['name']}.request.json"
        response_file = directory / f"{entry['name']}.response.json"
        if not request_file.is_file():
            continue
        response = orjson.loads(response_file.read_bytes()) if response_file.is_file() else None
        out.append(
            Example(
                name=entry["name"],
                path=entry["path"],
                method=entry.get("method", "post").lower(),
                status=int(entry.get("status", 200)),
                summary=entry.get("summary", entry["name"]),
                description=entry.get("description", ""),
                request=orjson.loads(request_file.read_bytes()),
                response=response,
            )
        )
    return out
