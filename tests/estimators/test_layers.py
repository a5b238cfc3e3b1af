"""The import graph of ``estimators/``: one way, pure numerics, compiled loops in ``_compiled*`` only.

Reads the source with :mod:`ast` (every import statement, inside functions and under
``TYPE_CHECKING`` too), so a lazy import that closes a loop is found as well as a top-level one.
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2] / "estimators"

#: third-party packages the numerics may use; everything else outside the standard library is refused
ALLOWED_THIRD_PARTY = {"numpy", "scipy", "numba"}
#: the web layer, HTTP clients and network or process I/O from the standard library
FORBIDDEN = {"service", "fastapi", "starlette", "httpx", "uvicorn", "pydantic", "orjson", "requests", "urllib", "http", "socket", "asyncio", "subprocess"}


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in sorted(ROOT.rglob("*.py"))}


def _imports(name: str, path: Path, known: set[str]) -> tuple[set[str], set[str]]:
    """(modules of ``estimators`` imported, top-level names of other packages imported)."""
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    inner: set[str] = set()
    outer: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(), str(path))):
        if isinstance(node, ast.Import):
            targets = [alias.name for alias in node.names]
            pairs = [(t, None) for t in targets]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                stem = ".".join(base + ([node.module] if node.module else []))
            else:
                stem = node.module or ""
            pairs = [(stem, alias.name) for alias in node.names]
        else:
            continue
        for stem, member in pairs:
            if stem.split(".")[0] != "estimators":
                outer.add(stem.split(".")[0])
                continue
            full = f"{stem}.{member}" if member else stem
            if full in known:
                inner.add(full)  # a submodule imported by name: `from . import _compiled`
            elif stem in known:
                inner.add(stem)
            else:
                raise AssertionError(f"{name} imports {full}, which is not a module of estimators")
    return inner, outer


def _graph() -> tuple[dict[str, set[str]], dict[str, set[str]]]:
    mods = _modules()
    known = set(mods)
    inner, outer = {}, {}
    for name, path in mods.items():
        inner[name], outer[name] = _imports(name, path, known)
    return inner, outer


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module, or a module importing itself (Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1 or v in graph.get(v, ()):
                found.append(sorted(comp))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def test_the_cycle_finder_finds_a_cycle() -> None:
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert _cycles({"a": {"a"}}) == [["a"]]
    assert _cycles({"a": {"b"}, "b": set()}) == []


def test_the_graph_sees_lazy_and_type_checking_imports(tmp_path: Path) -> None:
    src = "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from .b import B\ndef f():\n    from . import c\n"
    path = tmp_path / "a.py"
    path.write_text(src)
    inner, outer = _imports("estimators.a", path, {"estimators", "estimators.a", "estimators.b", "estimators.c"})
    assert inner == {"estimators.b", "estimators.c"}
    assert outer == {"typing"}


def test_estimators_has_no_import_cycle() -> None:
    inner, _ = _graph()
    assert len(inner) > 10  # the walk found the package
    assert _cycles(inner) == []


def test_estimators_imports_no_web_layer_or_io_package() -> None:
    _, outer = _graph()
    stdlib = set(sys.stdlib_module_names)
    for name, packages in outer.items():
        assert not packages & FORBIDDEN, f"{name} imports {sorted(packages & FORBIDDEN)}"
        other = {p for p in packages if p not in stdlib and p != "__future__"}
        assert other <= ALLOWED_THIRD_PARTY, f"{name} imports {sorted(other - ALLOWED_THIRD_PARTY)}"


def test_compiled_loops_live_only_in_compiled_modules() -> None:
    _, outer = _graph()
    users = {name for name, packages in outer.items() if "numba" in packages}
    assert users, "no module imports numba: the walk missed the compiled modules"
    assert {name for name in users if not name.rpartition(".")[2].startswith("_compiled")} == set()


def test_name_tuples_match_the_tables_that_implement_them() -> None:
    """``estimators.names`` is written out by hand so it can load without numpy; it must agree with the kernel table."""
    from estimators import names
    from estimators.kernels import KERNELS

    assert tuple(KERNELS) == names.KERNEL_NAMES
    assert set(names.SCORED_SELECTORS) <= set(names.SELECTORS)


def test_the_names_load_without_the_numerics() -> None:
    """A fresh interpreter that imports ``estimators.names`` has not loaded numpy, scipy or numba."""
    import subprocess

    code = "import sys, estimators.names; print(sorted(m for m in ('numpy', 'scipy', 'numba', 'estimators.api') if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=Path(__file__).resolve().parents[2])
    assert out.stdout.strip() == "[]", out.stdout + out.stderr
