"""Shared test configuration.

System tests need real programs (nginx, chromium). Locally a missing program
skips the test; with ``REQUIRE_SYSTEM_TESTS=1`` (set by ``.ci/run``) it fails,
so CI can never pass by skipping.
"""

from __future__ import annotations

import os
import shutil
import sys

import pytest

REQUIRE_SYSTEM_TESTS = os.environ.get("REQUIRE_SYSTEM_TESTS") == "1"


def require_program(*names: str) -> str:
    """Return the path of the first program found, or skip (fail in CI)."""
    venv_bin = os.path.dirname(sys.executable)  # programs installed by pip into the test venv
    for name in names:
        path = (
            shutil.which(name)
            or shutil.which(name, path=venv_bin)
            or (f"/usr/sbin/{name}" if os.path.exists(f"/usr/sbin/{name}") else None)
        )
        if path:
            return path
    message = f"needs one of {names} on PATH"
    if REQUIRE_SYSTEM_TESTS:
        pytest.fail(message + " (REQUIRE_SYSTEM_TESTS=1)")
    pytest.skip(message)


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):  # type: ignore[no-untyped-def]
    """Turn any skip of a ``system`` test into a failure when CI requires them."""
    outcome = yield
    report = outcome.get_result()
    if REQUIRE_SYSTEM_TESTS and report.skipped and item.get_closest_marker("system"):
        report.outcome = "failed"
        report.longrepr = f"system test skipped under REQUIRE_SYSTEM_TESTS=1: {report.longrepr}"
