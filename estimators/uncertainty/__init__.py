"""Uncertainty of a fitted curve: standard errors, confidence bands, prediction intervals, slopes.

One concept a module, bottom to top: ``results``, ``arguments``, ``local_fits``, ``residuals``,
``noise``, ``standard_errors``, ``weights``, ``bootstrap``, ``cautions``, ``confidence_bands``,
``intervals``, ``slopes``. Method notes (derivations, error bounds, references): ``docs/methods.md``.
"""

from .arguments import METHODS, MULTIPLIERS
from .confidence_bands import bands
from .intervals import prediction_interval
from .results import Bands, SlopeSummary
from .slopes import slope_summary
from .standard_errors import slope_standard_error, standard_error

__all__ = [
    "METHODS",
    "MULTIPLIERS",
    "Bands",
    "SlopeSummary",
    "bands",
    "prediction_interval",
    "slope_standard_error",
    "slope_summary",
    "standard_error",
]
