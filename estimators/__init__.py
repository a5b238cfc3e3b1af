"""Bandwise numerics: kernel smoothing, bandwidth selection and uncertainty.

Pure numerics (numpy, scipy, compiled numba loops); no web, no I/O.
"""

from .bandwidth import Selection, select_bandwidth
from .cautions import Caution
from .kernels import KERNELS, Kernel, convert_bandwidth
from .local_poly import Smoother, fit
from .uncertainty import Bands

__all__ = [
    "KERNELS",
    "Bands",
    "Caution",
    "Kernel",
    "Selection",
    "Smoother",
    "convert_bandwidth",
    "fit",
    "select_bandwidth",
]
