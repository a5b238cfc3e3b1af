"""Run every benchmark and study of the project and write the report: ``python -m tests.bench``.

``./run.sh bench`` runs this.  Every table is printed as it is produced and, for a full run, the
whole report is written to ``docs/benchmarks.md`` with a header naming the machine (CPU model,
cores, memory, Python, numpy, scipy and numba versions) and the date::

    python -m tests.bench                        # every table; writes docs/benchmarks.md
    python -m tests.bench --write out.md         # every table; writes out.md instead
    python -m tests.bench --no-write             # every table; prints only
    python -m tests.bench --quick                # small sizes, to check the harness; prints only
    python -m tests.bench --only bench_core,study_coverage --write out.md

A ``--quick`` run or a run of some modules only (``--only``) writes nothing unless ``--write``
names a file, so the published tables are only ever replaced by a full run.  Each module exposes
``main(argv)``; a module that is missing or fails is reported in the output and the report, not
hidden, and the exit status is then 1. A full run takes roughly half an hour on 2 cores (the coverage
study, the n = 1e7 fits and the service's load rounds take most of it); a quick run about 4 minutes.
"""

from __future__ import annotations

import argparse
import contextlib
import importlib
import io
import os
import sys
import time
import traceback
from collections.abc import Sequence
from pathlib import Path
from typing import TextIO

from .machine import details

#: (module, arguments of the full run, arguments of a quick run), in report order
MODULES: list[tuple[str, list[str], list[str]]] = [
    ("bench_core", [], ["--max-n", "2e4"]),
    ("bench_selection", [], ["--max-n", "1e4"]),
    ("bench_bootstrap", [], ["--n", "1e4", "--replicates", "200"]),
    ("bench_service", [], ["--quick"]),
    ("bench_wire", [], ["--n", "1e5", "--repeat", "3"]),
    ("bench_predict_order", [], ["--n", "1e5"]),
    ("bench_batch", [], ["--series", "60", "--rounds", "1"]),
    ("bench_stream", [], ["--series", "30", "--rounds", "1"]),
    ("bench_time_axis", [], ["--n", "1e5", "--rounds", "2"]),
    ("study_selection", [], ["--replications", "5"]),
    ("study_coverage", [], ["--replications", "20"]),
    ("bench_correlated", [], ["--n", "1e5", "--repeat", "2"]),
    ("study_correlated", [], ["--replications", "2", "--sizes", "300"]),
    ("study_robust", [], ["--replications", "10", "--speed-n", "20000"]),
]

#: where a full run writes its report, relative to the repository root
DEFAULT_REPORT = Path("docs") / "benchmarks.md"
REPO_ROOT = Path(__file__).resolve().parents[2]


class _Tee(io.TextIOBase):
    """Write to the terminal and keep a copy for the report."""

    def __init__(self, terminal: TextIO) -> None:
        self.terminal = terminal
        self.copy = io.StringIO()

    def write(self, text: str) -> int:
        self.terminal.write(text)
        self.copy.write(text)
        return len(text)

    def flush(self) -> None:
        self.terminal.flush()


def header(command: str, quick: bool) -> str:
    """The report's title, the machine table and how the figures were made."""
    rows = "\n".join(f"| {name} | {value} |" for name, value in details())
    kind = "a quick run: small sizes, for checking the harness, not for quoting" if quick else "a full run"
    return (
        "# Bandwise benchmarks\n\n"
        f"Written by `{command}` ({kind}). A full `./run.sh bench` rewrites `{DEFAULT_REPORT.as_posix()}`;\n"
        "do not edit it by hand: run it again on the machine you want figures for.\n\n"
        "Every time below is a ratio to a baseline measured in the same run on the same machine\n"
        "(`np.argsort(x)` on the same data, the dense formula, a bare FastAPI endpoint), because\n"
        "absolute times move with the host. No test asserts on any of these figures.\n\n"
        "| machine | |\n|---|---|\n"
        f"{rows}\n"
    )


def run(modules: Sequence[tuple[str, list[str]]], out: TextIO) -> int:
    """Run each module's ``main(argv)`` with its output going to ``out``; return the failure count."""
    failed = 0
    for name, argv in modules:
        started = time.perf_counter()
        try:
            module = importlib.import_module(f"tests.bench.{name}")
        except ImportError as exc:
            out.write(f"\n## {name}: not available ({exc})\n")
            failed += 1
            continue
        out.write("\n")
        try:
            with contextlib.redirect_stdout(out):
                module.main(list(argv))
        except Exception as exc:  # a failing benchmark is reported and the others still run
            traceback.print_exc()
            out.write(f"\n**{name} failed**: {type(exc).__name__}: {exc}\n")
            failed += 1
        out.write(f"\n_{name}: {time.perf_counter() - started:.0f} s_\n")
        out.flush()
    return failed


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m tests.bench", description="Run every benchmark and write docs/benchmarks.md.")
    parser.add_argument("--quick", action="store_true", help="small sizes, to check the harness (writes nothing unless --write)")
    parser.add_argument("--only", metavar="NAMES", help="comma-separated modules to run, of: " + ", ".join(m[0] for m in MODULES))
    target = parser.add_mutually_exclusive_group()
    target.add_argument("--write", metavar="PATH", type=Path, help=f"write the report here (default for a full run: {DEFAULT_REPORT})")
    target.add_argument("--no-write", action="store_true", help="print only")
    args = parser.parse_args(list(argv) if argv is not None else None)

    chosen = MODULES
    if args.only:
        names = [n.strip() for n in args.only.split(",") if n.strip()]
        unknown = sorted(set(names) - {m[0] for m in MODULES})
        if unknown:
            parser.error(f"unknown module(s) {', '.join(unknown)}; choose from {', '.join(m[0] for m in MODULES)}")
        chosen = [m for m in MODULES if m[0] in names]
    plan = [(name, quick if args.quick else full) for name, full, quick in chosen]

    report: Path | None
    if args.no_write:
        report = None
    elif args.write is not None:
        report = args.write
    elif args.quick or args.only:
        report = None
    else:
        report = REPO_ROOT / DEFAULT_REPORT

    given = list(argv) if argv is not None else sys.argv[1:]
    command = " ".join(["python -m tests.bench", *given])
    tee = _Tee(sys.stdout)
    tee.write(header(command, args.quick))
    started = time.perf_counter()
    failed = run(plan, tee)
    tee.write(f"\nTotal: {(time.perf_counter() - started) / 60:.1f} min.\n")

    if report is not None:
        report.parent.mkdir(parents=True, exist_ok=True)
        partial = report.with_name(report.name + ".partial")
        partial.write_text(tee.copy.getvalue(), encoding="utf-8")
        os.replace(partial, report)
        print(f"\nreport written to {report}", file=sys.stderr)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
