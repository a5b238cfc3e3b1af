"""A one-line description of the machine a benchmark ran on."""

from __future__ import annotations

import datetime as _dt
import os
import platform

import numpy as np


def describe() -> str:
    cpu = platform.processor() or platform.machine()
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    cpu = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    try:
        mem = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30
    except (ValueError, OSError):
        mem = float("nan")
    return (
        f"{_dt.date.today().isoformat()}, {cpu}, {os.cpu_count()} cores, {mem:.0f} GiB, "
        f"Python {platform.python_version()}, numpy {np.__version__}"
    )
