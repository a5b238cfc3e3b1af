"""Worker process pieces that are not reached through HTTP."""

from __future__ import annotations

import ctypes.util
import sys

import pytest

from service.worker import tune_allocator


@pytest.mark.skipif(not sys.platform.startswith("linux") or ctypes.util.find_library("c") is None, reason="glibc mallopt only")
def test_allocator_tuning_is_accepted_by_glibc() -> None:
    # mallopt returns 1 on success (glibc manual, "Malloc Tunable Parameters").
    assert tune_allocator() is True
