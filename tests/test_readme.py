"""The README stays a user's document: short, with CI's test line, every setting documented, no history.

Checks on the repository's own documents (no service is started). The setting names come from the
service's settings class itself, found wherever the service package keeps it, so a setting added
there without documentation fails here.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"
DOCS = ROOT / "docs"
MAX_README_LINES = 400  # issue 22: "at most about 400 lines"


def _documents() -> str:
    return "\n".join(p.read_text(encoding="utf-8") for p in [README, *sorted(DOCS.glob("*.md"))])


def _settings_source() -> tuple[Path, ast.ClassDef]:
    """The module under service/ that defines ``class Settings(BaseSettings)``, and that class."""
    for path in sorted((ROOT / "service").rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in tree.body:
            if isinstance(node, ast.ClassDef) and node.name == "Settings" and any(getattr(b, "id", None) == "BaseSettings" for b in node.bases):
                return path, node
    raise AssertionError("no `class Settings(BaseSettings)` found under service/")


def _setting_variables() -> set[str]:
    """BANDWISE_* names of every settings field, plus every BANDWISE_* name written in that module."""
    path, cls = _settings_source()
    fields = {node.target.id for node in cls.body if isinstance(node, ast.AnnAssign) and isinstance(node.target, ast.Name)}
    fields.discard("model_config")
    names = {f"BANDWISE_{name.upper()}" for name in fields}
    names |= set(re.findall(r"\bBANDWISE_[A-Z0-9_]*[A-Z0-9]\b", path.read_text(encoding="utf-8")))
    return names


def test_readme_is_short() -> None:
    lines = README.read_text(encoding="utf-8").splitlines()
    assert len(lines) <= MAX_README_LINES, f"README.md has {len(lines)} lines; move reference detail to docs/ and history to CHANGELOG.md"


def test_readme_has_the_line_ci_runs() -> None:
    # .ci/run takes the first line matching 'ci: test' and strips the comment: it must be a runnable command
    marked = [line for line in README.read_text(encoding="utf-8").splitlines() if "ci: test" in line]
    assert marked, "README.md has no line marked 'ci: test' (.ci/run needs it)"
    command = re.sub(r"\s*#.*$", "", marked[0]).strip()
    assert command.startswith("./run.sh test"), command


def test_settings_are_found() -> None:
    # guards the next test against passing vacuously if the settings class were not found or empty
    names = _setting_variables()
    assert {"BANDWISE_WORKERS", "BANDWISE_MAX_POINTS", "BANDWISE_API_KEYS"} <= names


def test_every_setting_is_documented() -> None:
    text = _documents()
    missing = sorted(name for name in _setting_variables() if not re.search(rf"\b{name}\b", text))
    assert not missing, f"not mentioned in README.md or docs/*.md: {', '.join(missing)}"


@pytest.mark.parametrize("path", [README, *sorted(DOCS.glob("*.md"))], ids=lambda p: p.name)
def test_no_commit_hashes_or_session_history(path: Path) -> None:
    text = path.read_text(encoding="utf-8")
    # a 7-to-40-digit hex word with at least one letter and one digit, outside code blocks and tables of numbers
    prose = re.sub(r"```.*?```", "", text, flags=re.S)
    hashes = [w for w in re.findall(r"\b[0-9a-f]{7,40}\b", prose) if re.search(r"[a-f]", w) and re.search(r"[0-9]", w)]
    assert not hashes, f"{path.name} mentions what look like commit hashes: {hashes[:5]}"
    assert not re.search(r"\b(first|second|third|fourth|fifth) session\b", text), f"{path.name} has session history; it belongs in CHANGELOG.md"


def test_readme_links_resolve() -> None:
    text = README.read_text(encoding="utf-8")
    targets = {m.split("#", 1)[0] for m in re.findall(r"\]\(([^)\s]+)\)", text) if not m.startswith(("http://", "https://", "#"))}
    missing = sorted(t for t in targets if not (ROOT / t).exists())
    assert not missing, f"README.md links to missing files: {missing}"
