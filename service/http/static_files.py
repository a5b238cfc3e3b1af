"""Locations of the demo page and the locally served Swagger UI assets (no CDN)."""

from __future__ import annotations

import html
import importlib.util
from functools import lru_cache
from pathlib import Path

STATIC_DIR = Path(__file__).resolve().parent / "static"


def index_file() -> Path | None:
    path = STATIC_DIR / "index.html"
    return path if path.is_file() else None


@lru_cache(maxsize=1)
def swagger_ui_dir() -> Path | None:
    """The Swagger UI distribution shipped by the ``swagger-ui-py`` package (Apache-2.0).

    Located without importing the package, which would pull in its web-framework helpers.
    """
    spec = importlib.util.find_spec("swagger_ui")
    if spec is None or not spec.submodule_search_locations:
        return None
    for location in spec.submodule_search_locations:
        candidate = Path(location) / "static"
        if (candidate / "swagger-ui-bundle.js").is_file() and (candidate / "swagger-ui.css").is_file():
            return candidate
    return None


def docs_html(title: str = "Bandwise API") -> str:
    """The /docs page: Swagger UI from /docs/assets, the document from /openapi.json (both relative)."""
    if swagger_ui_dir() is None:
        return (
            f"<!doctype html><html><head><meta charset='utf-8'><title>{html.escape(title)}</title></head><body>"
            "<h1>Bandwise API</h1><p>The interactive reference needs the <code>swagger-ui-py</code> package. "
            "The machine-readable document is at <a href='openapi.json'>openapi.json</a>.</p></body></html>"
        )
    return f"""<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{html.escape(title)}</title>
<link rel="stylesheet" href="docs/assets/swagger-ui.css">
<link rel="icon" type="image/png" href="docs/assets/favicon-32x32.png">
<style>body {{ margin: 0; }} .bw-footer {{ font: 12px sans-serif; color: #555; padding: 8px 20px; }}</style>
</head>
<body>
<div id="swagger-ui"></div>
<p class="bw-footer">API reference rendered with Swagger UI, served by this service
(<a href="docs/assets/LICENSE">Apache License 2.0</a>). Machine-readable document: <a href="openapi.json">openapi.json</a>.</p>
<script src="docs/assets/swagger-ui-bundle.js"></script>
<script>
window.ui = SwaggerUIBundle({{
  url: "openapi.json",
  dom_id: "#swagger-ui",
  deepLinking: true,
  validatorUrl: null,
  defaultModelsExpandDepth: 0,
  presets: [SwaggerUIBundle.presets.apis],
  layout: "BaseLayout"
}});
</script>
</body>
</html>
"""
