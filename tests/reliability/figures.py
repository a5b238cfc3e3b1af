"""Figures measured by the reliability tests, shown in pytest's terminal summary.

Tests call :func:`record`; ``conftest.py`` prints everything recorded at the
end of the run, so the numbers can be quoted from a CI log without ``-s``.
"""

from __future__ import annotations

FIGURES: dict[str, str] = {}


def record(name: str, value: object) -> None:
    """Remember one measured figure (last write wins) and print it for ``-s`` runs."""
    FIGURES[name] = str(value)
    print(f"[reliability] {name}: {value}", flush=True)
