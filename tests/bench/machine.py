"""The machine a benchmark ran on: a one-line description and a fuller one for report headers."""

from __future__ import annotations

import datetime as _dt
import os
import platform
from importlib import metadata

import numpy as np


def cpu_model() -> str:
    """The CPU's model name from /proc/cpuinfo, else what the platform module knows."""
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or platform.machine()


def memory_gib() -> float:
    """Physical memory in GiB (NaN when the system does not say)."""
    try:
        return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30
    except (ValueError, OSError):
        return float("nan")


def usable_cores() -> int:
    """Cores this process may run on (the affinity mask), else all of them."""
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # pragma: no cover - non-Linux
        return os.cpu_count() or 1


def _version(package: str) -> str:
    try:
        return metadata.version(package)
    except metadata.PackageNotFoundError:
        return "not installed"


def describe() -> str:
    """One line: date, CPU, cores, memory, Python and numpy versions."""
    return (
        f"{_dt.date.today().isoformat()}, {cpu_model()}, {os.cpu_count()} cores, {memory_gib():.0f} GiB, "
        f"Python {platform.python_version()}, numpy {np.__version__}"
    )


def details() -> list[tuple[str, str]]:
    """The machine and software as (name, value) rows, for the header of a benchmark report."""
    load = os.getloadavg() if hasattr(os, "getloadavg") else None
    return [
        ("date (UTC)", _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M")),
        ("CPU", cpu_model()),
        ("cores", f"{os.cpu_count()} ({usable_cores()} usable by this process)"),
        ("memory", f"{memory_gib():.1f} GiB"),
        ("operating system", f"{platform.system()} {platform.release()}"),
        ("Python", f"{platform.python_version()} ({platform.python_implementation()})"),
        ("numpy / scipy / numba", f"{np.__version__} / {_version('scipy')} / {_version('numba')}"),
        ("load average at start (1, 5, 15 min)", ", ".join(f"{v:.2f}" for v in load) if load else "unknown"),
    ]
