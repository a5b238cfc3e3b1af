"""Cautions: machine-readable warnings with a sentence for a person."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Caution"]


@dataclass(frozen=True)
class Caution:
    """A warning about a result.

    Attributes
    ----------
    code : str
        Stable identifier, e.g. ``"empty_window"``, ``"extrapolation"``,
        ``"selection_at_grid_edge"``, ``"flat_selection_score"``,
        ``"implausibly_rough"``, ``"few_points"``, ``"degree_reduced"``.
    message : str
        One sentence for a person.
    """

    code: str
    message: str
