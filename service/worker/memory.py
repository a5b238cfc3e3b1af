"""The memory one request may take in its worker, computed from its size before any work starts.

A request's memory is modelled from what it asks for (figures measured on
the reference machine, rounded up by about a quarter; see
``docs/reliability.md``):

- its body, held while it is parsed: 1 byte per byte;
- each data point: 300 bytes (parsed values, sorted copies, moments and fits
  at the data);
- a robust fit or anomaly flags: 100 bytes more per data point (robustness
  weights, reweighted copies and the resistant refit; measured at about a
  quarter above a plain fit);
- each curve or prediction point: 1,000 bytes (parsed values, local fits,
  estimates, band ends and the encoded answer);
- bootstrap draws (bootstrap bands, or simultaneous analytic bands): a fixed
  160 MiB, because the deviations are computed in fixed-size slabs of points
  whatever the number of points and replicates.

A request whose model exceeds ``BANDWISE_REQUEST_MEMORY_BYTES`` (1 GiB by
default) is refused with a 422 before fitting starts, so a worker stays
within that much above its resting size.
"""

from __future__ import annotations

from service.contract.errors import ProblemError
from service.contract.models import SmoothRequest

MIB = 1024 * 1024
BYTES_PER_BODY_BYTE = 1
BYTES_PER_DATA_POINT = 300
BYTES_PER_OUTPUT_POINT = 1_000
BYTES_PER_RESISTANT_POINT = 100
DRAW_BYTES = 160 * MIB


def request_bytes(body_bytes: int, data_points: int, output_points: int, draws: bool) -> int:
    """Modelled peak memory of one request above the worker's resting size."""
    return BYTES_PER_BODY_BYTE * body_bytes + BYTES_PER_DATA_POINT * data_points + BYTES_PER_OUTPUT_POINT * output_points + (DRAW_BYTES if draws else 0)


def smooth_bytes(req: SmoothRequest, body_bytes: int, default_curve_points: int) -> int:
    """:func:`request_bytes` of one validated smooth request."""
    curve = req.curve
    if curve is not None and curve.at is not None:
        outputs = len(curve.at)
    elif curve is not None and curve.points is not None:
        outputs = curve.points
    else:
        outputs = default_curve_points
    outputs += len(req.predict_at or ())
    bands = req.bands
    draws = bands is not None and (bands.method != "analytic" or bool(bands.simultaneous))
    resistant = BYTES_PER_RESISTANT_POINT * len(req.x) if (req.robust or req.anomalies is not None) else 0
    return request_bytes(body_bytes, len(req.x), outputs, draws) + resistant


def check_budget(needed: int, limits: dict[str, int]) -> None:
    """Raise a 422 ``memory-budget-exceeded`` problem when ``needed`` is above the per-request budget."""
    budget = limits.get("request_memory_bytes")
    if budget is not None and needed > budget:
        raise ProblemError(
            "memory-budget-exceeded",
            f"This request would need about {needed / MIB:.0f} MiB in its worker; the limit per request is {budget / MIB:.0f} MiB "
            "(BANDWISE_REQUEST_MEMORY_BYTES). Send fewer points, curve points or predict_at values, or leave out bootstrap bands.",
        )
