"""Typed results: the service's response models with numpy helpers and the answer's request id."""

from __future__ import annotations

import inspect
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np
from pydantic import BaseModel, PrivateAttr

from service.client.errors import BandwiseError, error_from_problem
from service.contract.models import (
    BandwidthOut,
    BandwidthResponse,
    BatchResponse,
    CurveOut,
    FittedOut,
    KernelOut,
    KernelsResponse,
    ProblemSlot,
    SmoothResponse,
)

# Per-call ``extra="ignore"`` (pydantic >= 2.12) keeps results readable when a
# newer service adds response fields; older pydantic validates strictly.
_CAN_IGNORE_EXTRA = "extra" in inspect.signature(BaseModel.model_validate).parameters


# ------------------------------------------------------------------ arrays


def to_numpy(values: Iterable[float | None] | None) -> np.ndarray:
    """A float64 array of ``values`` with JSON ``null`` (None) as NaN.

    Parameters
    ----------
    values : iterable of float or None, or None
        E.g. ``result.curve.estimate``.  ``None`` gives an empty array.
    """
    if values is None:
        return np.empty(0, dtype=float)
    # numpy turns None into NaN when the dtype is float.
    return np.array(values if isinstance(values, list) else list(values), dtype=float)


def axis_to_numpy(values: Iterable[float | str | None]) -> np.ndarray:
    """x values of an answer: float64 for a numeric axis, ``datetime64[ms]`` (UTC) for RFC 3339 date-times.

    Parameters
    ----------
    values : iterable of float, str or None
        E.g. ``result.curve.x``; the service writes date-times in UTC with a ``Z``.
    """
    items = values if isinstance(values, list) else list(values)
    if items and isinstance(items[0], str):
        return np.array([str(v).rstrip("Zz") for v in items], dtype="datetime64[ms]")
    return to_numpy(items)  # type: ignore[arg-type]


@dataclass(frozen=True)
class CurveArrays:
    """The curve as numpy arrays; band arrays are None when bands were not asked for."""

    x: np.ndarray  # float64, or datetime64[ms] when x was sent as date-times
    estimate: np.ndarray
    lower: np.ndarray | None
    upper: np.ndarray | None
    se: np.ndarray | None


@dataclass(frozen=True)
class FittedArrays:
    """Fitted values and residuals at the data points, in the order given."""

    estimate: np.ndarray
    residuals: np.ndarray
    robustness_weights: np.ndarray | None = None  # robust fits: 0 for a reading left out as an outlier


@dataclass(frozen=True)
class AnomalyArrays:
    """The ``anomalies`` list as columns; ``index`` is the position in the arrays sent."""

    index: np.ndarray
    x: np.ndarray
    y: np.ndarray
    estimate: np.ndarray
    lower: np.ndarray
    upper: np.ndarray


@dataclass(frozen=True)
class PredictionArrays:
    """Predictions as columns; band and interval columns are None when not in the answer."""

    x: np.ndarray
    estimate: np.ndarray
    lower: np.ndarray | None
    upper: np.ndarray | None
    interval_lower: np.ndarray | None
    interval_upper: np.ndarray | None
    extrapolated: np.ndarray


@dataclass(frozen=True)
class SelectionArrays:
    """Candidate bandwidths and their scores (NaN where a candidate could not be scored)."""

    candidates: np.ndarray
    scores: np.ndarray


def _optional(values: Iterable[float | None] | None) -> np.ndarray | None:
    return None if values is None else to_numpy(values)


# ----------------------------------------------------------------- results


class _Answer(BaseModel):
    """Mixin: the ``X-Request-ID`` of the answer a result came from."""

    _request_id: str | None = PrivateAttr(default=None)

    @property
    def request_id(self) -> str | None:
        """Request id of the answer (quote it when reporting a problem)."""
        return self._request_id

    def __eq__(self, other: object) -> bool:
        # Results are equal when their contents are; which request brought them does not count.
        if not isinstance(other, BaseModel):
            return NotImplemented
        return type(self) is type(other) and self.__dict__ == other.__dict__ and self.__pydantic_extra__ == other.__pydantic_extra__

    __hash__ = None  # type: ignore[assignment]


class CurveResult(CurveOut):
    """:class:`service.contract.models.CurveOut` with a numpy helper."""

    def arrays(self) -> CurveArrays:
        """The curve as float arrays (NaN where the estimate or band is null)."""
        return CurveArrays(axis_to_numpy(self.x), to_numpy(self.estimate), _optional(self.lower), _optional(self.upper), _optional(self.se))


class FittedResult(FittedOut):
    """:class:`service.contract.models.FittedOut` with a numpy helper."""

    def arrays(self) -> FittedArrays:
        """Fitted values and residuals as float arrays."""
        return FittedArrays(to_numpy(self.estimate), to_numpy(self.residuals), _optional(self.robustness_weights))


class SelectionResult(BandwidthOut):
    """:class:`service.contract.models.BandwidthOut` with a numpy helper."""

    def arrays(self) -> SelectionArrays | None:
        """Candidates and scores as float arrays; None when the bandwidth was given, not selected."""
        if self.candidates is None or self.scores is None:
            return None
        return SelectionArrays(to_numpy(self.candidates), to_numpy(self.scores))


class SmoothResult(SmoothResponse, _Answer):
    """Answer of ``POST /v1/smooth``: a :class:`service.contract.models.SmoothResponse`.

    ``result.bandwidth.value``, ``result.curve.estimate``, ``result.predictions[0].extrapolated``,
    ``result.diagnostics.effective_df`` and ``result.warnings`` are the fields of
    the contract; ``result.curve.arrays()`` and :meth:`prediction_arrays` give
    numpy arrays.  Bands are pointwise unless ``diagnostics.bands.simultaneous``.
    """

    bandwidth: SelectionResult
    curve: CurveResult
    fitted: FittedResult | None = None

    def prediction_arrays(self) -> PredictionArrays:
        """The ``predictions`` list as columns (empty arrays when none were asked for)."""
        rows = self.predictions

        def column(name: str) -> np.ndarray | None:
            if not any(name in row.model_fields_set for row in rows):
                return None
            return to_numpy(getattr(row, name) for row in rows)

        return PredictionArrays(
            x=axis_to_numpy(row.x for row in rows),
            estimate=to_numpy(row.estimate for row in rows),
            lower=column("lower"),
            upper=column("upper"),
            interval_lower=column("interval_lower"),
            interval_upper=column("interval_upper"),
            extrapolated=np.array([row.extrapolated for row in rows], dtype=bool),
        )

    def anomaly_arrays(self) -> AnomalyArrays:
        """The flagged readings as columns (empty when none were flagged or anomalies were not asked for)."""
        rows = self.anomalies or []
        return AnomalyArrays(
            index=np.array([row.index for row in rows], dtype=np.int64),
            x=axis_to_numpy(row.x for row in rows),
            y=to_numpy(row.y for row in rows),
            estimate=to_numpy(row.estimate for row in rows),
            lower=to_numpy(row.lower for row in rows),
            upper=to_numpy(row.upper for row in rows),
        )

    def warning_codes(self) -> list[str]:
        """The stable ``code`` of every warning, in order."""
        return [w.code for w in self.warnings]


class BandwidthResult(BandwidthResponse, _Answer):
    """Answer of ``POST /v1/bandwidth``: a :class:`service.contract.models.BandwidthResponse`."""

    bandwidth: SelectionResult


class KernelsResult(KernelsResponse, _Answer):
    """Answer of ``GET /v1/kernels``: a :class:`service.contract.models.KernelsResponse`."""

    def by_name(self) -> dict[str, KernelOut]:
        """The kernels keyed by name."""
        return {k.name: k for k in self.kernels}


class BatchResult(BatchResponse, _Answer):
    """Answer of ``POST /v1/smooth/batch``: one slot per series, in order.

    A slot is a :class:`SmoothResult`, or a :class:`service.contract.models.ProblemSlot`
    when that series alone failed; :meth:`errors` turns those into exceptions.
    """

    results: Sequence[SmoothResult | ProblemSlot]

    @property
    def ok(self) -> bool:
        """True when every series was smoothed."""
        return not any(isinstance(slot, ProblemSlot) for slot in self.results)

    def succeeded(self) -> dict[int, SmoothResult]:
        """The smoothed series, keyed by their index in the request."""
        return {i: slot for i, slot in enumerate(self.results) if isinstance(slot, SmoothResult)}

    def errors(self) -> dict[int, BandwiseError]:
        """The failed series, keyed by index, each as the exception a single call would raise."""
        return {
            i: error_from_problem(slot.problem.model_dump(exclude_none=True), slot.problem.status, series=i, request_id=self.request_id)
            for i, slot in enumerate(self.results)
            if isinstance(slot, ProblemSlot)
        }

    def raise_for_errors(self) -> None:
        """Raise the error of the first failed series, if any."""
        for error in self.errors().values():
            raise error


