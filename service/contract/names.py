"""Names of kernels, selectors, rules, engines and band methods: taken from ``estimators``, never written again.

The request models build their choice types from these tuples, so a kernel or
selector added to ``estimators`` is accepted and documented by the service
without a change here. ``estimators.names`` has no imports, so the HTTP process
that validates requests does not load the numerics.
"""

from __future__ import annotations

from estimators.names import BAND_METHODS, ENGINES, FAMILIES, KERNEL_NAMES, RULES, SELECTORS
from estimators.names import SCORED_SELECTORS as _SCORED_SELECTORS

SELECTOR_NAMES: tuple[str, ...] = SELECTORS
SCORED_SELECTORS: tuple[str, ...] = _SCORED_SELECTORS  # selectors whose scores carry standard errors (rule one_se needs one)
RULE_NAMES: tuple[str, ...] = RULES
ENGINE_NAMES: tuple[str, ...] = ENGINES
BAND_METHOD_NAMES: tuple[str, ...] = BAND_METHODS
FAMILY_NAMES: tuple[str, ...] = FAMILIES

__all__ = ["BAND_METHOD_NAMES", "ENGINE_NAMES", "FAMILY_NAMES", "KERNEL_NAMES", "RULE_NAMES", "SCORED_SELECTORS", "SELECTOR_NAMES"]
