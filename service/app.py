"""Composition root: ``create_app(settings)`` joins the HTTP side to the worker side.

The HTTP side (:mod:`service.http`) and the worker side (:mod:`service.worker`)
do not import each other; this module hands the worker entry point to the
HTTP app.  ``python -m service`` and ``bandwise serve`` run the app it builds.
"""

from __future__ import annotations

from fastapi import FastAPI

from service.http.app import build_app
from service.runtime.settings import Settings
from service.worker.entry import WORKER_ENTRY

__all__ = ["create_app"]


def create_app(settings: Settings | None = None) -> FastAPI:
    """Build the Bandwise app.

    Parameters
    ----------
    settings : Settings, optional
        Defaults to :class:`~service.runtime.settings.Settings` read from the ``BANDWISE_*`` environment.

    Returns
    -------
    FastAPI
        The app; ``app.state.service`` is its :class:`~service.http.core.Service`.
        The worker pool starts and stops with the app's lifespan.
    """
    return build_app(settings if settings is not None else Settings(), WORKER_ENTRY)
