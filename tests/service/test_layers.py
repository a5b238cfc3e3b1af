"""The service's import graph, read from the source with :mod:`ast` (one test imports the app in a fresh interpreter).

Layers, bottom up: ``service.contract`` (wire contract) and ``service.runtime``
(settings, logging, allocator); then the two sides, ``service.worker`` and
``service.http``, which meet only through the contract; then the composition
root (``service.app``, ``service.cli``, ``service.__main__``) and the client.
``estimators`` never imports ``service``.  Every import counts, including
those inside functions and under ``TYPE_CHECKING``.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _imports(path: Path) -> set[str]:
    """Absolute names of every module ``path`` imports (relative imports resolved)."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    package = _module_name(path) if path.name == "__init__.py" else _module_name(path).rpartition(".")[0]
    out: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - node.level + 1]
                module = ".".join([*base, node.module] if node.module else base)
            else:
                module = node.module or ""
            out.add(module)
            out.update(f"{module}.{alias.name}" for alias in node.names)  # "from pkg import submodule"
    return out


def _graph(package: str) -> dict[str, set[str]]:
    modules = {_module_name(p): p for p in (ROOT / package).rglob("*.py")}
    graph: dict[str, set[str]] = {}
    for name, path in modules.items():
        graph[name] = {m for m in _imports(path) if m in modules and m != name}
    return graph


def _cycle(graph: dict[str, set[str]]) -> list[str] | None:
    """One import cycle as a list of modules, or None (depth-first search, three colours)."""
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph[node]):
            if state.get(nxt) == 1:
                return [*stack[stack.index(nxt) :], nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(graph):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def _within(name: str, prefix: str) -> bool:
    return name == prefix or name.startswith(prefix + ".")


SERVICE = _graph("service")


def test_the_graph_reader_sees_the_known_edges() -> None:
    # Guards the test itself: a reader that found no edges would pass every rule below.
    assert "service.contract.errors" in SERVICE["service.http.core"]
    assert "service.worker.entry" in SERVICE["service.app"]
    assert "service.worker.handlers" in SERVICE["service.worker.main"]  # a lazy import inside a function
    assert _cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]


def test_no_import_cycle_in_service() -> None:
    assert _cycle(SERVICE) is None


@pytest.mark.parametrize(
    ("side", "forbidden"),
    [
        ("service.worker", ("service.http", "service.app", "service.cli", "service.client")),
        ("service.http", ("service.worker", "service.app", "service.cli", "service.client")),
        ("service.contract", ("service.http", "service.worker", "service.runtime", "service.app", "service.cli", "service.client")),
        ("service.runtime", ("service.http", "service.worker", "service.contract", "service.app", "service.cli", "service.client")),
        ("service.client", ("service.http", "service.worker", "service.runtime", "service.app", "service.cli")),
    ],
)
def test_layers_import_only_downwards(side: str, forbidden: tuple[str, ...]) -> None:
    offending = sorted(
        f"{module} imports {target}"
        for module, targets in SERVICE.items()
        if _within(module, side)
        for target in targets
        if any(_within(target, f) for f in forbidden)
    )
    assert not offending, offending


def test_estimators_never_import_service() -> None:
    offending = sorted(
        f"{_module_name(p)} imports {m}" for p in (ROOT / "estimators").rglob("*.py") for m in _imports(p) if _within(m, "service")
    )
    assert not offending, offending


def test_the_http_process_does_not_load_the_numerics() -> None:
    """Importing the app loads no numba, scipy, pyarrow or fitting code: those live in the worker processes.

    Keeps the HTTP process small and its start fast (measured: about 1 s with the
    numerics left out, 3 to 5 s with them).
    """
    code = "import sys, service.http.app; print(sorted(m for m in ('numba', 'scipy', 'pyarrow', 'estimators.api', 'estimators.local_poly') if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT)
    assert out.stdout.strip() == "[]", out.stdout + out.stderr
