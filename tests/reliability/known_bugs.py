"""Service defects found by fuzzing that are not fixed yet.

Each entry has a strict-xfail regression test in ``test_regressions.py``.
The fuzz test counts a failure that matches an entry as *known* (reported in
the summary, not failing the run); anything else fails it. When a defect is
fixed its regression test starts passing, strict xfail turns that into a
failure, and the entry here must be deleted together with the marker.

Fixed so far (their regression tests are plain tests now): GRID-OVERFLOW
(500 from the engine choice for extreme spans or bandwidths), SPAN-OVERFLOW
(200 with a null curve grid when ``max(x) - min(x)`` overflowed),
FEW-POINTS-AUTO (automatic bandwidth refused on short series), READYZ-SCHEMA
(``/readyz`` answered fields its documented schema forbade). None is open now.
"""

from __future__ import annotations
