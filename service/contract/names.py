"""Names of kernels, selectors, rules, engines and band methods: taken from ``estimators``, never written again.

The request models build their choice types from these tuples, so a kernel or
selector added to ``estimators`` is accepted and documented by the service
without a change here.
"""

from __future__ import annotations

from estimators import BAND_METHODS as _BAND_METHODS
from estimators import ENGINES as _ENGINES
from estimators import KERNELS as _KERNELS
from estimators import RULES as _RULES
from estimators import SCORED_SELECTORS as _SCORED_SELECTORS
from estimators import SELECTORS as _SELECTORS

KERNEL_NAMES: tuple[str, ...] = tuple(_KERNELS)
SELECTOR_NAMES: tuple[str, ...] = tuple(_SELECTORS)
SCORED_SELECTORS: tuple[str, ...] = tuple(_SCORED_SELECTORS)  # selectors whose scores carry standard errors (rule one_se needs one)
RULE_NAMES: tuple[str, ...] = tuple(_RULES)
ENGINE_NAMES: tuple[str, ...] = tuple(_ENGINES)
BAND_METHOD_NAMES: tuple[str, ...] = tuple(_BAND_METHODS)
