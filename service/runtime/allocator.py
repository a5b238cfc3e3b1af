"""Memory allocator settings for the service's processes (glibc only).

Both the HTTP process (which holds each request body a few times over while
it reads and hands it on) and the workers (which build arrays of the data)
allocate and free blocks of megabytes on every large request.
"""

from __future__ import annotations

_M_TRIM_THRESHOLD = -1
_M_MMAP_THRESHOLD = -3
_MMAP_THRESHOLD = 64 * 1024 * 1024
_TRIM_THRESHOLD = 256 * 1024 * 1024


def tune_allocator() -> bool:
    """Keep freed memory for reuse instead of unmapping it after every request (glibc only).

    By default glibc hands large blocks (an array of 100,000 doubles is one,
    and so is a 1 MB request body) to ``mmap`` and returns them on ``free``, so
    every request pays page faults to get zeroed pages again: about a fifth of
    the time of a 1e5-point fit in a worker, and about a quarter of the HTTP
    process's CPU for a 1.35 MB body (``perf`` profile of 40 requests).
    With blocks up to 64 MiB served from the heap and the heap trimmed only
    beyond 256 MiB of free space, a process reuses its memory from one
    request to the next.  Returns False where ``mallopt`` is not available.
    """
    try:
        import ctypes

        libc = ctypes.CDLL("libc.so.6")
        ok = bool(libc.mallopt(_M_MMAP_THRESHOLD, _MMAP_THRESHOLD) == 1)
        ok = bool(libc.mallopt(_M_TRIM_THRESHOLD, _TRIM_THRESHOLD) == 1) and ok
        return ok
    except (OSError, AttributeError):
        return False
