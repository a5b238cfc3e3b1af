"""Weights in ``Accept`` and ``Accept-Encoding`` headers (RFC 9110, sections 12.4.2 and 12.5)."""

from __future__ import annotations

__all__ = ["names_media_type", "quality"]


def quality(params: str) -> float:
    """The ``q`` weight among the ``;``-separated parameters of one header item: 1 when absent, 0 when unreadable."""
    for param in params.split(";"):
        key, _, value = param.partition("=")
        if key.strip().lower() == "q":
            try:
                return float(value.strip())
            except ValueError:
                return 0.0
    return 1.0


def names_media_type(header: str | None, media_type: str) -> bool:
    """True when ``Accept`` names ``media_type`` itself with a weight above 0 (wildcards do not count)."""
    for item in (header or "").split(","):
        media, _, params = item.partition(";")
        if media.strip().lower() == media_type:
            return quality(params) > 0.0
    return False
