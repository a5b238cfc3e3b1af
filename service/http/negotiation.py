"""Content-coding negotiation of answers (RFC 9110, section 12.5.3, ``Accept-Encoding``)."""

from __future__ import annotations

from service.contract.accept import quality


def accepts_gzip(header: str) -> bool:
    """True when ``Accept-Encoding`` allows gzip: ``gzip`` (or ``x-gzip``) with a weight above 0, or ``*`` above 0 when gzip is not named.

    ``gzip;q=0`` refuses it, and ``identity`` alone does not ask for it.  A
    weight that is not a number counts as 0 (the coding is not accepted).
    """
    named: float | None = None
    star: float | None = None
    for item in header.split(","):
        coding, _, params = item.partition(";")
        coding = coding.strip().lower()
        if not coding:
            continue
        weight = quality(params)
        if coding in ("gzip", "x-gzip"):
            named = weight if named is None else max(named, weight)
        elif coding == "*":
            star = weight
    if named is not None:
        return named > 0.0
    return star is not None and star > 0.0
