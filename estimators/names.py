"""Names of the kernels, selectors, rules, engines, band methods and noise choices.

Plain tuples with no imports, so that a caller that only needs the names (a
request schema, for one) does not load numpy, scipy or the compiled loops. The
modules that implement each choice take their tuple from here, and
``tests/estimators/test_layers.py`` checks that the kernel table matches.
"""

from __future__ import annotations

__all__ = [
    "BAND_METHODS",
    "CORRELATED_SELECTOR",
    "ENGINES",
    "FAMILIES",
    "KERNEL_NAMES",
    "NOISE_CHOICES",
    "NOISE_KINDS",
    "RULES",
    "SCORED_SELECTORS",
    "SCORINGS",
    "SELECTORS",
]

KERNEL_NAMES: tuple[str, ...] = ("gaussian", "epanechnikov", "uniform", "triangular", "biweight", "triweight", "tricube", "cosine")
SELECTORS: tuple[str, ...] = ("loocv", "gcv", "aicc", "plugin", "rule_of_thumb")
SCORED_SELECTORS: tuple[str, ...] = ("loocv", "gcv", "aicc")
"""Selectors whose scores carry standard errors (the rule ``one_se`` needs one)."""
RULES: tuple[str, ...] = ("min", "one_se")
SCORINGS: tuple[str, ...] = ("auto", "exact", "binned")
ENGINES: tuple[str, ...] = ("auto", "exact", "binned")
BAND_METHODS: tuple[str, ...] = ("analytic", "wild_bootstrap", "residual_bootstrap")
NOISE_CHOICES: tuple[str, ...] = ("auto", "independent", "correlated")
"""The ``noise`` argument: test for serial correlation (auto), or take the noise as independent / correlated."""
NOISE_KINDS: tuple[str, ...] = ("independent", "correlated")
"""What was used: the noise model behind the bandwidth, the standard errors and the bands."""
CORRELATED_SELECTOR: str = "modified_cv"
"""Name of the criterion that chooses the bandwidth when the noise is treated as correlated."""
FAMILIES: tuple[str, ...] = ("gaussian", "poisson")
"""Noise families: gaussian (least squares) and poisson (counts, local likelihood with a log link)."""
