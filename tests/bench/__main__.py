"""Print every benchmark and study table of the project in one run: ``python -m tests.bench``.

Each module exposes ``main(argv)``; missing modules are reported, not hidden.
"""

from __future__ import annotations

import importlib
import sys

from .machine import describe

MODULES = [
    ("bench_core", []),
    ("bench_selection", []),
    ("bench_bootstrap", []),
    ("bench_service", []),
    ("study_selection", []),
    ("study_coverage", []),
]


def main() -> int:
    print(f"# Bandwise benchmarks\n\nMachine: {describe()}\n")
    failed = 0
    for name, argv in MODULES:
        try:
            module = importlib.import_module(f"tests.bench.{name}")
        except ImportError as exc:
            print(f"## {name}: not available ({exc})\n")
            failed += 1
            continue
        module.main(argv)
        print()
        sys.stdout.flush()
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
