"""The benchmark runner writes its report with the machine named and every table in it.

Nothing here times anything: the modules run are stand-ins that print a fixed table.
"""

from __future__ import annotations

import sys
import types
from pathlib import Path

import pytest

from tests.bench import __main__ as runner


def _stand_in(name: str, body: str | None) -> types.ModuleType:
    module = types.ModuleType(f"tests.bench.{name}")

    def main(argv: list[str]) -> None:
        if body is None:
            raise RuntimeError("stand-in failure")
        print(f"## {name} {' '.join(argv)}\n\n{body}")

    module.main = main  # type: ignore[attr-defined]
    return module


@pytest.fixture
def stand_ins(monkeypatch: pytest.MonkeyPatch) -> None:
    table = "| n | ratio |\n|---|---|\n| 1e3 | 2.5x |"
    monkeypatch.setitem(sys.modules, "tests.bench._stand_in_a", _stand_in("_stand_in_a", table))
    monkeypatch.setitem(sys.modules, "tests.bench._stand_in_b", _stand_in("_stand_in_b", None))
    monkeypatch.setattr(runner, "MODULES", [("_stand_in_a", ["--full"], ["--small"]), ("_stand_in_b", [], [])])


def test_report_names_the_machine_and_keeps_every_table(stand_ins: None, tmp_path: Path) -> None:
    report = tmp_path / "benchmarks.md"
    status = runner.main(["--write", str(report)])
    text = report.read_text(encoding="utf-8")
    # header: what the issue asks the file to name (CPU model, cores, memory, Python, numpy, date)
    for label in ("| CPU |", "| cores |", "| memory |", "| Python |", "| numpy / scipy / numba |", "| date (UTC) |"):
        assert label in text
    assert "## _stand_in_a --full" in text and "| 1e3 | 2.5x |" in text
    # a failing module is reported in the file and makes the run fail, the others still run
    assert "_stand_in_b failed" in text and "stand-in failure" in text
    assert status == 1
    assert not (tmp_path / "benchmarks.md.partial").exists()


def test_quick_and_partial_runs_do_not_replace_the_published_report(stand_ins: None, monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    monkeypatch.setattr(runner, "REPO_ROOT", tmp_path)
    runner.main(["--quick"])
    runner.main(["--only", "_stand_in_a"])
    assert not (tmp_path / runner.DEFAULT_REPORT).exists()
    runner.main([])
    text = (tmp_path / runner.DEFAULT_REPORT).read_text(encoding="utf-8")
    assert "## _stand_in_a --full" in text and "a full run" in text


def test_quick_run_uses_the_quick_arguments(stand_ins: None, tmp_path: Path) -> None:
    report = tmp_path / "quick.md"
    runner.main(["--quick", "--only", "_stand_in_a", "--write", str(report)])
    text = report.read_text(encoding="utf-8")
    assert "## _stand_in_a --small" in text and "quick run" in text and "_stand_in_b" not in text
