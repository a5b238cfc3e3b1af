"""Bandwise HTTP service: a thin FastAPI layer over :mod:`estimators`.

Start it with ``bandwise serve`` or ``python -m service``; build an app in
code with :func:`service.app.create_app`.
"""

__version__ = "0.1.0"

__all__ = ["__version__"]
