"""Job handlers: parse and validate a body, call ``estimators``, shape the answer.

These functions run inside the worker processes (never on the event loop).
They do no numerics of their own: every number comes from ``estimators``;
this module only converts arrays, counts flagged points for the cautions and
arranges the JSON of the contract.
"""

from __future__ import annotations

import gzip
import logging
import re
import time
import traceback
from collections.abc import Callable, Iterable, Sequence
from typing import Any

import numpy as np
import orjson
from pydantic import ValidationError

import estimators
from estimators import KERNELS, fit, select_bandwidth
from estimators.anomalies import DEFAULT_ANOMALY_LEVEL, find_anomalies
from estimators.demo import DEMOS
from service.contract.arrow_layout import ARROW_STREAM
from service.contract.errors import PROBLEM_MEDIA_TYPE, ProblemError, problem_bytes, problem_document
from service.contract.field_errors import field_errors
from service.contract.jobs import Job, Outcome
from service.contract.json_keys import repeated_keys
from service.contract.models import KNOWN_FIELDS, BandsSpec, BandwidthRequest, BatchRequest, SmoothRequest
from service.worker import arrow_codec, time_axis
from service.worker.batch_split import series_spans
from service.worker.memory import check_budget, request_bytes, smooth_bytes

log = logging.getLogger("bandwise.worker")

_DUMP_OPTIONS = orjson.OPT_SERIALIZE_NUMPY
_BAND_CAUTIONS_PASSED = frozenset({"noise_not_estimable", "degree_reduced"})


class JobContext:
    """Limits and response options fixed for the life of a worker."""

    def __init__(self, limits: dict[str, int], gzip_min_bytes: int, gzip_level: int) -> None:
        self.limits = limits
        self.validation_context = {"limits": limits}
        self.gzip_min_bytes = gzip_min_bytes
        self.gzip_level = gzip_level
        #: set by the batch handler for the job just run: slots not started before the deadline, points listed
        self.unfinished = 0
        self.listed = 0


# ----------------------------------------------------------------- helpers


def _array(values: Sequence[float] | None) -> np.ndarray | None:
    if values is None:
        return None
    return np.fromiter(values, dtype=float, count=len(values))  # validated floats; a little faster than asarray


def _cautions(items: Iterable[Any]) -> list[dict[str, str]]:
    """Warnings as dicts, each (code, message) once, in first-seen order."""
    seen: set[tuple[str, str]] = set()
    out: list[dict[str, str]] = []
    for item in items:
        key = (str(item.code), str(item.message))
        if key not in seen:
            seen.add(key)
            out.append({"code": key[0], "message": key[1]})
    return out


class _Caution:
    def __init__(self, code: str, message: str) -> None:
        self.code = code
        self.message = message


def _plural(count: int, word: str, verb: str) -> str:
    """``"1 curve point lies"`` / ``"3 curve points lie"`` (``verb`` given in the plural)."""
    singular = {"lie": "lies", "have": "has"}.get(verb, verb + "s")
    return f"{count} {word} {singular}" if count == 1 else f"{count} {word}s {verb}"


def _number(value: float) -> str:
    """Short but exact enough for a message: 8.71, 1748822400000."""
    return f"{value:.15g}"


def _float_or_none(value: float) -> float | None:
    value = float(value)
    return value if np.isfinite(value) else None


def _bandwidth_object(value: float, selection: Any) -> dict[str, Any]:
    if selection is None:
        return {"value": float(value), "selector": None, "rule": None, "candidates": None, "scores": None, "gaussian_equivalent": None}
    return {
        "value": float(value),
        "selector": selection.selector,
        "rule": selection.rule,
        "candidates": np.ascontiguousarray(selection.candidates, dtype=float),
        "scores": np.ascontiguousarray(selection.scores, dtype=float),
        "gaussian_equivalent": _float_or_none(selection.gaussian_equivalent),
    }


def _validation_problem(error: ValidationError, detail: str, model: type[Any]) -> ProblemError:
    raw = error.errors(include_url=False, include_input=False)
    broken = next((e for e in raw if e.get("type") == "json_invalid"), None)
    if broken is not None:
        where = re.search(r"line (\d+) column (\d+)", str((broken.get("ctx") or {}).get("error", "")))
        near = f" near line {where.group(1)}, column {where.group(2)}" if where else ""
        return ProblemError("malformed-request", f"The body is not valid JSON{near} (a syntax error, a bad encoding, or nesting too deep); send one JSON object.")
    return ProblemError("validation-error", detail, errors=field_errors(raw, known_fields=KNOWN_FIELDS[model.__name__]))


# ----------------------------------------------------------------- smoothing


def smooth_series(req: SmoothRequest, limits: dict[str, int], arrays: arrow_codec.Arrays | None = None) -> dict[str, Any]:
    """Answer one validated smooth request (the ``/v1/smooth`` response body).

    ``arrays`` (x, y, weights), when given, are the checked data in place of ``req.x``, ``req.y``, ``req.weights``.

    Raises
    ------
    ProblemError
        ``unsuitable-data`` when ``estimators`` rejects the data.
    """
    prep = time_axis.prepare(req, arrays)  # timestamps, durations and nulls onto a numeric axis (422 when unreadable)
    try:
        with np.errstate(all="ignore"):
            return time_axis.finish(_smooth_arrays(prep.request, prep.x, prep.y, prep.weights, limits), prep)
    except ValueError as exc:
        raise ProblemError("unsuitable-data", str(exc)) from None
    except (ArithmeticError, MemoryError) as exc:
        raise _extreme(exc) from None


def _extreme(exc: BaseException) -> ProblemError:
    """Overflow or exhausted memory on a valid request: the client's numbers are out of reach.

    Logged with the traceback (so a numerical weakness is visible), answered as 422.
    """
    log.warning("arithmetic limit reached", extra={"fields": {"error": repr(exc), "traceback": traceback.format_exc()}})
    if isinstance(exc, MemoryError):
        return ProblemError("unsuitable-data", "This fit would need more memory than the service has; use fewer points, fewer curve points or replicates, or a larger bandwidth.")
    return ProblemError(
        "unsuitable-data",
        "The values are too extreme for this fit (arithmetic overflow); rescale x or y, or choose a bandwidth closer to the spacing of the data.",
    )


def _smooth_arrays(req: SmoothRequest, x: Any, y: Any, weights: Any, limits: dict[str, int]) -> dict[str, Any]:
    s = fit(
        x,
        y,
        kernel=req.kernel,
        degree=req.degree,
        bandwidth=req.bandwidth,
        weights=weights,
        selector=req.selector,
        rule=req.rule,
        engine=req.engine,
        candidates=_candidates(req, limits),
        bandwidth_min=_length(req.bandwidth_min),
        bandwidth_max=_length(req.bandwidth_max),
        noise=req.noise,
        robust=req.robust,
        family=req.family,
    )
    cautions: list[Any] = list(s.warnings)
    rob = s.robustness_weights
    if rob is not None and np.any(rob == 0):
        count = int(np.count_nonzero(rob == 0))
        cautions.append(_Caution("outliers", f"The robust fit left {count} reading{'s' if count > 1 else ''} out as {'outliers' if count > 1 else 'an outlier'}; fitted.robustness_weights marks {'them' if count > 1 else 'it'} (include_fitted)."))

    curve_spec = req.curve
    if curve_spec is not None and curve_spec.at is not None:
        cx = np.asarray(curve_spec.at, dtype=float)
    else:
        count = curve_spec.points if curve_spec is not None and curve_spec.points is not None else limits.get("default_curve_points", 200)
        cx = _grid(s.x_min, s.x_max, int(count))
    px = _array(req.predict_at)
    bands: BandsSpec | None = req.bands

    estimate = np.ascontiguousarray(s.predict(cx), dtype=float)  # curve.se, when asked, is the SE of this estimate
    curve: dict[str, Any] = {"x": cx, "estimate": estimate}

    p_lower = p_upper = p_ilow = p_ihigh = None
    band_info = None
    if bands is not None and req.family == "poisson" and (bands.method != "analytic" or bands.simultaneous):
        cautions.append(_Caution("counts_bands", "Counts get analytic pointwise bands on the log scale; these were given in place of the method asked for."))
        bands = bands.model_copy(update={"method": "analytic", "simultaneous": False})
    if bands is not None:
        if px is not None and not bands.simultaneous:
            # Pointwise bands at curve and prediction points from one set of replicates.
            both = s.bands(np.concatenate([cx, px]), bands.level, bands.method, bands.replicates, bands.seed, bands.simultaneous)
            band_cautions = both.warnings
            m = cx.size
            curve["lower"], curve["upper"] = (np.ascontiguousarray(a[:m], dtype=float) for a in (both.lower, both.upper))
            centre, centred_elsewhere = both.estimate[:m], both.bias_corrected
            p_lower, p_upper = np.asarray(both.lower[m:]), np.asarray(both.upper[m:])
        else:
            b = s.bands(cx, bands.level, bands.method, bands.replicates, bands.seed, bands.simultaneous)
            band_cautions = b.warnings
            curve["lower"], curve["upper"] = (np.ascontiguousarray(a, dtype=float) for a in (b.lower, b.upper))
            centre, centred_elsewhere = b.estimate, b.bias_corrected
            if px is not None:
                pb = s.bands(px, bands.level, bands.method, bands.replicates, bands.seed, bands.simultaneous)
                p_lower, p_upper = np.asarray(pb.lower), np.asarray(pb.upper)
        curve["se"] = np.ascontiguousarray(s.standard_error(cx), dtype=float)
        if centred_elsewhere:
            curve["band_center"] = np.ascontiguousarray(centre, dtype=float)
        if px is not None:
            p_ilow, p_ihigh = (np.asarray(a, dtype=float) for a in s.prediction_interval(px, level=bands.level))
        # The worker words pointwise_bands, empty_window and extrapolation itself, per curve and prediction points.
        cautions.extend(c for c in band_cautions if c.code in _BAND_CAUTIONS_PASSED)
        bootstrap = bands.method != "analytic"
        band_info = {
            "method": bands.method,
            "level": bands.level,
            "simultaneous": bands.simultaneous,
            "replicates": bands.replicates if bootstrap else None,
            "seed": bands.seed if bootstrap else None,
        }
        if not bands.simultaneous:
            cautions.append(
                _Caution(
                    "pointwise_bands",
                    f"The {bands.level:g} bands are pointwise: each covers the curve at one x on its own, "
                    "not the whole curve at once. Ask for simultaneous bands to cover the whole curve.",
                )
            )

    predictions: list[dict[str, Any]] = []
    if px is not None:
        p_est = np.asarray(s.predict(px), dtype=float)
        extrapolated = np.asarray(s.extrapolated(px), dtype=bool)
        columns: list[tuple[str, list[Any]]] = [("x", px.tolist()), ("estimate", _nullable(p_est))]
        if p_lower is not None and p_upper is not None:
            columns += [("lower", _nullable(p_lower)), ("upper", _nullable(p_upper))]
        if p_ilow is not None and p_ihigh is not None:
            columns += [("interval_lower", _nullable(p_ilow)), ("interval_upper", _nullable(p_ihigh))]
        columns.append(("extrapolated", extrapolated.tolist()))
        names = [name for name, _ in columns]
        predictions = [dict(zip(names, row, strict=True)) for row in zip(*(values for _, values in columns), strict=True)]
        cautions.extend(_point_cautions("prediction point", px, p_est, extrapolated, s))

    if curve_spec is not None and curve_spec.at is not None:
        cautions.extend(_point_cautions("curve point", cx, estimate, np.asarray(s.extrapolated(cx), dtype=bool), s))
    else:
        cautions.extend(_point_cautions("curve point", cx, estimate, None, s))

    body: dict[str, Any] = {
        "bandwidth": _bandwidth_object(s.bandwidth, s.selection),
        "curve": curve,
    }
    if req.include_fitted:
        body["fitted"] = {
            "estimate": np.ascontiguousarray(s.fitted(), dtype=float),
            "residuals": np.ascontiguousarray(s.residuals(), dtype=float),
        }
        if rob is not None:
            body["fitted"]["robustness_weights"] = np.ascontiguousarray(rob, dtype=float)
    if req.anomalies is not None:
        body["anomalies"] = _anomalies(s, req, x, y, weights, limits)
    body["predictions"] = predictions
    body["diagnostics"] = {
        "n": int(s.n),
        "n_used": int(s.n_used),
        "effective_df": _float_or_none(s.effective_df),
        "residual_scale": _float_or_none(s.residual_scale),
        "kernel": s.kernel,
        "degree": int(s.degree),
        "engine": s.engine,
        "x_min": float(s.x_min),
        "x_max": float(s.x_max),
        "bands": band_info,
        "noise": s.noise,
        "noise_autocorrelation": _float_or_none(s.noise_autocorrelation),
    }
    if req.family != "gaussian":
        body["diagnostics"]["family"] = req.family
    if rob is not None:
        body["diagnostics"]["robust"] = True
        body["diagnostics"]["n_outliers"] = int(np.count_nonzero(rob == 0))
    body["warnings"] = _cautions(cautions)
    return body


def _anomalies(s: Any, req: SmoothRequest, x: Any, y: Any, weights: Any, limits: dict[str, int]) -> list[dict[str, Any]]:
    """Readings outside the prediction interval of a resistant fit (of ``s`` itself when it is one)."""
    level = req.anomalies.level if req.anomalies is not None else DEFAULT_ANOMALY_LEVEL
    resistant = s
    if not req.robust:
        resistant = fit(
            x, y, kernel=req.kernel, degree=req.degree, bandwidth=req.bandwidth, weights=weights, selector=req.selector,
            rule=req.rule, engine=req.engine, candidates=_candidates(req, limits),
            bandwidth_min=_length(req.bandwidth_min), bandwidth_max=_length(req.bandwidth_max), robust=True,
            family=req.family,
        )
    found = find_anomalies(resistant, level, counted=None if weights is None else np.asarray(weights, dtype=float) > 0)
    return [
        {"index": int(i), "x": float(a), "y": float(b), "estimate": _float_or_none(e), "lower": _float_or_none(lo), "upper": _float_or_none(hi)}
        for i, a, b, e, lo, hi in zip(
            found.index.tolist(), found.x.tolist(), found.y.tolist(), found.estimate.tolist(), found.lower.tolist(), found.upper.tolist(),
            strict=True,
        )
    ]


def _grid(lo: float, hi: float, count: int) -> np.ndarray:
    """``count`` evenly spaced points from ``lo`` to ``hi`` (both included), without overflow.

    ``lo * (1 - t) + hi * t`` stays finite even when ``hi - lo`` would overflow a double.
    """
    t = np.arange(count, dtype=float)
    t /= count - 1
    grid = lo * (1.0 - t) + hi * t
    grid[0], grid[-1] = lo, hi
    return grid


def _length(value: float | str | None) -> float | None:
    """A length of a request read onto the numeric axis (``time_axis.prepare`` has turned durations into ms)."""
    return None if value is None else float(value)


def _candidates(req: Any, limits: dict[str, int]) -> int:
    """The candidate count asked for; the default is capped by the operator's limit."""
    limit = limits.get("max_candidates")
    return int(req.candidate_count) if limit is None else int(min(req.candidate_count, limit))


def _nullable(values: np.ndarray) -> list[float | None]:
    """Floats with NaN/inf replaced by None (JSON null)."""
    values = np.asarray(values, dtype=float)
    out: list[float | None] = values.tolist()
    bad = np.flatnonzero(~np.isfinite(values))
    for i in bad.tolist():
        out[i] = None
    return out


def _point_cautions(what: str, points: np.ndarray, estimate: np.ndarray, extrapolated: np.ndarray | None, s: Any) -> list[_Caution]:
    out: list[_Caution] = []
    if extrapolated is not None:
        count = int(np.count_nonzero(extrapolated))
        if count:
            out.append(
                _Caution(
                    "extrapolation",
                    f"{_plural(count, what, 'lie')} outside the data range [{_number(s.x_min)}, {_number(s.x_max)}]: "
                    "there the estimate extends the local fit beyond the data and can be far off.",
                )
            )
    empty = int(np.count_nonzero(~np.isfinite(estimate)))
    if empty:
        out.append(
            _Caution(
                "empty_window",
                f"{_plural(empty, what, 'have')} no data inside the kernel window, so the estimate there is null; "
                "use a larger bandwidth or a kernel with unbounded support (gaussian).",
            )
        )
    return out


def select_only(req: BandwidthRequest, limits: dict[str, int], arrays: arrow_codec.Arrays | None = None) -> dict[str, Any]:
    """Answer one validated bandwidth request (``arrays`` as for :func:`smooth_series`)."""
    prep = time_axis.prepare(req, arrays)
    req = prep.request
    try:
        with np.errstate(all="ignore"):
            if req.robust or req.family != "gaussian":
                fitted = fit(
                    prep.x, prep.y, kernel=req.kernel, degree=req.degree, weights=prep.weights, selector=req.selector,
                    rule=req.rule, candidates=_candidates(req, limits), bandwidth_min=_length(req.bandwidth_min),
                    bandwidth_max=_length(req.bandwidth_max), robust=req.robust, family=req.family, noise=req.noise,
                )
                chosen = fitted.selection
                assert chosen is not None  # bandwidth "auto" always leaves a selection record
                diagnostics = {"noise": fitted.noise, "noise_autocorrelation": _float_or_none(fitted.noise_autocorrelation)}
                body = {"bandwidth": _bandwidth_object(chosen.chosen, chosen), "diagnostics": diagnostics, "warnings": _cautions(chosen.warnings)}
                return time_axis.finish_bandwidth(body, prep)
            sel = select_bandwidth(
                prep.x,
                prep.y,
                kernel=req.kernel,
                degree=req.degree,
                selector=req.selector,
                rule=req.rule,
                weights=prep.weights,
                candidates=_candidates(req, limits),
                bandwidth_min=_length(req.bandwidth_min),
                bandwidth_max=_length(req.bandwidth_max),
                noise=req.noise,
            )
    except ValueError as exc:
        raise ProblemError("unsuitable-data", str(exc)) from None
    except (ArithmeticError, MemoryError) as exc:
        raise _extreme(exc) from None
    noise = {
        "noise": sel.noise.used if sel.noise is not None else "independent",
        "noise_autocorrelation": _float_or_none(sel.noise.autocorrelation) if sel.noise is not None else None,
    }
    body = {"bandwidth": _bandwidth_object(sel.chosen, sel), "diagnostics": noise, "warnings": _cautions(sel.warnings)}
    return time_axis.finish_bandwidth(body, prep)


# ----------------------------------------------------------------- job kinds


def _refuse_repeated_names(body: bytes) -> None:
    """A 422 when one JSON object names a field twice: which value was meant is a guess (RFC 8259, section 4)."""
    names = repeated_keys(body)
    if names:
        raise ProblemError(
            "validation-error",
            "The request names a field twice; see errors.",
            errors=[{"field": name, "message": f"'{name}' is given more than once in one object; send it once", "type": "repeated_field"} for name in names],
        )


def _smooth_job(job: Job, ctx: JobContext) -> tuple[Any, int]:
    if job.content_type == ARROW_STREAM:
        req, arrays = arrow_codec.read_request(job.body, SmoothRequest, ctx.validation_context)
        return smooth_series(req, ctx.limits, arrays), arrays[0].size
    try:
        req = SmoothRequest.model_validate_json(job.body, context=ctx.validation_context)
    except ValidationError as exc:
        raise _validation_problem(exc, "The smooth request has invalid fields; see errors.", SmoothRequest) from None
    _refuse_repeated_names(job.body)
    check_budget(smooth_bytes(req, len(job.body), ctx.limits.get("default_curve_points", 200)), ctx.limits)
    return smooth_series(req, ctx.limits), len(req.x)


def _bandwidth_job(job: Job, ctx: JobContext) -> tuple[Any, int]:
    if job.content_type == ARROW_STREAM:
        req, arrays = arrow_codec.read_request(job.body, BandwidthRequest, ctx.validation_context)
        return select_only(req, ctx.limits, arrays), arrays[0].size
    try:
        req = BandwidthRequest.model_validate_json(job.body, context=ctx.validation_context)
    except ValidationError as exc:
        raise _validation_problem(exc, "The bandwidth request has invalid fields; see errors.", BandwidthRequest) from None
    _refuse_repeated_names(job.body)
    check_budget(request_bytes(len(job.body), len(req.x), 0, False), ctx.limits)
    return select_only(req, ctx.limits), len(req.x)


def _batch_job(job: Job, ctx: JobContext) -> tuple[Any, int]:
    try:
        envelope = BatchRequest.model_validate_json(job.body)
    except ValidationError as exc:
        raise _validation_problem(exc, "The batch request has invalid fields; see errors.", BatchRequest) from None
    _refuse_repeated_names(job.body)
    limits = ctx.limits
    count = len(envelope.series)
    if count > limits.get("max_batch_series", count):
        raise ProblemError(
            "validation-error",
            "Too many series in one batch.",
            errors=[{"field": "series", "message": f"at most {limits['max_batch_series']} series are allowed (BANDWISE_MAX_BATCH_SERIES), got {count}; split the batch", "type": "too_long"}],
        )
    total = sum(len(item["x"]) for item in envelope.series if isinstance(item.get("x"), list))
    if total > limits.get("max_batch_points", total):
        raise ProblemError(
            "validation-error",
            "Too many points in one batch.",
            errors=[{"field": "series", "message": f"at most {limits['max_batch_points']} points over all series are allowed (BANDWISE_MAX_BATCH_POINTS), got {total}; split the batch", "type": "too_long"}],
        )
    offset = int(job.params.get("offset", 0))
    soft_deadline = job.params.get("soft_deadline")
    results: list[Any] = []
    points = 0
    unfinished = 0
    longest = 0.0
    for index, item in enumerate(envelope.series, start=offset):
        instance = f"{job.path}#series[{index}]"
        started = time.monotonic()
        if soft_deadline is not None and started + longest > float(soft_deadline):
            results.append({"problem": problem_document("deadline-exceeded", _SLOT_DEADLINE_DETAIL, instance=instance)})
            unfinished += 1
            continue
        try:
            req = SmoothRequest.model_validate(item, context=ctx.validation_context)
        except ValidationError as exc:
            problem = _validation_problem(exc, f"Series {index} has invalid fields; see errors.", SmoothRequest)
            results.append({"problem": problem_document(problem.slug, problem.detail, instance=instance, errors=problem.errors)})
            continue
        try:
            check_budget(smooth_bytes(req, len(job.body), limits.get("default_curve_points", 200)), limits)
            results.append(smooth_series(req, limits))
            points += len(req.x)
        except ProblemError as problem:
            results.append({"problem": problem_document(problem.slug, problem.detail, instance=instance, errors=problem.errors)})
        longest = max(longest, time.monotonic() - started)
    ctx.unfinished = unfinished
    ctx.listed = total
    if job.params.get("part"):
        return results, points  # one group of a split batch: the HTTP process joins the arrays
    return {"results": results}, points


_SLOT_DEADLINE_DETAIL = (
    "This series was not computed before the batch's deadline; the other slots are kept. "
    "Send the series marked deadline-exceeded again, in a smaller batch or to another replica."
)


def _batch_plan_job(job: Job, ctx: JobContext) -> tuple[Any, int]:
    """Byte ranges of the series of a batch body, so the HTTP process can cut it into groups."""
    spans = series_spans(job.body, ctx.limits.get("max_batch_series", 1_000))
    return {"spans": None if spans is None else [value for span in spans for value in span]}, 0


def _kernels_job(job: Job, ctx: JobContext) -> tuple[Any, int]:
    kernels = []
    for name, k in KERNELS.items():
        support = float(k.support)
        kernels.append(
            {
                "name": name,
                "support": support if np.isfinite(support) else None,
                "roughness": float(k.roughness),
                "second_moment": float(k.second_moment),
                "efficiency": float(k.efficiency),
                "canonical_factor": float(k.canonical_factor),
            }
        )
    return {"kernels": kernels}, 0


def _demo_summary(series: Any) -> dict[str, Any]:
    return {
        "name": series.name,
        "title": series.title,
        "description": series.description,
        "n": int(len(series.x)),
        "x_label": series.x_label,
        "y_label": series.y_label,
        "x_unit": series.x_unit,
        "y_unit": series.y_unit,
    }


def _demo_list_job(job: Job, ctx: JobContext) -> tuple[Any, int]:
    return {"demos": [_demo_summary(make()) for make in DEMOS.values()]}, 0


def _demo_job(job: Job, ctx: JobContext) -> tuple[Any, int]:
    name = str(job.params.get("name", ""))
    if name not in DEMOS:
        raise ProblemError("not-found", f"No demo named {name!r}; GET /v1/demo lists them ({', '.join(DEMOS)}).")
    series = DEMOS[name]()
    body = _demo_summary(series)
    body["x"] = np.ascontiguousarray(series.x, dtype=float)
    body["y"] = np.ascontiguousarray(series.y, dtype=float)
    return body, 0


def _ping_job(job: Job, ctx: JobContext) -> tuple[Any, int]:
    return {"status": "ok", "estimators": estimators.__name__}, 0


HANDLERS: dict[str, Callable[[Job, JobContext], tuple[Any, int]]] = {
    "smooth": _smooth_job,
    "batch": _batch_job,
    "batch_plan": _batch_plan_job,
    "bandwidth": _bandwidth_job,
    "kernels": _kernels_job,
    "demo_list": _demo_list_job,
    "demo": _demo_job,
    "ping": _ping_job,
}


def _encode(body: bytes, job: Job, ctx: JobContext) -> tuple[bytes, str | None]:
    if job.accept_gzip and len(body) >= ctx.gzip_min_bytes:
        return gzip.compress(body, compresslevel=ctx.gzip_level, mtime=0), "gzip"
    return body, None


def run_job(job: Job, ctx: JobContext) -> Outcome:
    """Run one job and return its answer; never raises.

    A :class:`ProblemError` becomes a problem document with its status.  Any
    other exception is logged with its traceback and the request id, and
    answered with a 500 problem that carries the request id but no trace.
    """
    started = time.perf_counter()
    handler = HANDLERS.get(job.kind)
    ctx.unfinished = ctx.listed = 0
    try:
        if handler is None:
            raise RuntimeError(f"unknown job kind {job.kind!r}")
        result, points = handler(job, ctx)
        if job.accept_arrow:
            return Outcome(200, arrow_codec.write_answer(result), ARROW_STREAM, None, points, None, time.perf_counter() - started)
        payload, encoding = _encode(orjson.dumps(result, option=_DUMP_OPTIONS), job, ctx)
        return Outcome(200, payload, "application/json", encoding, points, None, time.perf_counter() - started, unfinished=ctx.unfinished, listed=ctx.listed)
    except ProblemError as problem:
        body = problem_bytes(problem.slug, problem.detail, instance=job.path, request_id=job.request_id, errors=problem.errors)
        return Outcome(problem.status, body, PROBLEM_MEDIA_TYPE, None, 0, problem.slug, time.perf_counter() - started)
    except Exception as exc:  # noqa: BLE001 - the boundary: log it, answer 500
        log.error(
            "unexpected error in job",
            extra={"fields": {"request_id": job.request_id, "kind": job.kind, "error": repr(exc), "traceback": traceback.format_exc()}},
        )
        body = problem_bytes(
            "internal-error",
            "An unexpected error occurred while computing the answer. It has been logged; quote the request id when reporting it.",
            instance=job.path,
            request_id=job.request_id,
        )
        return Outcome(500, body, PROBLEM_MEDIA_TYPE, None, 0, "internal-error", time.perf_counter() - started)
