"""Wire contract: pydantic models of every request and response body.

Requests are strict: unknown fields are errors (``extra="forbid"``), numbers
must be finite JSON numbers (``NaN``/``Infinity`` tokens and literals that
overflow a double are rejected), strings are never coerced to numbers.
Size limits come from the settings and are passed in as the validation
context ``{"limits": {...}}`` (see :meth:`service.runtime.settings.Settings.limits`).

Response models document the answers in the OpenAPI schema; the handlers
build plain dicts of the same shape for speed, and the tests check the two
agree.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING, Annotated, Any, Literal

from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    PlainValidator,
    TypeAdapter,
    ValidationInfo,
    WithJsonSchema,
    WrapValidator,
    model_validator,
)

from service.contract.field_errors import FIELD_ERROR_CODES, FieldProblem
from service.contract.names import (
    BAND_METHOD_NAMES,
    CORRELATED_SELECTOR_NAME,
    ENGINE_NAMES,
    FAMILY_NAMES,
    KERNEL_NAMES,
    NOISE_NAMES,
    NOISE_USED_NAMES,
    RULE_NAMES,
    SCORED_SELECTORS,
    SELECTOR_NAMES,
)
from service.contract.warnings import WARNING_CODES

if TYPE_CHECKING:  # the checker sees plain strings; at run time each is a Literal of the names in estimators
    KernelName = str
    SelectorName = str
    RuleName = str
    BandMethod = str
    EngineName = str
    NoiseName = str
    NoiseUsed = str
    FamilyName = str
else:
    KernelName = Literal[KERNEL_NAMES]
    SelectorName = Literal[SELECTOR_NAMES]
    RuleName = Literal[RULE_NAMES]
    BandMethod = Literal[BAND_METHOD_NAMES]
    EngineName = Literal[ENGINE_NAMES]
    NoiseName = Literal[NOISE_NAMES]
    NoiseUsed = Literal[NOISE_USED_NAMES]
    FamilyName = Literal[FAMILY_NAMES]

Finite = Annotated[float, Field(allow_inf_nan=False)]
NonNegativeFinite = Annotated[float, Field(allow_inf_nan=False, ge=0)]
PositiveFinite = Annotated[float, Field(allow_inf_nan=False, gt=0)]
Degree = Annotated[int, Field(ge=0, le=2, json_schema_extra={"enum": [0, 1, 2]})]

BANDWIDTH_MESSAGE = 'must be a finite number > 0 or the string "auto"'


def _bandwidth(value: Any) -> float | str:
    """Accept ``"auto"``, a finite number > 0 (JSON number, not a string) or an ISO 8601 duration (read in the worker)."""
    if isinstance(value, str):
        if value == "auto" or _looks_like_duration(value):
            return value
        raise FieldProblem("not_allowed", BANDWIDTH_MESSAGE + " (with timestamps, also an ISO 8601 duration such as PT3H)")
    return _positive_number(value, BANDWIDTH_MESSAGE)


def _positive_number(value: Any, message: str) -> float:
    """A JSON number (not a boolean) that is finite and above 0, else a field problem with ``message``."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise FieldProblem("wrong_type", message)
    number = float(value)
    if not math.isfinite(number):
        raise FieldProblem("not_finite", message)
    if number <= 0:
        raise FieldProblem("too_small", message)
    return number


DURATION_MESSAGE = "must be a finite number > 0, or with timestamps an ISO 8601 duration such as PT90M, PT3H, P2D or P1W"
_DURATION_SCHEMA = {"type": "string", "pattern": "^P", "description": "ISO 8601 duration in weeks, days, hours, minutes or seconds (only with timestamp x)."}


def _looks_like_duration(value: str) -> bool:
    """The shape of an ISO 8601 duration; the worker reads it and refuses calendar units (Y, M)."""
    return value.startswith("P") and 1 < len(value) <= 64


def _length(value: Any) -> float | str:
    """A length along x: a finite number > 0, or an ISO 8601 duration string (read in the worker)."""
    if isinstance(value, str):
        if _looks_like_duration(value):
            return value
        raise FieldProblem("bad_duration", DURATION_MESSAGE)
    return _positive_number(value, DURATION_MESSAGE)


Length = Annotated[
    float | str,
    PlainValidator(_length),
    WithJsonSchema({"oneOf": [{"type": "number", "exclusiveMinimum": 0}, _DURATION_SCHEMA]}),
]


def _max_gap(value: Any) -> float | str | None:
    if value is None or value == "auto":
        return value  # type: ignore[no-any-return]
    return _length(value)


MaxGap = Annotated[
    float | str | None,
    PlainValidator(_max_gap),
    WithJsonSchema(
        {
            "oneOf": [{"type": "string", "const": "auto"}, {"type": "number", "exclusiveMinimum": 0}, _DURATION_SCHEMA, {"type": "null"}],
            "description": 'Largest spacing between consecutive readings that is not a gap: "auto" (the rule in docs/api.md), a length in x units, '
            "an ISO 8601 duration (timestamp x), or null (never split). Curve points strictly inside a gap are null.",
            "default": "auto",
        }
    ),
]

_STRICT = ConfigDict(strict=True)
_TEXT_LIST: TypeAdapter[list[str | None]] = TypeAdapter(list[str | None], config=_STRICT)
_TEXT_LIST_NO_NULL: TypeAdapter[list[str]] = TypeAdapter(list[str], config=_STRICT)


def _texts_or_numbers(value: Any, handler: Any) -> Any:
    """An array of numbers (the usual validator), or of strings when its first non-null element is one.

    Strings are RFC 3339 date-times, read in the worker; here only the JSON types are checked, so
    a number among strings (or a string among numbers) is a ``wrong_type`` at its index.
    """
    if isinstance(value, list):
        first = next((v for v in value[:64] if v is not None), None)
        if isinstance(first, str):
            return _TEXT_LIST.validate_python(value)
    return handler(value)


def _texts_or_numbers_no_null(value: Any, handler: Any) -> Any:
    if isinstance(value, list) and value and isinstance(value[0], str):
        return _TEXT_LIST_NO_NULL.validate_python(value)
    return handler(value)


_TIMESTAMP_ITEM = {"type": "string", "format": "date-time"}
XValues = Annotated[
    list[Annotated[float, Field(allow_inf_nan=False)] | None],
    WrapValidator(_texts_or_numbers),
    WithJsonSchema(
        {
            "oneOf": [
                {"type": "array", "items": {"type": ["number", "null"]}},
                {"type": "array", "items": {"oneOf": [_TIMESTAMP_ITEM, {"type": "null"}]}},
            ]
        }
    ),
]
Points = Annotated[
    list[Annotated[float, Field(allow_inf_nan=False)]],
    WrapValidator(_texts_or_numbers_no_null),
    WithJsonSchema({"oneOf": [{"type": "array", "items": {"type": "number"}}, {"type": "array", "items": _TIMESTAMP_ITEM}]}),
]

Bandwidth = Annotated[
    float | Literal["auto"],
    PlainValidator(_bandwidth),
    WithJsonSchema(
        {
            "oneOf": [{"type": "number", "exclusiveMinimum": 0}, {"type": "string", "const": "auto"}, _DURATION_SCHEMA],
            "description": 'Kernel bandwidth in x units (the kernel\'s own scale; milliseconds for timestamp x, or an ISO 8601 duration), or "auto" to choose it with `selector`.',
            "default": "auto",
        }
    ),
]


def _limits(info: ValidationInfo) -> dict[str, int]:
    context = info.context or {}
    return context.get("limits") or {}


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


class CurveSpec(_Strict):
    """Where to evaluate the smoothed curve: evenly spaced points, or given x values."""

    points: Annotated[int, Field(ge=2, description="Number of evenly spaced points over the x range (default 200, limit BANDWISE_MAX_CURVE_POINTS = 10,000).")] | None = None
    at: Points | None = Field(None, description="Explicit x values, numbers or RFC 3339 date-times like x (at most BANDWISE_MAX_CURVE_POINTS). Values outside the data range are extrapolated and flagged in `warnings`.")

    @model_validator(mode="after")
    def _check(self, info: ValidationInfo) -> CurveSpec:
        if self.points is not None and self.at is not None:
            raise FieldProblem("invalid", 'give either "points" or "at", not both')
        limit = _limits(info).get("max_curve_points")
        if self.at is not None and len(self.at) == 0:
            raise FieldProblem("too_short", '"at" must hold at least one value')
        count = self.points if self.points is not None else (len(self.at) if self.at is not None else 0)
        if limit is not None and count > limit:
            code = "too_large" if self.points is not None else "too_long"
            raise FieldProblem(code, f"at most {limit} curve points are allowed (BANDWISE_MAX_CURVE_POINTS), got {count}")
        return self


class BandsSpec(_Strict):
    """Uncertainty bands for the curve (and for `predict_at`)."""

    method: BandMethod = Field("wild_bootstrap", description="wild_bootstrap (robust to changing noise), residual_bootstrap, or analytic (normal approximation, no resampling).")
    level: Annotated[float, Field(gt=0, lt=1, allow_inf_nan=False)] = Field(0.95, description="Coverage level in (0, 1).")
    replicates: Annotated[int, Field(ge=1)] = Field(500, description="Bootstrap replicates (limit BANDWISE_MAX_REPLICATES = 5,000); ignored by analytic.")
    seed: Annotated[int, Field(ge=0, le=2**63 - 1)] = Field(0, description="Seed of the bootstrap; the same seed gives the same bands.")
    simultaneous: bool = Field(False, description="False: pointwise bands (each x covered at `level` on its own). True: one band covering the whole curve at once (wider).")

    @model_validator(mode="after")
    def _check(self, info: ValidationInfo) -> BandsSpec:
        limit = _limits(info).get("max_replicates")
        if limit is not None and self.replicates > limit:
            raise FieldProblem("too_large", f"at most {limit} replicates are allowed (BANDWISE_MAX_REPLICATES), got {self.replicates}")
        return self


class AnomaliesSpec(_Strict):
    """Which readings to flag as anomalies."""

    level: Annotated[float, Field(gt=0, lt=1, allow_inf_nan=False)] = Field(0.999, description="Level of the prediction interval a reading must fall outside to be flagged, in (0, 1).")


class _DataFields(_Strict):
    x: XValues = Field(..., description="Predictor values: finite numbers (epoch-millisecond timestamps work as they are), or RFC 3339 date-times with any offset (read as UTC epoch milliseconds); not both in one array. null marks a missing reading (see `missing`). At most BANDWISE_MAX_POINTS = 2,000,000.")
    y: list[Finite | None] = Field(..., description="Responses, same length as x; null marks a missing reading (see `missing`).")
    weights: list[NonNegativeFinite | None] | None = Field(None, description="Optional case weights, same length as x, >= 0 and not all zero; points with weight 0 are ignored; null marks a missing value (see `missing`).")
    missing: Literal["drop", "error"] = Field("drop", description='drop: a null in x, y or weights leaves that reading out (counted in diagnostics.n_missing, warning missing_values); error: nulls are refused with a 422 naming them.')
    kernel: KernelName = Field("gaussian", description="Kernel; see GET /v1/kernels for the constants.")
    degree: Degree = Field(1, description="Local polynomial degree: 0 = local constant (Nadaraya–Watson), 1 = local linear, 2 = local quadratic.")
    selector: SelectorName = Field("gcv", description="Bandwidth selector used when bandwidth is \"auto\". Automatic bandwidths can be implausible (too rough or too smooth): look at the scores and warnings.")
    rule: RuleName = Field("min", description="min: the best-scoring candidate; one_se: the smoothest candidate within one standard error of the best.")
    candidate_count: Annotated[int, Field(ge=2)] = Field(40, description="Number of candidate bandwidths scored by the selector (limit BANDWISE_MAX_CANDIDATES = 200). The answer's `bandwidth.candidates` lists them.")
    bandwidth_min: Length | None = Field(None, description="Smallest candidate bandwidth (default: chosen from the data spacing); an ISO 8601 duration with timestamp x.")
    bandwidth_max: Length | None = Field(None, description="Largest candidate bandwidth (default: chosen from the data range); an ISO 8601 duration with timestamp x.")
    noise: NoiseName = Field(
        "auto",
        description=(
            "Serial correlation of the noise in x order. auto (default): the readings are tested for it (difference-based test "
            "at level 0.01); when it is found, an automatic bandwidth comes from modified cross-validation (bandwidth.selector "
            f"`{CORRELATED_SELECTOR_NAME}`, which then replaces `selector`), standard errors and bands allow for the correlation "
            "and prediction intervals use the variance of one reading; warning `correlated_noise`. correlated: that path "
            "whatever the test says. independent: the noise is taken as independent (the path for data whose wiggles are real). "
            "The answer's diagnostics.noise says which path was used. Slow real variation and strongly correlated noise cannot be "
            "told apart at every bandwidth."
        ),
    )
    robust: bool = Field(False, description="Outlier-resistant fit: bisquare robustness iterations (Cleveland 1979), then readings with a residual beyond 6 median absolute residuals are left out of the fit, the bandwidth criterion and the noise scale. The selector is then reported as robust_<selector>. With family poisson the same scheme runs on Pearson residuals.")
    family: FamilyName = Field("gaussian", description='gaussian: least squares. poisson: counts or rates (y >= 0), a local log-linear likelihood fit whose estimates and band limits stay positive; gaussian kernel, degree 0 or 1, analytic pointwise bands, automatic bandwidth by the local likelihood AIC (selector likelihood_aic); weights are case weights.')

    @model_validator(mode="after")
    def _check_data(self, info: ValidationInfo) -> Any:
        limits = _limits(info)
        n = len(self.x)
        limit = limits.get("max_points")
        if limit is not None and n > limit:
            raise FieldProblem("too_long", f"at most {limit} points are allowed (BANDWISE_MAX_POINTS), got {n}; split the data or thin it", "x")
        if n < 2:
            raise FieldProblem("too_short", f"at least 2 points are needed, got {n}", "x")
        if len(self.y) != n:
            raise FieldProblem("invalid", f"y has {len(self.y)} values but x has {n}; give one y per x", "y")
        if self.weights is not None:
            if len(self.weights) != n:
                raise FieldProblem("invalid", f"weights has {len(self.weights)} values but x has {n}; give one weight per x", "weights")
            if not any(w is not None and w > 0 for w in self.weights):
                raise FieldProblem("invalid", "at least one weight must be > 0", "weights")
        limit = limits.get("max_candidates")
        if limit is not None and "candidate_count" in self.model_fields_set and self.candidate_count > limit:
            raise FieldProblem("too_large", f"at most {limit} candidates are allowed (BANDWISE_MAX_CANDIDATES), got {self.candidate_count}", "candidate_count")
        low, high = self.bandwidth_min, self.bandwidth_max
        if isinstance(low, float) and isinstance(high, float) and low >= high:
            raise FieldProblem("invalid", "bandwidth_max must be greater than bandwidth_min", "bandwidth_max")
        if self.family == "poisson":
            for i, v in enumerate(self.y):
                if v is not None and v < 0:
                    raise FieldProblem("too_small", f"y[{i}] is {v:g}: family poisson takes counts or rates, which cannot be negative; send y >= 0 or use family gaussian", f"y[{i}]")
        selecting = getattr(self, "bandwidth", "auto") == "auto"
        if selecting and self.rule == "one_se" and self.selector not in SCORED_SELECTORS:
            raise FieldProblem("invalid", f"rule one_se needs a selector that scores candidates ({', '.join(SCORED_SELECTORS)}); {self.selector} computes its bandwidth from a formula", "rule")
        return self


class SmoothRequest(_DataFields):
    """One series to smooth."""

    bandwidth: Bandwidth = "auto"
    engine: EngineName = Field("auto", description="exact: windowed sums over the sorted data; binned: fast grid approximation for large n; auto picks by size.")
    curve: CurveSpec | None = Field(None, description='Where to evaluate the curve; default {"points": 200} evenly spaced over the x range.')
    max_gap: MaxGap = "auto"
    predict_at: Points | None = Field(None, description="New x values (numbers, or RFC 3339 date-times when x holds them) to predict at (at most BANDWISE_MAX_PREDICT_POINTS = 100,000). Values outside the data range are extrapolations and are flagged.")
    bands: BandsSpec | None = Field(None, description="Ask for uncertainty bands. They are pointwise unless simultaneous is true.")
    include_fitted: bool = Field(False, description="Also return fitted values and residuals at the data points, in the order given (and the robustness weights of a robust fit).")
    anomalies: AnomaliesSpec | None = Field(None, description='Flag the readings outside the prediction interval at `level`, computed from an outlier-resistant fit (so a cluster of spikes cannot hide itself), e.g. {"level": 0.999}. On clean data about n (1 - level) readings are flagged.')

    @model_validator(mode="after")
    def _check_predict(self, info: ValidationInfo) -> SmoothRequest:
        limit = _limits(info).get("max_predict_points")
        if limit is not None and self.predict_at is not None and len(self.predict_at) > limit:
            raise FieldProblem("too_long", f"at most {limit} prediction points are allowed (BANDWISE_MAX_PREDICT_POINTS), got {len(self.predict_at)}", "predict_at")
        return self


class BandwidthRequest(_DataFields):
    """Data and selection settings for bandwidth selection alone."""


BATCH_SERIES_DESCRIPTION = (
    "The series, each a smooth request (the schema of `POST /v1/smooth`; at most BANDWISE_MAX_BATCH_SERIES = 1,000 series "
    "and BANDWISE_MAX_BATCH_POINTS = 2,000,000 points in all). The envelope accepts any JSON object in a slot: each series is "
    "validated on its own, and one that is not a valid smooth request (a missing `y`, say) is answered in its own slot of the "
    "200 answer with a validation-error problem, while the other series are smoothed."
)


class BatchRequest(_Strict):
    """Many series in one call; each is validated and answered in its own slot."""

    series: list[dict[str, Any]] = Field(..., min_length=1, description=BATCH_SERIES_DESCRIPTION, json_schema_extra={"items": {"type": "object", "description": "A smooth request (see SmoothRequest); validated per slot."}})


# ---------------------------------------------------------------- responses


class _Out(BaseModel):
    model_config = ConfigDict(extra="forbid")


class BandwidthOut(_Out):
    """The bandwidth used, and the selection record when it was chosen automatically."""

    value: float = Field(..., description="Bandwidth in x units, on the kernel's own scale.")
    selector: str | None = Field(..., description=f"Selector that chose it (`{CORRELATED_SELECTOR_NAME}` when the noise was treated as correlated); null when the bandwidth was given.")
    rule: str | None = Field(..., description="Selection rule (min or one_se); null when given.")
    candidates: list[float] | None = Field(..., description="Candidate bandwidths scored; null when given.")
    scores: list[float | None] | None = Field(..., description="Score of each candidate (lower is better); null where a candidate could not be scored.")
    gaussian_equivalent: float | None = Field(None, description="The chosen bandwidth expressed for a gaussian kernel, for comparing across kernels.")
    duration: str | None = Field(None, description="With timestamp x: `value` (milliseconds) as an ISO 8601 duration, e.g. PT5H30M.")


class CurveOut(_Out):
    """The smoothed curve. Bands, when present, are pointwise unless diagnostics.bands.simultaneous is true."""

    x: list[float] | list[str] = Field(..., description="Curve x values: numbers, or RFC 3339 UTC date-times (Z, milliseconds) when x was given as date-times.")
    estimate: list[float | None] = Field(..., description="Estimate at each x; null where no data lies in the kernel window and strictly inside a gap (see `gaps`; the band and se are null there too).")
    lower: list[float | None] | None = Field(None, description="Lower band (when bands were asked for).")
    upper: list[float | None] | None = Field(None, description="Upper band (when bands were asked for).")
    se: list[float | None] | None = Field(None, description="Pointwise standard error of `estimate` (when bands were asked for). The bands are centred on `band_center` when present, so `estimate ± z·se` is not the band.")
    band_center: list[float | None] | None = Field(None, description="Centre of the bands when it is not `estimate`: the bias-corrected estimate (a local fit one degree higher, or degree 2 for local constant). Present when bands were asked for and centred there.")


class FittedOut(_Out):
    """Fitted values and residuals at the data points, in the order given."""

    estimate: list[float | None]
    residuals: list[float | None]
    robustness_weights: list[float | None] | None = Field(None, description="With robust: 1 for a reading the fit uses, 0 for one left out as an outlier; null for a reading left out as missing.")


class AnomalyOut(_Out):
    """A reading outside the prediction interval of the outlier-resistant fit."""

    index: int = Field(..., description="Position of the reading in the request's arrays.")
    x: float | str = Field(..., description="The reading's x (an RFC 3339 UTC date-time for timestamp x).")
    y: float
    estimate: float | None = Field(..., description="The resistant fit's curve at x.")
    lower: float | None = Field(..., description="Lower end of the prediction interval at anomalies.level.")
    upper: float | None = Field(..., description="Upper end of the prediction interval at anomalies.level.")


class PredictionOut(_Out):
    """Prediction at one new x."""

    x: float | str = Field(..., description="The x asked for; an RFC 3339 UTC date-time when x was given as date-times.")
    estimate: float | None = Field(..., description="The curve's estimate at x; null where no data lies in the kernel window.")
    lower: float | None = Field(None, description="Lower end of the band for the CURVE at x: the same band as curve.lower/curve.upper (method, level, pointwise or simultaneous as asked). Present when bands were asked for.")
    upper: float | None = Field(None, description="Upper end of the band for the CURVE at x (see `lower`). Present when bands were asked for.")
    interval_lower: float | None = Field(None, description="Lower end of the prediction interval for a NEW READING at x (curve uncertainty plus noise, at bands.level; wider than the band). Present when bands were asked for.")
    interval_upper: float | None = Field(None, description="Upper end of the prediction interval for a NEW READING at x (see `interval_lower`). Present when bands were asked for.")
    extrapolated: bool = Field(..., description="True when x lies outside the data range: the estimate extends the local fit beyond the data and can be far off.")
    in_gap: bool = Field(False, description="True when x lies strictly inside a gap of the data (see `gaps`): the estimate there is carried over from readings on either side and was never measured. Present on every prediction when the answer has gaps; absent (false) otherwise.")


class BandsInfo(_Out):
    method: str
    level: float
    simultaneous: bool
    replicates: int | None
    seed: int | None


class DiagnosticsOut(_Out):
    """Fit diagnostics."""

    n: int = Field(..., description="Points given.")
    n_used: int = Field(..., description="Points with weight > 0.")
    effective_df: float | None = Field(..., description="Trace of the smoother matrix: the equivalent number of parameters.")
    residual_scale: float | None = Field(..., description="Estimate of the noise standard deviation.")
    kernel: str
    degree: int
    engine: str = Field(..., description="Engine actually used (exact or binned).")
    x_min: float
    x_max: float
    bands: BandsInfo | None = None
    n_missing: int = Field(0, description="Readings left out because x, y or the weight was null (missing: drop).")
    noise: NoiseUsed = Field("independent", description="Noise model used for bandwidth, standard errors, bands and prediction intervals: independent or correlated (see the request's `noise`).")
    noise_autocorrelation: float | None = Field(None, description="Lag-1 autocorrelation of the noise in x order (difference-based estimate; readings sharing an x averaged); null with fewer than 8 distinct x values.")
    family: str = Field("gaussian", description="The family fitted; present when it is not gaussian.")
    robust: bool = Field(False, description="True for an outlier-resistant fit (present only then).")
    n_outliers: int | None = Field(None, description="With robust: readings left out of the fit as outliers.")


class GapOut(_Out):
    """A stretch of x with no readings, wider than `max_gap`: the readings on either side."""

    start: float | str = Field(..., description="The last reading before the gap (an RFC 3339 UTC date-time for timestamp x).")
    end: float | str = Field(..., description="The first reading after the gap.")


class WarningOut(_Out):
    """A caution about the result; `code` is stable, `message` is for a person."""

    code: str = Field(..., description="Stable code: " + "; ".join(f"`{code}`: {meaning}" for code, meaning in WARNING_CODES.items()), json_schema_extra={"enum": list(WARNING_CODES)})
    message: str


class SmoothResponse(_Out):
    """Result of smoothing one series."""

    bandwidth: BandwidthOut
    curve: CurveOut
    fitted: FittedOut | None = Field(None, description="Present when include_fitted was true.")
    predictions: list[PredictionOut] = Field(..., description="One entry per predict_at value, in order (empty when none were asked for).")
    gaps: list[GapOut] = Field(default_factory=list, description="Gaps in the data, in x order (empty when none); the curve is null strictly inside each.")
    anomalies: list[AnomalyOut] | None = Field(None, description="With anomalies asked for: the flagged readings, in index order.")
    diagnostics: DiagnosticsOut
    warnings: list[WarningOut]


class NoiseDiagnosticsOut(_Out):
    """The noise model behind the selection."""

    noise: NoiseUsed = Field(..., description="Noise model used for the selection: independent or correlated (see the request's `noise`).")
    noise_autocorrelation: float | None = Field(None, description="Lag-1 autocorrelation of the noise in x order (difference-based estimate); null with fewer than 8 distinct x values.")


class BandwidthResponse(_Out):
    """Result of bandwidth selection."""

    bandwidth: BandwidthOut
    diagnostics: NoiseDiagnosticsOut
    warnings: list[WarningOut]


class FieldErrorOut(_Out):
    field: str = Field(..., description="Where the problem is, e.g. `y`, `bands.level`, `x[3]`.")
    message: str
    type: str = Field(..., description="Stable code: " + "; ".join(f"`{code}`: {meaning}" for code, meaning in FIELD_ERROR_CODES.items()), json_schema_extra={"enum": list(FIELD_ERROR_CODES)})


class Problem(_Out):
    """RFC 9457 problem details (media type application/problem+json)."""

    model_config = ConfigDict(extra="allow")
    type: str = Field(..., description="URI reference naming the problem type; GET it for a description.")
    title: str
    status: int
    detail: str
    instance: str | None = Field(None, description="The request path.")
    request_id: str | None = Field(None, description="Same as the X-Request-ID response header; quote it when reporting a problem.")
    errors: list[FieldErrorOut] | None = Field(None, description="Offending fields (validation problems only).")


class ProblemSlot(_Out):
    """A batch slot whose series could not be smoothed."""

    problem: Problem


class BatchResponse(_Out):
    """One slot per series, in the order given."""

    results: Sequence[SmoothResponse | ProblemSlot]


class KernelOut(_Out):
    name: str
    support: float | None = Field(..., description="Half-width of the support in bandwidth units: 1 for [-1, 1]; null for unbounded (gaussian).")
    roughness: float = Field(..., description="R(K), the integral of K(u)^2.")
    second_moment: float = Field(..., description="mu2(K), the integral of u^2 K(u).")
    efficiency: float = Field(..., description="Efficiency relative to the Epanechnikov kernel.")
    canonical_factor: float = Field(..., description="Canonical bandwidth factor delta_0 (Marron and Nolan 1988): multiply bandwidths by ratios of it to convert between kernels.")


class KernelsResponse(_Out):
    kernels: list[KernelOut]


class DemoSummary(_Out):
    name: str
    title: str
    description: str
    n: int
    x_label: str
    y_label: str
    x_unit: str
    y_unit: str


class DemoList(_Out):
    demos: list[DemoSummary]


class DemoData(DemoSummary):
    x: list[float]
    y: list[float]


class Health(_Out):
    status: str


class Readiness(_Out):
    """Body of a 200 from ``/readyz``."""

    status: str = Field(description="`ready`.")
    workers_ready: int = Field(description="Worker processes up and serving.")
    workers: int = Field(description="Worker processes configured.")


def _field_names(model: type[BaseModel]) -> tuple[str, ...]:
    return tuple(model.model_fields)


KNOWN_FIELDS: dict[str, dict[str, tuple[str, ...]]] = {
    "SmoothRequest": {"": _field_names(SmoothRequest), "curve": _field_names(CurveSpec), "bands": _field_names(BandsSpec)},
    "BandwidthRequest": {"": _field_names(BandwidthRequest)},
    "BatchRequest": {"": _field_names(BatchRequest)},
}
"""Field names at each nested location of a request, for the suggestion of an ``unknown_field`` error."""
