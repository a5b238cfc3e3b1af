"""Bandwise numerics: kernel smoothing, bandwidth selection and uncertainty.

Pure numerics (numpy, scipy, compiled numba loops); no web, no I/O.
"""

from .api import Smoother, fit
from .bandwidth import RULES, SCORED_SELECTORS, SELECTORS, Selection, select_bandwidth
from .cautions import Caution
from .kernels import KERNELS, Kernel, convert_bandwidth
from .local_poly import ENGINES
from .uncertainty import METHODS as BAND_METHODS
from .uncertainty import Bands

__all__ = [
    "BAND_METHODS",
    "ENGINES",
    "KERNELS",
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
