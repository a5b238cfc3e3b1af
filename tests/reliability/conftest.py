"""Terminal summary of the figures the reliability tests measured."""

from __future__ import annotations

from typing import Any

from .figures import FIGURES


def pytest_terminal_summary(terminalreporter: Any) -> None:
    if FIGURES:
        terminalreporter.section("reliability figures")
        for name, value in FIGURES.items():
            terminalreporter.write_line(f"{name}: {value}")
