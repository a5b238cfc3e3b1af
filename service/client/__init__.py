"""Python client for Bandwise: typed results, clear errors, safe retries.

::

    from service.client import BandwiseClient

    with BandwiseClient("http://127.0.0.1:8000", api_key=key) as bw:
        result = bw.smooth(temperature_c, power_kw, kernel="epanechnikov")
        result.bandwidth.value            # float, in x units
        result.curve.arrays().estimate    # numpy array, NaN where undefined

:class:`BandwiseClient` (blocking) and :class:`AsyncBandwiseClient` (asyncio)
have the same methods and give the same results.  Both are built on httpx and
are context managers.

Results are the service's own response models (:mod:`service.contract.models`), so a
result has exactly the fields of the JSON contract; the subclasses here only
add ``arrays()`` helpers and the ``request_id`` of the answer.  Fields the
service adds in a later version are ignored rather than rejected.

Retries are safe: every Bandwise endpoint is a pure function of its request
body (no state changes on the server, bootstrap bands are seeded), so sending
the same ``POST`` again can only give the same answer.  The client retries on
connection errors and on 429 / 502 / 503 answers, waits at least as long as
``Retry-After`` says, and stops after a bounded number of attempts and a
bounded total wait (:class:`RetryPolicy`).

Failures raise a :class:`BandwiseError` subclass carrying the RFC 9457
problem details (status, title, detail, type, field errors, request id).
Input the client can check by itself (lengths, non-finite or non-numeric
values, empty arrays, unknown or out-of-range options) is refused before
anything is sent.

References
----------
RFC 9457, "Problem Details for HTTP APIs", IETF, 2023.
RFC 9110, "HTTP Semantics", IETF, 2022, section 10.2.3 (Retry-After).
M. Brooker, "Exponential Backoff And Jitter", AWS Architecture Blog, 2015
(the "full jitter" schedule used by :meth:`RetryPolicy.delay`).
"""

from __future__ import annotations

import asyncio
import difflib
import logging
import random
import time
import uuid
from collections.abc import AsyncIterator, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, TypeVar

import httpx
import numpy as np
import orjson
from pydantic import BaseModel, ValidationError

from service import __version__
from service.client import arrow as arrow_codec
from service.client.errors import (
    BandwiseError,
    ConnectionFailed,
    DeadlineExceeded,
    Overloaded,
    PayloadTooLarge,
    ServerError,
    Timeout,
    Unauthorized,
    UnexpectedResponse,
    UnsuitableData,
    ValidationFailed,
    error_from_problem,
    type_title,
)
from service.client.fan_out import BatchLimits, FanOut, default_batch_series, run_tasks, run_threads
from service.client.results import (
    _CAN_IGNORE_EXTRA,
    AnomalyArrays,
    BandwidthResult,
    BatchResult,
    CurveArrays,
    CurveResult,
    FittedArrays,
    FittedResult,
    KernelsResult,
    PredictionArrays,
    SelectionArrays,
    SelectionResult,
    SmoothResult,
    _Answer,
    to_numpy,
)
from service.client.retry import RetryPolicy, parse_retry_after
from service.client.stream import NDJSON_ACCEPT, SlotAnswer, read_line
from service.client.time_values import is_time_axis, time_options, to_rfc3339
from service.contract.arrow_layout import ARROW_STREAM
from service.contract.errors import REASON_PHRASES
from service.contract.field_errors import RENAMED_FIELDS, field_errors
from service.contract.models import BandwidthRequest, FieldErrorOut, SmoothRequest

__all__ = [
    "AnomalyArrays",
    "AsyncBandwiseClient",
    "BandwiseClient",
    "BandwiseError",
    "BandwidthResult",
    "BatchLimits",
    "BatchResult",
    "ConnectionFailed",
    "CurveArrays",
    "CurveResult",
    "FittedArrays",
    "FittedResult",
    "SelectionArrays",
    "SelectionResult",
    "error_from_problem",
    "type_title",
    "DeadlineExceeded",
    "KernelsResult",
    "Overloaded",
    "PayloadTooLarge",
    "PredictionArrays",
    "RetryPolicy",
    "ServerError",
    "SlotAnswer",
    "SmoothResult",
    "Timeout",
    "Unauthorized",
    "UnexpectedResponse",
    "UnsuitableData",
    "ValidationFailed",
    "parse_retry_after",
    "to_numpy",
]

log = logging.getLogger("bandwise.client")

ArrayLike = Sequence[float] | Sequence[Any] | np.ndarray  # numbers, or date-times for x (datetime64, datetime, RFC 3339)
DEFAULT_TIMEOUT = httpx.Timeout(60.0, connect=5.0)
USER_AGENT = f"bandwise-client/{__version__}"

# Per-call ``extra="ignore"`` (pydantic >= 2.12) keeps results readable when a

def _problem_slug(response: httpx.Response) -> str:
    """The problem type slug of an error answer, or an empty string."""
    if "json" not in response.headers.get("content-type", ""):
        return ""
    try:
        doc = orjson.loads(response.content)
    except orjson.JSONDecodeError:
        return ""
    kind = doc.get("type") if isinstance(doc, dict) else None
    return kind.rsplit("/", 1)[-1] if isinstance(kind, str) and kind.startswith("/problems/") else ""


def _plural(count: int, word: str) -> str:
    return f"{count} {word}" if count == 1 else f"{count} {word}s"


class _Call:
    """Retry bookkeeping of one logical call (shared by the sync and async clients)."""

    def __init__(self, policy: RetryPolicy, rng: random.Random, method: str, url: str, timeout: httpx.Timeout) -> None:
        self.policy = policy
        self.rng = rng
        self.method = method
        self.url = url
        self.timeout = timeout
        # One id for all attempts, so the service's logs show them as one call.
        self.request_id = uuid.uuid4().hex
        self.started = time.monotonic()
        self.attempts = 0
        self.note = ""

    def begin(self) -> None:
        self.attempts += 1

    def _plan(self, retry_after: float | None, reason: str) -> float | None:
        elapsed = time.monotonic() - self.started
        if self.attempts >= self.policy.attempts:
            if self.attempts > 1:
                self.note = f"Gave up after {_plural(self.attempts, 'attempt')} in {elapsed:.1f} s (RetryPolicy.attempts={self.policy.attempts})."
            return None
        delay = self.policy.delay(self.attempts - 1, self.rng) + (retry_after or 0.0)
        if elapsed + delay > self.policy.total:
            asked = f" (Retry-After {retry_after:g} s)" if retry_after is not None else ""
            self.note = (
                f"Gave up after {_plural(self.attempts, 'attempt')} in {elapsed:.1f} s: waiting {delay:.1f} s more{asked} "
                f"would pass the retry budget of {self.policy.total:g} s (RetryPolicy.total)."
            )
            return None
        log.info(
            "retrying %s %s in %.2f s after %s (attempt %d of %d)",
            self.method, self.url, delay, reason, self.attempts + 1, self.policy.attempts,
            extra={"request_id": self.request_id, "retry_after": retry_after},
        )
        return delay

    def after_response(self, response: httpx.Response) -> float | None:
        """Seconds to wait before sending again, or None when this answer is final."""
        status = response.status_code
        if status not in self.policy.statuses:
            return None
        if status == 503 and _problem_slug(response) == "deadline-exceeded":
            return None
        return self._plan(parse_retry_after(response.headers.get("retry-after")), f"HTTP {status}")

    def after_error(self, exc: httpx.TransportError) -> float:
        """Seconds to wait before sending again after ``exc``; raises the client error when not retrying."""
        connection = isinstance(exc, (httpx.ConnectTimeout, httpx.NetworkError, httpx.RemoteProtocolError))
        timeout = isinstance(exc, httpx.TimeoutException) and not isinstance(exc, httpx.ConnectTimeout)
        delay = None
        if connection or (timeout and self.policy.retry_timeouts):
            delay = self._plan(None, type(exc).__name__)
        if delay is None:
            raise self.transport_error(exc) from exc
        return delay

    def transport_error(self, exc: httpx.TransportError) -> BandwiseError:
        common: dict[str, Any] = {"attempts": self.attempts, "note": self.note, "request_id": self.request_id}
        if isinstance(exc, httpx.TimeoutException) and not isinstance(exc, httpx.ConnectTimeout):
            limit = {httpx.ReadTimeout: self.timeout.read, httpx.WriteTimeout: self.timeout.write, httpx.PoolTimeout: self.timeout.pool}.get(type(exc))
            within = f" within {limit:g} s" if limit is not None else ""
            what = {httpx.ReadTimeout: "no answer", httpx.WriteTimeout: "could not send the request", httpx.PoolTimeout: "no free connection"}.get(type(exc), "timed out")
            return Timeout(f"{what}{within} from {self.method} {self.url} ({type(exc).__name__})", title="Timeout", **common)
        reason = str(exc) or type(exc).__name__
        return ConnectionFailed(f"could not get an answer from {self.method} {self.url}: {reason}", title="Connection failed", **common)


# ---------------------------------------------------------------- requests


_DATA_FIELDS = ("x", "y", "weights")


def _to_json_ready(value: Any) -> Any:
    """numpy arrays and scalars (also inside lists and dicts) as plain Python values."""
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, Mapping):
        return {str(k): _to_json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_to_json_ready(v) for v in value]
    return value


def _first(mask: np.ndarray) -> int:
    return int(np.flatnonzero(mask)[0])


def _numbers(values: Any, name: str, errors: list[dict[str, str]]) -> np.ndarray | None:
    """``values`` as a flat float64 array, or None after appending what is wrong to ``errors``."""
    def fail(message: str, kind: str) -> None:
        errors.append({"field": name, "message": message, "type": kind})

    if values is None or isinstance(values, (str, bytes, Mapping)):
        fail(f"must be a list or array of numbers, got {type(values).__name__}", "wrong_type")
        return None
    try:
        array = np.asarray(values)
    except (ValueError, TypeError):
        fail("must be a flat list of numbers", "wrong_type")
        return None
    if array.ndim != 1:
        fail(f"must be one-dimensional, got shape {array.shape}", "wrong_type")
        return None
    if array.size == 0:
        fail("is empty: at least 2 points are needed", "too_short")
        return None
    if array.dtype.kind not in "iuf":
        bad = next((i for i, v in enumerate(array.tolist()) if isinstance(v, bool) or not isinstance(v, (int, float))), 0)
        fail(f"must hold numbers only; {name}[{bad}] is {array.tolist()[bad]!r}", "wrong_type")
        return None
    array = np.ascontiguousarray(array, dtype=np.float64)
    finite = np.isfinite(array)
    if not finite.all():
        count = int(array.size - np.count_nonzero(finite))
        fail(
            f"holds {_plural(count, 'non-finite value')} (NaN or infinity), the first at index {_first(~finite)}; "
            "drop or fill those points before sending",
            "not_finite",
        )
        return None
    return array


def _times(values: Any, name: str, errors: list[dict[str, str]]) -> np.ndarray | None:
    """Date-times (``datetime64``, ``datetime``, RFC 3339 strings) as an object array of RFC 3339 strings (None for NaT)."""
    try:
        text = to_rfc3339(values)
    except (TypeError, ValueError) as exc:
        errors.append({"field": name, "message": f"must hold date-times only: {exc}", "type": "wrong_type"})
        return None
    if any(t is not None for t in text):
        # the service's own reader, so a string it would refuse is refused here, before the upload
        from service.contract.timeaxis import TimeValueError, parse_timestamps

        try:
            parse_timestamps(["1970-01-01T00:00:00Z" if t is None else t for t in text])
        except TimeValueError as exc:
            where = f"{name}[{exc.index}]: " if exc.index is not None else ""
            reason = str(exc).split(" = ", 1)[-1] if exc.index is not None else str(exc)
            errors.append({"field": name, "message": f"must hold RFC 3339 date-times; {where}{reason}", "type": "bad_timestamp"})
            return None
    return np.array(text, dtype=object)


def _unknown_option_message(name: str, model: type[BaseModel]) -> str:
    known = sorted(set(model.model_fields) - set(_DATA_FIELDS))
    close = difflib.get_close_matches(name, known, n=1)
    suggestion = f" (did you mean {close[0]!r}?)" if close else ""
    return f"unknown option {name!r}{suggestion}; options are {', '.join(known)}"


def _check_options(options: Mapping[str, Any], model: type[BaseModel], prefix: str, errors: list[dict[str, str]], with_weights: bool) -> None:
    """Validate the options with the service's own request model (data replaced by placeholders)."""
    probe: dict[str, Any] = {**options, "x": [0.0, 1.0], "y": [0.0, 0.0]}
    if with_weights:
        probe["weights"] = [1.0, 1.0]
    try:
        model.model_validate(probe)
    except ValidationError as exc:
        for item in field_errors(exc.errors(include_url=False, include_input=False), prefix):
            if item["type"] == "unknown_field" and item["field"].rsplit(".", 1)[-1] not in RENAMED_FIELDS:
                item["message"] = _unknown_option_message(item["field"].rsplit(".", 1)[-1], model)
            errors.append(item)


def _series_body(x: Any, y: Any, options: Mapping[str, Any], model: type[BaseModel], prefix: str, errors: list[dict[str, str]], validate: bool) -> dict[str, Any]:
    """Check one series and its options; return its JSON body (numpy arrays for the data)."""
    def name(field_name: str) -> str:
        return f"{prefix}.{field_name}" if prefix else field_name

    options = dict(options)
    for key in ("x", "y"):
        if key in options:
            raise TypeError(f"pass {key} as a positional argument, not as an option")
    weights = options.pop("weights", None)
    before = len(errors)
    time_x = is_time_axis(x)
    if time_x:
        options = time_options(options)
    xa = _times(x, name("x"), errors) if time_x else _numbers(x, name("x"), errors)
    ya = _numbers(y, name("y"), errors)
    wa = _numbers(weights, name("weights"), errors) if weights is not None else None
    if xa is not None and xa.size < 2:
        errors.append({"field": name("x"), "message": f"at least 2 points are needed, got {xa.size}", "type": "too_short"})
    if xa is not None and ya is not None and ya.size != xa.size:
        errors.append({"field": name("y"), "message": f"y has {ya.size} values but x has {xa.size}", "type": "invalid"})
    if wa is not None:
        if xa is not None and wa.size != xa.size:
            errors.append({"field": name("weights"), "message": f"weights has {wa.size} values but x has {xa.size}", "type": "invalid"})
        elif (wa < 0).any():
            errors.append({"field": name("weights"), "message": f"weights must be >= 0; {name('weights')}[{_first(wa < 0)}] is {wa[_first(wa < 0)]:g}", "type": "too_small"})
        elif not (wa > 0).any():
            errors.append({"field": name("weights"), "message": "at least one weight must be > 0", "type": "invalid"})
    plain = _to_json_ready(options)
    if validate:
        _check_options(plain, model, prefix, errors, weights is not None)
    if len(errors) > before:
        return {}
    body: dict[str, Any] = {"x": xa.tolist() if time_x and xa is not None else xa, "y": ya}
    if wa is not None:
        body["weights"] = wa
    body.update(plain)
    return body


def _refuse(errors: list[dict[str, str]], what: str) -> ValidationFailed:
    items = [FieldErrorOut(**e) for e in errors]
    return ValidationFailed(f"the {what} has invalid fields and was not sent", title=REASON_PHRASES[422], type="/problems/validation-error", errors=items)


@dataclass(frozen=True)
class _Prepared:
    method: str
    path: str
    body: bytes | None
    model: type[_Answer]
    content_type: str = "application/json"


def _dumps(body: Any) -> bytes:
    return orjson.dumps(body, option=orjson.OPT_SERIALIZE_NUMPY)


# ---------------------------------------------------------------- responses

_R = TypeVar("_R", bound=_Answer)


def _validate(model: type[_R], data: Any) -> _R:
    if _CAN_IGNORE_EXTRA:
        return model.model_validate(data, extra="ignore")
    return model.model_validate(data)  # pragma: no cover - pydantic < 2.12


def _read_result(response: httpx.Response, model: type[_R], call: _Call) -> _R:
    """The typed result of a 2xx answer; raises the matching :class:`BandwiseError` otherwise."""
    status = response.status_code
    request_id = response.headers.get("x-request-id")
    if not 200 <= status < 300:
        raise _error_from_response(response, call)
    try:
        result = _validate(model, orjson.loads(response.content))
    except orjson.JSONDecodeError:
        kind = response.headers.get("content-type", "no content type")
        raise UnexpectedResponse(f"{call.method} {call.url} answered {status} with a body that is not JSON ({kind})", status=status, title="Unexpected response", request_id=request_id, attempts=call.attempts) from None
    except ValidationError as exc:
        where = "; ".join(f"{e['field']}: {e['message']}" for e in field_errors(exc.errors(include_url=False, include_input=False))[:5])
        raise UnexpectedResponse(f"{call.method} {call.url} answered {status} with JSON that does not match the Bandwise contract ({where})", status=status, title="Unexpected response", request_id=request_id, attempts=call.attempts) from None
    result._request_id = request_id
    return result


def _error_from_response(response: httpx.Response, call: _Call) -> BandwiseError:
    status = response.status_code
    doc: dict[str, Any] | None = None
    if "json" in response.headers.get("content-type", ""):
        try:
            parsed = orjson.loads(response.content)
        except orjson.JSONDecodeError:
            parsed = None
        if isinstance(parsed, dict):
            doc = parsed
    if doc is None:
        kind = response.headers.get("content-type", "no content type").split(";")[0]
        doc = {"detail": f"{call.method} {call.url} answered {status} without problem details ({kind})"}
    return error_from_problem(
        doc,
        status,
        request_id=response.headers.get("x-request-id"),
        retry_after=parse_retry_after(response.headers.get("retry-after")),
        attempts=call.attempts,
        note=call.note,
    )


# ------------------------------------------------------------------ clients


def _check_base_url(base_url: str | httpx.URL) -> httpx.URL:
    url = httpx.URL(str(base_url))
    if url.scheme not in ("http", "https") or not url.host:
        raise ValueError(f"base_url must be an http:// or https:// URL with a host, got {str(base_url)!r}")
    return url


def _timeout(timeout: float | httpx.Timeout | None) -> httpx.Timeout:
    if isinstance(timeout, httpx.Timeout):
        return timeout
    if timeout is None:
        return httpx.Timeout(None)
    if not timeout > 0:
        raise ValueError("timeout must be > 0 seconds (or None for no timeout)")
    return httpx.Timeout(float(timeout), connect=min(float(timeout), DEFAULT_TIMEOUT.connect or float(timeout)))


class _ClientBase:
    """What both clients share: settings, request preparation."""

    def __init__(
        self,
        base_url: str | httpx.URL,
        api_key: str | None,
        timeout: float | httpx.Timeout | None,
        retry: RetryPolicy | None,
        validate: bool,
        headers: Mapping[str, str] | None,
    ) -> None:
        self.base_url = _check_base_url(base_url)
        self.retry = retry if retry is not None else RetryPolicy()
        self.timeout = _timeout(timeout)
        self.validate = validate
        self._rng = random.Random()
        self._headers = {"User-Agent": USER_AGENT, "Accept": "application/json, application/problem+json"}
        self._headers.update(headers or {})
        if api_key is not None:
            if not api_key or api_key != api_key.strip() or any(c in api_key for c in "\r\n"):
                raise ValueError("api_key must be a non-empty string without surrounding whitespace or line breaks")
            self._headers["Authorization"] = f"Bearer {api_key}"

    def __repr__(self) -> str:
        keyed = ", api_key=***" if "Authorization" in self._headers else ""
        return f"{type(self).__name__}({str(self.base_url)!r}{keyed})"

    def _call(self, prepared: _Prepared) -> _Call:
        return _Call(self.retry, self._rng, prepared.method, self._url(prepared.path), self.timeout)

    def _url(self, path: str) -> str:
        return str(self.base_url).rstrip("/") + path

    def _request_headers(self, call: _Call, prepared: _Prepared) -> dict[str, str]:
        headers = {"X-Request-ID": call.request_id}
        if prepared.body is not None:
            headers["Content-Type"] = prepared.content_type
        return headers

    arrow_min_points: int | None = arrow_codec.ARROW_MIN_POINTS
    """Series of at least this many points go as an Arrow IPC stream when pyarrow is installed; None: always JSON."""

    def _encode(self, body: dict[str, Any]) -> tuple[bytes, str]:
        """The body as JSON, or as an Arrow stream for a series of at least ``arrow_min_points`` points."""
        threshold = self.arrow_min_points
        if threshold is not None and len(body["x"]) >= threshold and arrow_codec.available():
            return arrow_codec.request_stream(body), ARROW_STREAM
        return _dumps(body), "application/json"

    def _prepare_smooth(self, x: ArrayLike, y: ArrayLike, options: Mapping[str, Any]) -> _Prepared:
        errors: list[dict[str, str]] = []
        body = _series_body(x, y, options, SmoothRequest, "", errors, self.validate)
        if errors:
            raise _refuse(errors, "smooth request")
        payload, content_type = self._encode(body)
        return _Prepared("POST", "/v1/smooth", payload, SmoothResult, content_type)

    def _prepare_bandwidth(self, x: ArrayLike, y: ArrayLike, options: Mapping[str, Any]) -> _Prepared:
        errors: list[dict[str, str]] = []
        body = _series_body(x, y, options, BandwidthRequest, "", errors, self.validate)
        if errors:
            raise _refuse(errors, "bandwidth request")
        payload, content_type = self._encode(body)
        return _Prepared("POST", "/v1/bandwidth", payload, BandwidthResult, content_type)

    def _prepare_batch(self, series: Iterable[Mapping[str, Any]]) -> _Prepared:
        return _Prepared("POST", "/v1/smooth/batch", _dumps({"series": self._series_bodies(series)}), BatchResult)

    def _series_bodies(self, series: Iterable[Mapping[str, Any]]) -> list[dict[str, Any]]:
        """The checked JSON body of every series of a batch; raises :class:`ValidationFailed` naming each bad one."""
        if isinstance(series, Mapping) or isinstance(series, (str, bytes)):
            raise TypeError("series must be a list of mappings, each with x, y and the options of smooth()")
        errors: list[dict[str, str]] = []
        bodies = []
        for index, item in enumerate(series):
            prefix = f"series[{index}]"
            if not isinstance(item, Mapping):
                errors.append({"field": prefix, "message": f"must be a mapping with x, y and options, got {type(item).__name__}", "type": "wrong_type"})
                continue
            options = {k: v for k, v in item.items() if k not in ("x", "y")}
            for key in ("x", "y"):
                if key not in item:
                    errors.append({"field": f"{prefix}.{key}", "message": "this field is required; add it.", "type": "missing"})
            if "x" in item and "y" in item:
                bodies.append(_series_body(item["x"], item["y"], options, SmoothRequest, prefix, errors, self.validate))
        if not bodies and not errors:
            errors.append({"field": "series", "message": "at least one series is needed", "type": "too_short"})
        if errors:
            raise _refuse(errors, "batch request")
        return bodies

    def _fan_out(self, series: Iterable[Mapping[str, Any]], connections: int, batch_series: int | None, limits: BatchLimits | None) -> FanOut:
        if connections < 1:
            raise ValueError("connections must be >= 1")
        bodies = self._series_bodies(series)
        limits = limits if limits is not None else BatchLimits()
        size = batch_series if batch_series is not None else default_batch_series(len(bodies), connections, limits)
        return FanOut([_dumps(b) for b in bodies], [len(b["x"]) for b in bodies], limits, size, self.retry, self._rng)

    @staticmethod
    def _prepare_kernels() -> _Prepared:
        return _Prepared("GET", "/v1/kernels", None, KernelsResult)


class BandwiseClient(_ClientBase):
    """Blocking Bandwise client.

    Parameters
    ----------
    base_url : str
        Where the service is, e.g. ``"http://127.0.0.1:8000"`` (a path prefix
        behind a gateway is kept: ``"https://gw.example/bandwise"``).
    api_key : str, optional
        Sent as ``Authorization: Bearer <key>`` when given.
    timeout : float or httpx.Timeout or None, default 60 s (connect 5 s)
        Per attempt.  A float sets every phase (connect at most 5 s).
    retry : RetryPolicy, optional
        Defaults to :class:`RetryPolicy` ``()``; ``RetryPolicy(attempts=1)``
        turns retries off.
    validate : bool, default True
        Check options against the request model before sending (data arrays
        are always checked).  Turn off to send options this client version
        does not know.
    headers : mapping, optional
        Extra headers for every request.
    transport : httpx.BaseTransport, optional
        E.g. a transport with TLS client certificates, or one into an app in
        the same process.

    Examples
    --------
    >>> with BandwiseClient("http://127.0.0.1:8000") as bw:   # doctest: +SKIP
    ...     result = bw.smooth([1, 2, 3, 4], [2.0, 2.5, 3.9, 4.1], bandwidth=1.5)
    """

    def __init__(
        self,
        base_url: str | httpx.URL = "http://127.0.0.1:8000",
        *,
        api_key: str | None = None,
        timeout: float | httpx.Timeout | None = DEFAULT_TIMEOUT,
        retry: RetryPolicy | None = None,
        validate: bool = True,
        headers: Mapping[str, str] | None = None,
        transport: httpx.BaseTransport | None = None,
    ) -> None:
        super().__init__(base_url, api_key, timeout, retry, validate, headers)
        self._http = httpx.Client(base_url=self.base_url, headers=self._headers, timeout=self.timeout, transport=transport)

    def __enter__(self) -> BandwiseClient:
        return self

    def __exit__(self, *exc_info: Any) -> None:
        self.close()

    def close(self) -> None:
        """Close the connection pool."""
        self._http.close()

    def _send(self, prepared: _Prepared) -> Any:
        call = self._call(prepared)
        headers = self._request_headers(call, prepared)
        while True:
            call.begin()
            try:
                response = self._http.request(prepared.method, prepared.path.lstrip("/"), content=prepared.body, headers=headers)
            except httpx.TransportError as exc:
                time.sleep(call.after_error(exc))
                continue
            delay = call.after_response(response)
            if delay is None:
                return _read_result(response, prepared.model, call)
            response.close()
            time.sleep(delay)

    def smooth(self, x: ArrayLike, y: ArrayLike, /, **options: Any) -> SmoothResult:
        """Smooth one series (``POST /v1/smooth``).

        Parameters
        ----------
        x, y : array_like
            Same length, at least 2 finite numbers each (lists or numpy arrays). ``x`` may also hold
            date-times: a ``datetime64`` array, ``datetime`` objects (pandas timestamps too; naive ones
            read as UTC) or RFC 3339 strings; then ``predict_at`` and ``curve["at"]`` may too, lengths
            (``bandwidth``, ``bandwidth_min``, ``bandwidth_max``, ``max_gap``) may be ``timedelta``,
            ``timedelta64`` or ISO 8601 durations (``"PT3H"``), and ``result.curve.arrays().x`` is
            ``datetime64[ms]``.
        **options
            All optional; the service's defaults apply to what is not given:
            ``weights`` (array >= 0), ``kernel`` ("gaussian"), ``degree``
            (0, 1 or 2; default 1), ``bandwidth`` (number > 0 or "auto"),
            ``selector`` ("gcv"), ``rule`` ("min" or "one_se"), ``candidate_count``,
            ``bandwidth_min``, ``bandwidth_max``, ``engine``, ``curve``
            (``{"points": n}`` or ``{"at": [...]}``), ``predict_at`` (array),
            ``bands`` (``{"method", "level", "replicates", "seed",
            "simultaneous"}``; pointwise unless simultaneous),
            ``include_fitted``, ``noise`` ("auto", "independent" or
            "correlated": serial correlation of the noise in x order; the
            answer's ``diagnostics.noise`` and ``diagnostics.noise_autocorrelation``
            say which path was used and the lag-1 estimate), ``robust`` (bool),
            ``family`` ("gaussian" or "poisson" for counts) and ``anomalies``
            (``{"level": 0.999}``; see :meth:`SmoothResult.anomaly_arrays`).  Unknown
            options and values out of range are refused before sending
            (:class:`ValidationFailed`, ``status`` None).

        Returns
        -------
        SmoothResult
        """
        return self._send(self._prepare_smooth(x, y, options))  # type: ignore[no-any-return]

    def smooth_batch(self, series: Iterable[Mapping[str, Any]]) -> BatchResult:
        """Smooth many series in one call (``POST /v1/smooth/batch``).

        Parameters
        ----------
        series : iterable of mapping
            Each ``{"x": ..., "y": ..., **options}`` with the options of :meth:`smooth`.
            Any invalid series refuses the whole batch before sending.

        Returns
        -------
        BatchResult
            One slot per series; a series the service could not fit fails alone.
        """
        return self._send(self._prepare_batch(series))  # type: ignore[no-any-return]

    def bandwidth(self, x: ArrayLike, y: ArrayLike, /, **options: Any) -> BandwidthResult:
        """Select a bandwidth only (``POST /v1/bandwidth``), with every candidate's score.

        Options are the data and selection options of :meth:`smooth`: ``weights``,
        ``kernel``, ``degree``, ``selector``, ``rule``, ``candidate_count``,
        ``bandwidth_min``, ``bandwidth_max``, ``noise`` (``result.diagnostics.noise``
        says which noise model was used).  Automatic bandwidths can be
        implausible: look at ``result.bandwidth.scores`` and ``result.warnings``.
        """
        return self._send(self._prepare_bandwidth(x, y, options))  # type: ignore[no-any-return]

    def kernels(self) -> KernelsResult:
        """The kernels and their constants (``GET /v1/kernels``)."""
        return self._send(self._prepare_kernels())  # type: ignore[no-any-return]

    def smooth_many(self, series: Iterable[Mapping[str, Any]], *, connections: int = 4, batch_series: int | None = None, limits: BatchLimits | None = None) -> Iterator[SlotAnswer]:
        """Smooth any number of series: batches within the service's limits, sent over several connections.

        Behind a gateway the batches spread over its replicas. A series that fails for a reason
        sending it again may cure (deadline, overload, shutdown, a lost connection) is sent again
        in a later batch, after the backoff of the client's :class:`RetryPolicy`, at most
        ``retry.attempts`` times; a batch refused as too large is halved.

        Parameters
        ----------
        series : iterable of mapping
            Each ``{"x": ..., "y": ..., **options}`` with the options of :meth:`smooth`; all are
            checked before anything is sent (:class:`ValidationFailed` names each bad one).
        connections : int, default 4
            Batches in flight at once.
        batch_series : int, optional
            Most series per batch; by default about two batches per connection, within ``limits``.
        limits : BatchLimits, optional
            The service's batch limits, if it is configured otherwise than by default.

        Yields
        ------
        SlotAnswer
            Exactly one per series, in the order they are answered (not the order given):
            ``index`` is the series' position in ``series``, ``result`` its fit or ``error`` why not.
        """
        plan = self._fan_out(series, connections, batch_series, limits)
        return run_threads(plan, lambda body: self._send(_Prepared("POST", "/v1/smooth/batch", body, BatchResult)), connections)

    def stream_batch(self, series: Iterable[Mapping[str, Any]]) -> Iterator[SlotAnswer]:
        """Smooth many series in one call, getting each series' answer as soon as the service has it.

        ``POST /v1/smooth/batch`` with ``Accept: application/x-ndjson``. The series are checked and
        sent as by :meth:`smooth_batch`; the call is retried like any other until the first line
        arrives, never after.

        Yields
        ------
        SlotAnswer
            One per series, in the order the service finishes them; ``index`` is the series'
            position in ``series``, ``result`` or ``error`` its answer.
        """
        prepared = self._prepare_batch(series)
        call = self._call(prepared)
        headers = {**self._request_headers(call, prepared), "Accept": NDJSON_ACCEPT}
        started = False
        while True:
            call.begin()
            try:
                with self._http.stream("POST", prepared.path.lstrip("/"), content=prepared.body, headers=headers) as response:
                    if response.status_code == 200:
                        request_id = response.headers.get("x-request-id")
                        for line in response.iter_lines():
                            if line:
                                started = True
                                yield read_line(line, request_id)
                        return
                    response.read()
                    delay = call.after_response(response)
                    if delay is None:
                        raise _error_from_response(response, call)
            except httpx.TransportError as exc:
                if started:  # lines already given: sending again would repeat them
                    raise call.transport_error(exc) from exc
                delay = call.after_error(exc)
            time.sleep(delay)


class AsyncBandwiseClient(_ClientBase):
    """asyncio Bandwise client: the methods of :class:`BandwiseClient`, as coroutines.

    Parameters are those of :class:`BandwiseClient`; ``transport`` is an
    :class:`httpx.AsyncBaseTransport` (e.g. :class:`httpx.ASGITransport`).
    """

    def __init__(
        self,
        base_url: str | httpx.URL = "http://127.0.0.1:8000",
        *,
        api_key: str | None = None,
        timeout: float | httpx.Timeout | None = DEFAULT_TIMEOUT,
        retry: RetryPolicy | None = None,
        validate: bool = True,
        headers: Mapping[str, str] | None = None,
        transport: httpx.AsyncBaseTransport | None = None,
    ) -> None:
        super().__init__(base_url, api_key, timeout, retry, validate, headers)
        self._http = httpx.AsyncClient(base_url=self.base_url, headers=self._headers, timeout=self.timeout, transport=transport)

    async def __aenter__(self) -> AsyncBandwiseClient:
        return self

    async def __aexit__(self, *exc_info: Any) -> None:
        await self.aclose()

    async def aclose(self) -> None:
        """Close the connection pool."""
        await self._http.aclose()

    async def _send(self, prepared: _Prepared) -> Any:
        call = self._call(prepared)
        headers = self._request_headers(call, prepared)
        while True:
            call.begin()
            try:
                response = await self._http.request(prepared.method, prepared.path.lstrip("/"), content=prepared.body, headers=headers)
            except httpx.TransportError as exc:
                await asyncio.sleep(call.after_error(exc))
                continue
            delay = call.after_response(response)
            if delay is None:
                return _read_result(response, prepared.model, call)
            await response.aclose()
            await asyncio.sleep(delay)

    async def smooth(self, x: ArrayLike, y: ArrayLike, /, **options: Any) -> SmoothResult:
        """Smooth one series; see :meth:`BandwiseClient.smooth`."""
        return await self._send(self._prepare_smooth(x, y, options))  # type: ignore[no-any-return]

    async def smooth_batch(self, series: Iterable[Mapping[str, Any]]) -> BatchResult:
        """Smooth many series; see :meth:`BandwiseClient.smooth_batch`."""
        return await self._send(self._prepare_batch(series))  # type: ignore[no-any-return]

    async def bandwidth(self, x: ArrayLike, y: ArrayLike, /, **options: Any) -> BandwidthResult:
        """Select a bandwidth; see :meth:`BandwiseClient.bandwidth`."""
        return await self._send(self._prepare_bandwidth(x, y, options))  # type: ignore[no-any-return]

    async def kernels(self) -> KernelsResult:
        """Kernels and constants; see :meth:`BandwiseClient.kernels`."""
        return await self._send(self._prepare_kernels())  # type: ignore[no-any-return]

    def smooth_many(self, series: Iterable[Mapping[str, Any]], *, connections: int = 4, batch_series: int | None = None, limits: BatchLimits | None = None) -> AsyncIterator[SlotAnswer]:
        """Any number of series over several connections; ``async for`` over it. See :meth:`BandwiseClient.smooth_many`."""
        plan = self._fan_out(series, connections, batch_series, limits)

        async def send(body: bytes) -> BatchResult:
            return await self._send(_Prepared("POST", "/v1/smooth/batch", body, BatchResult))  # type: ignore[no-any-return]

        return run_tasks(plan, send, connections)

    async def stream_batch(self, series: Iterable[Mapping[str, Any]]) -> AsyncIterator[SlotAnswer]:
        """Each series' answer as soon as the service has it; see :meth:`BandwiseClient.stream_batch`."""
        prepared = self._prepare_batch(series)
        call = self._call(prepared)
        headers = {**self._request_headers(call, prepared), "Accept": NDJSON_ACCEPT}
        started = False
        while True:
            call.begin()
            try:
                async with self._http.stream("POST", prepared.path.lstrip("/"), content=prepared.body, headers=headers) as response:
                    if response.status_code == 200:
                        request_id = response.headers.get("x-request-id")
                        async for line in response.aiter_lines():
                            if line:
                                started = True
                                yield read_line(line, request_id)
                        return
                    await response.aread()
                    delay = call.after_response(response)
                    if delay is None:
                        raise _error_from_response(response, call)
            except httpx.TransportError as exc:
                if started:  # lines already given: sending again would repeat them
                    raise call.transport_error(exc) from exc
                delay = call.after_error(exc)
            await asyncio.sleep(delay)


