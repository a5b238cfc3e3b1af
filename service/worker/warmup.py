"""Warm the numerical code once in the forkserver, so every forked worker starts warm.

Importing this module runs a few tiny fits (every kernel, both engines, an
automatic selection).  Compiled or cached code paths are then loaded in the
forkserver's memory and inherited by each worker it forks, so a worker's
first real request does not pay for loading them.  Failures are ignored:
warming is an optimisation, never a condition for serving.
"""

from __future__ import annotations

import logging

log = logging.getLogger("bandwise.worker")


def warm_up() -> None:
    """Run tiny fits through the main code paths; swallow any error."""
    try:
        import numpy as np

        from estimators import KERNELS, fit

        x = np.linspace(0.0, 10.0, 64)
        y = np.sin(x)
        for name in KERNELS:
            for engine in ("exact", "binned"):
                s = fit(x, y, kernel=name, degree=1, bandwidth=1.5, engine=engine)
                s.predict(np.linspace(-1.0, 11.0, 16))
                s.fitted()
        fit(x, y, bandwidth="auto", candidates=8).predict(x[:4])
    except Exception as exc:  # noqa: BLE001 - best effort only
        log.warning("warm-up skipped", extra={"fields": {"error": repr(exc)}})


warm_up()
