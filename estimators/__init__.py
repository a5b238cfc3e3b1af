"""Bandwise numerics: kernel smoothing, bandwidth selection and uncertainty.

Pure numerics (numpy, scipy, compiled numba loops); no web, no I/O.

The public names load on first use (PEP 562), so ``import estimators.names``
alone does not load numpy, scipy or the compiled loops.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from .names import BAND_METHODS, ENGINES, NOISE_CHOICES, RULES, SCORED_SELECTORS, SELECTORS

if TYPE_CHECKING:
    from .api import Smoother, fit
    from .bandwidth import Selection, select_bandwidth
    from .cautions import Caution
    from .kernels import KERNELS, Kernel, convert_bandwidth
    from .uncertainty import Bands

__all__ = [
    "BAND_METHODS",
    "ENGINES",
    "KERNELS",
    "NOISE_CHOICES",
    "RULES",
    "SCORED_SELECTORS",
    "SELECTORS",
    "Bands",
    "Caution",
    "Kernel",
    "Selection",
    "Smoother",
    "convert_bandwidth",
    "fit",
    "select_bandwidth",
]

_LAZY = {
    "Smoother": ".api",
    "fit": ".api",
    "Selection": ".bandwidth",
    "select_bandwidth": ".bandwidth",
    "Caution": ".cautions",
    "KERNELS": ".kernels",
    "Kernel": ".kernels",
    "convert_bandwidth": ".kernels",
    "Bands": ".uncertainty",
}


def __getattr__(name: str) -> Any:
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'estimators' has no attribute {name!r}")
    value = getattr(importlib.import_module(module, __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
