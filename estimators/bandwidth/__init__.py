"""Automatic bandwidth selection: the candidate grid, five selectors, two rules, and the evidence.

One concept a module, bottom to top: ``record``, ``choices``, ``groups``, ``grid``, ``fits``,
``binned``, ``scores``, ``plugin``, ``rule_of_thumb``, ``cautions``, ``select``.
Method notes (criteria, rules, plug-in, binned scoring, error bounds, references): ``docs/methods.md``.
"""

from ..names import RULES, SCORED_SELECTORS, SCORINGS, SELECTORS
from .grid import candidate_grid, well_posed_minimum
from .record import Selection
from .select import select_bandwidth, select_for_sample

__all__ = [
    "RULES",
    "SCORED_SELECTORS",
    "SCORINGS",
    "SELECTORS",
    "Selection",
    "candidate_grid",
    "select_bandwidth",
    "select_for_sample",
    "well_posed_minimum",
]
