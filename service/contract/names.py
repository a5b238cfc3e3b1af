"""Names of kernels, selectors, rules, engines, band methods and noise choices: taken from ``estimators``, never written again.

The request models build their choice types from these tuples, so a kernel or
selector added to ``estimators`` is accepted and documented by the service
without a change here. ``estimators.names`` has no imports, so the HTTP process
that validates requests does not load the numerics.
"""

from __future__ import annotations

from estimators.names import BAND_METHODS, CORRELATED_SELECTOR, ENGINES, FAMILIES, KERNEL_NAMES, NOISE_CHOICES, NOISE_KINDS, RULES, SELECTORS
from estimators.names import SCORED_SELECTORS as _SCORED_SELECTORS

SELECTOR_NAMES: tuple[str, ...] = SELECTORS
SCORED_SELECTORS: tuple[str, ...] = _SCORED_SELECTORS  # selectors whose scores carry standard errors (rule one_se needs one)
RULE_NAMES: tuple[str, ...] = RULES
ENGINE_NAMES: tuple[str, ...] = ENGINES
BAND_METHOD_NAMES: tuple[str, ...] = BAND_METHODS
NOISE_NAMES: tuple[str, ...] = NOISE_CHOICES  # the request's noise field
NOISE_USED_NAMES: tuple[str, ...] = NOISE_KINDS  # diagnostics.noise: what was used
CORRELATED_SELECTOR_NAME: str = CORRELATED_SELECTOR  # bandwidth.selector on the correlated-noise path
FAMILY_NAMES: tuple[str, ...] = FAMILIES

__all__ = [
    "BAND_METHOD_NAMES",
    "CORRELATED_SELECTOR_NAME",
    "ENGINE_NAMES",
    "FAMILY_NAMES",
    "KERNEL_NAMES",
    "NOISE_NAMES",
    "NOISE_USED_NAMES",
    "RULE_NAMES",
    "SCORED_SELECTORS",
    "SELECTOR_NAMES",
]
