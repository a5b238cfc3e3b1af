"""Service settings, read from ``BANDWISE_*`` environment variables.

Every limit and default that a deployment may want to change lives here, so
one place documents them (the README's settings table mirrors this class).
"""

from __future__ import annotations

import difflib
import ipaddress
import os
import re
from collections.abc import Mapping
from typing import Annotated, Any

from pydantic import Field, ValidationError, field_validator
from pydantic_settings import BaseSettings, NoDecode, SettingsConfigDict

_SHA256_HEX = re.compile(r"^[0-9a-f]{64}$")
MIB = 1024 * 1024
PREFIX = "BANDWISE_"
#: variables with the prefix that belong to Bandwise's other parts (the Python client, the
#: gateway's configuration), not to the service's settings
COMPANION_VARIABLES = frozenset({"BANDWISE_URL", "BANDWISE_API_KEY", "BANDWISE_GATEWAY_LISTEN", "BANDWISE_GATEWAY_PORT", "BANDWISE_REPLICA"})
#: settings that ``bandwise serve`` also takes as flags
_FLAGS = {"host": "--host", "port": "--port", "workers": "--workers", "log_level": "--log-level"}
#: settings whose values are not repeated in error messages
_SECRET = frozenset({"api_keys"})


def _default_workers() -> int:
    """Worker processes: one per usable core."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # pragma: no cover - non-Linux
        return max(1, os.cpu_count() or 1)


def _split_csv(value: Any) -> Any:
    """Turn ``"a, b,,c"`` into ``["a", "b", "c"]``; leave lists as they are."""
    if value is None:
        return []
    if isinstance(value, str):
        return [part.strip() for part in value.split(",") if part.strip()]
    return value


class Settings(BaseSettings):
    """Configuration of one service process.

    Each field is read from the environment variable ``BANDWISE_<FIELD>``
    (case-insensitive), e.g. ``BANDWISE_MAX_POINTS=500000``.
    """

    model_config = SettingsConfigDict(env_prefix="BANDWISE_", extra="ignore", frozen=True)

    # Server
    host: str = Field("127.0.0.1", description="Address `bandwise serve` binds to.")
    port: int = Field(8000, ge=0, le=65535, description="TCP port (0 picks a free one).")
    workers: int = Field(default_factory=_default_workers, ge=1, le=256, description="Worker processes doing the numerical work (default: number of cores).")
    queue_size: int = Field(0, ge=0, le=100_000, description="Requests allowed to wait for a free worker; beyond that the service answers 503 at once. 0 means 4 x workers.")
    deadline_seconds: float = Field(30.0, gt=0, le=3600, description="Per-request deadline (waiting plus work); past it the work is stopped and the answer is 503.")
    drain_seconds: float = Field(20.0, ge=0, le=3600, description="On SIGTERM, how long in-flight requests may take to finish before the process exits.")
    retry_after_seconds: int = Field(2, ge=1, le=3600, description="Value of Retry-After on 503 answers when the service sheds load.")
    header_timeout_seconds: float = Field(10.0, gt=0, le=3600, description="A connection must complete each request's header section within this time (from connecting, or from the request's first byte); else it is closed.")
    idle_timeout_seconds: float = Field(5.0, gt=0, le=3600, description="A keep-alive connection idle this long between requests is closed.")
    send_timeout_seconds: float = Field(30.0, gt=0, le=3600, description="A client that takes none of its answer for this long is disconnected and the answer dropped.")
    worker_nice: int = Field(5, ge=0, le=19, description="Niceness added to worker processes, which also run as batch (throughput) tasks on Linux, so the HTTP process answers first when the CPU is short; 0 keeps the default scheduling.")

    # Request limits
    max_body_bytes: int = Field(128 * MIB, ge=1024, description="Largest request body in bytes (413 beyond, checked while reading). The default holds the largest batch (BANDWISE_MAX_BATCH_POINTS points) as JSON with every number written at full precision.")
    body_bytes_in_flight: int = Field(256 * MIB, ge=1024, description="Most bytes of request bodies the HTTP process receives and holds at once, over all requests (at least BANDWISE_MAX_BODY_BYTES); beyond it: 503 with Retry-After before the body is read.")
    request_memory_bytes: int = Field(1024 * MIB, ge=64 * MIB, description="Memory one request may take in its worker above the worker's resting size, modelled from the request's size before work starts (docs/reliability.md); beyond it: 422.")
    max_points: int = Field(2_000_000, ge=2, description="Most data points in one series.")
    max_predict_points: int = Field(100_000, ge=1, description="Most entries in `predict_at`.")
    max_curve_points: int = Field(10_000, ge=2, description="Most curve points (`curve.points` or `curve.at`).")
    max_replicates: int = Field(5_000, ge=1, description="Most bootstrap replicates.")
    max_batch_series: int = Field(1_000, ge=1, description="Most series in one batch.")
    max_batch_points: int = Field(2_000_000, ge=2, description="Most data points over all series of one batch.")
    max_candidates: int = Field(200, ge=2, description="Most candidate bandwidths a selector may score.")

    # Defaults
    default_curve_points: int = Field(200, ge=2, description="Curve points when the request does not say.")

    # Security and cross-origin access
    api_keys: Annotated[list[str], NoDecode] = Field(default_factory=list, description="Comma-separated SHA-256 hex digests of accepted API keys; empty means no key is needed.")
    cors_origins: Annotated[list[str], NoDecode] = Field(default_factory=list, description="Comma-separated origins allowed to call the API from a browser; empty turns CORS off.")
    rate_limit_per_minute: int = Field(0, ge=0, description="Requests per minute allowed per client (API key, else address) on /v1; 0 turns the limit off. Beyond it: 429.")
    rate_limit_burst: int = Field(0, ge=0, description="Burst size of the per-client limit; 0 means the per-minute figure.")
    trusted_proxies: Annotated[list[str], NoDecode] = Field(default_factory=list, description="Comma-separated addresses or networks of proxies whose X-Forwarded-For / X-Forwarded-Proto are believed; empty (the default) trusts none, so the client is the connection's peer.")
    auth_failures_per_minute: int = Field(10, ge=0, description="Failed authentications allowed per minute from one address when API keys are on; beyond it: 429 without checking the key. 0 turns the brake off.")

    # Responses and logs
    gzip_min_bytes: int = Field(64 * 1024, ge=0, description="API responses at least this large are gzip-compressed when the client accepts gzip.")
    gzip_level: int = Field(4, ge=1, le=9, description="gzip compression level.")
    log_level: str = Field("info", description="Log level: debug, info, warning, error.")
    access_log: bool = Field(True, description="Write one JSON log line per request.")

    @field_validator("api_keys", mode="before")
    @classmethod
    def _parse_keys(cls, value: Any) -> Any:
        keys = [k.lower() for k in _split_csv(value)]
        for key in keys:
            if not _SHA256_HEX.match(key):
                raise ValueError("each API key entry must be the 64-character hex SHA-256 digest of a key, not the key itself")
        return keys

    @field_validator("trusted_proxies", mode="before")
    @classmethod
    def _parse_proxies(cls, value: Any) -> Any:
        proxies = _split_csv(value)
        for proxy in proxies:
            try:
                ipaddress.ip_network(proxy, strict=False)
            except ValueError:
                raise ValueError(f"{proxy!r} is not an IP address or network (e.g. 10.0.0.5 or 10.0.0.0/24)") from None
        return proxies

    @field_validator("cors_origins", mode="before")
    @classmethod
    def _parse_origins(cls, value: Any) -> Any:
        return _split_csv(value)

    @field_validator("log_level")
    @classmethod
    def _check_level(cls, value: str) -> str:
        value = value.lower()
        if value not in {"debug", "info", "warning", "error", "critical"}:
            raise ValueError("log_level must be one of debug, info, warning, error, critical")
        return value

    @property
    def effective_queue_size(self) -> int:
        """Waiting-room size of the worker pool."""
        return self.queue_size or 4 * self.workers

    def limits(self) -> dict[str, int]:
        """The request limits, as handed to request validation."""
        return {
            "max_points": self.max_points,
            "max_predict_points": self.max_predict_points,
            "max_curve_points": self.max_curve_points,
            "max_replicates": self.max_replicates,
            "max_batch_series": self.max_batch_series,
            "max_batch_points": self.max_batch_points,
            "max_candidates": self.max_candidates,
            "default_curve_points": self.default_curve_points,
            "request_memory_bytes": self.request_memory_bytes,
        }


def unknown_variables(environ: Mapping[str, str]) -> list[tuple[str, str | None]]:
    """``BANDWISE_*`` variables that name no setting, each with the closest setting's name (or None).

    Settings ignore them, so a misspelt variable would silently leave the default
    in force; the service logs a warning for each at start.  The client's and
    the gateway's variables (:data:`COMPANION_VARIABLES`) are not reported.
    """
    fields = sorted(name.upper() for name in Settings.model_fields)
    out: list[tuple[str, str | None]] = []
    for name in sorted(environ):
        upper = name.upper()
        if upper.startswith(PREFIX) and upper.removeprefix(PREFIX) not in fields and upper not in COMPANION_VARIABLES:
            close = difflib.get_close_matches(upper.removeprefix(PREFIX), fields, n=1, cutoff=0.75)  # the shared prefix would make every name look close
            out.append((name, PREFIX + close[0] if close else None))
    return out


def describe_errors(exc: ValidationError) -> list[str]:
    """One line per refused setting: its name, where it is set and why it was refused.

    The value is repeated except for API keys (an operator who put a key itself
    there, not its digest, should not find it in the logs).
    """
    lines = []
    for error in exc.errors():
        field = str(error["loc"][0]) if error["loc"] else "settings"
        where = " or ".join(([_FLAGS[field]] if field in _FLAGS else []) + [PREFIX + field.upper()])
        shown = "" if field in _SECRET or "input" not in error else f" = {error['input']!r}"
        message = str(error["msg"]).removeprefix("Value error, ")
        lines.append(f"invalid setting {field}{shown} ({where}): {message}")
    return lines
