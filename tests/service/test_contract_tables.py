"""The contract's names and tables agree with their sources: ``estimators``, RFC 9110, and the code that sends them."""

from __future__ import annotations

import ast
import typing
from pathlib import Path

import pytest
from pydantic import ValidationError

import estimators
from service.contract import models
from service.contract.errors import PROBLEM_TYPES, REASON_PHRASES, STATUS_PROBLEMS
from service.contract.field_errors import FIELD_ERROR_CODES, field_errors
from service.contract.warnings import WARNING_CODES

ROOT = Path(__file__).resolve().parents[2]


def _choices(model: type[models.BaseModel], field: str) -> tuple[object, ...]:
    return typing.get_args(model.model_fields[field].annotation)


@pytest.mark.parametrize(
    ("model", "field", "source"),
    [
        (models.SmoothRequest, "kernel", tuple(estimators.KERNELS)),
        (models.SmoothRequest, "selector", estimators.SELECTORS),
        (models.SmoothRequest, "rule", estimators.RULES),
        (models.SmoothRequest, "engine", estimators.ENGINES),
        (models.BandsSpec, "method", estimators.BAND_METHODS),
        (models.BandwidthRequest, "kernel", tuple(estimators.KERNELS)),
    ],
)
def test_request_choices_are_the_names_estimators_exports(model: type[models.BaseModel], field: str, source: tuple[str, ...]) -> None:
    assert _choices(model, field) == tuple(source)
    schema = model.model_json_schema()
    assert schema["properties"][field]["enum"] == list(source)


def test_scored_selectors_come_from_estimators() -> None:
    assert models.SCORED_SELECTORS == tuple(estimators.SCORED_SELECTORS)


def test_problem_titles_are_rfc_9110_reason_phrases() -> None:
    # RFC 9110 section 15: the reason phrases (413 is "Content Too Large", 422 "Unprocessable Content").
    rfc_9110 = {400: "Bad Request", 401: "Unauthorized", 404: "Not Found", 405: "Method Not Allowed", 408: "Request Timeout", 413: "Content Too Large", 415: "Unsupported Media Type", 422: "Unprocessable Content", 429: "Too Many Requests", 500: "Internal Server Error", 503: "Service Unavailable"}
    for kind in PROBLEM_TYPES.values():
        assert kind.title == rfc_9110[kind.status], kind.slug
    assert {s: REASON_PHRASES[s] for s in rfc_9110} == rfc_9110


def test_every_status_raised_by_the_framework_has_a_problem_type() -> None:
    assert set(STATUS_PROBLEMS) == {t.status for t in PROBLEM_TYPES.values()}
    assert STATUS_PROBLEMS[422] == "validation-error" and STATUS_PROBLEMS[503] == "overloaded"


def _caution_codes(path: Path) -> set[str]:
    """First string argument of every ``Caution(...)``/``_Caution(...)`` call in ``path``."""
    found: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id in ("Caution", "_Caution"):
            if node.args and isinstance(node.args[0], ast.Constant) and isinstance(node.args[0].value, str):
                found.add(node.args[0].value)
    return found


def test_every_warning_code_the_code_can_send_is_documented() -> None:
    sources = [*(ROOT / "estimators").rglob("*.py"), *(ROOT / "service").rglob("*.py")]
    sent = set().union(*(_caution_codes(p) for p in sources))
    assert {"few_points", "degree_reduced", "extrapolation"} <= sent  # the reader finds the calls
    assert sent <= set(WARNING_CODES), sorted(sent - set(WARNING_CODES))


@pytest.mark.parametrize(
    ("body", "code", "field"),
    [
        ({"y": [1.0, 2.0]}, "missing", "x"),
        ({"x": [1.0, 2.0], "y": [1.0, 2.0], "kernal": "gaussian"}, "unknown_field", "kernal"),
        ({"x": [1.0, 2.0], "y": [1.0, 2.0], "candidates": 5}, "unknown_field", "candidates"),
        ({"x": [1.0, "2"], "y": [1.0, 2.0]}, "wrong_type", "x[1]"),
        ({"x": [1.0, 2.0], "y": [1.0, 2.0], "bands": {"level": 1.5}}, "too_large", "bands.level"),
        ({"x": [1.0, 2.0], "y": [1.0, 2.0], "bands": {"replicates": 0}}, "too_small", "bands.replicates"),
        ({"x": [1.0, 2.0], "y": [1.0, 2.0], "kernel": "boxcar"}, "not_allowed", "kernel"),
        ({"x": [1.0, 2.0], "y": [1.0, 2.0, 3.0]}, "invalid", "y"),
        ({"x": [1.0], "y": [1.0]}, "too_short", "x"),
        ({"x": [1.0, 2.0], "y": [1.0, 2.0], "bandwidth": -1.0}, "too_small", "bandwidth"),
    ],
)
def test_field_errors_use_our_codes_and_sentences(body: dict[str, object], code: str, field: str) -> None:
    try:
        models.SmoothRequest.model_validate(body)
    except ValidationError as exc:
        errors = field_errors(exc.errors(include_url=False, include_input=False), known_fields=models.KNOWN_FIELDS["SmoothRequest"])
    else:
        pytest.fail("validation passed")
    assert errors[0]["type"] == code and errors[0]["field"] == field
    assert all(e["type"] in FIELD_ERROR_CODES for e in errors)
    # None of the validation library's own wording (its sentences start "Input should", "Field required", "Value error").
    assert not any(w in errors[0]["message"] for w in ("Input should", "Field required", "Value error", "extra_forbidden"))
    if field == "candidates":
        assert "candidate_count" in errors[0]["message"]
    if field == "kernal":
        assert "'kernel'" in errors[0]["message"]
    if code == "not_allowed":
        assert all(name in errors[0]["message"] for name in estimators.KERNELS)


def test_more_than_fifty_errors_are_cut_with_a_truncated_entry() -> None:
    try:
        models.SmoothRequest.model_validate({"x": [1.0] * 60, "y": ["a"] * 60})  # x may hold date-time strings; y may not
    except ValidationError as exc:
        errors = field_errors(exc.errors())
    assert len(errors) == 51 and errors[-1]["type"] == "truncated" and "10 more" in errors[-1]["message"]


def test_demo_page_band_defaults_are_the_api_defaults() -> None:
    import re

    page = (ROOT / "service" / "http" / "static" / "index.html").read_text(encoding="utf-8")
    method = re.search(r'<select id="band-method".*?<option value="([a-z_]+)" selected', page, re.S)
    level = re.search(r'<select id="band-level".*?<option value="([0-9.]+)" selected', page, re.S)
    replicates = re.search(r'<input id="band-replicates"[^>]*value="(\d+)"', page)
    assert method and level and replicates
    defaults = models.BandsSpec.model_fields
    assert method.group(1) == defaults["method"].default
    assert float(level.group(1)) == defaults["level"].default
    assert int(replicates.group(1)) == defaults["replicates"].default
