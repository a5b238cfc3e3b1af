"""The largest documented batch, as ordinary JSON, fits every limit on its way in.

"Ordinary JSON" is what a JSON library writes by default: Python's ``json.dumps``
with its default separators, every number in the shortest form that reads back
to the same IEEE 754 binary64 value (at most 17 significant digits, so at most
24 characters, e.g. ``-2.2250738585072014e-308``). The body is built from the
worst case of that form, then compared with the service defaults, the memory
budgets and the deployment manifests.
"""

from __future__ import annotations

import json
import re

import numpy as np
import yaml

from service.runtime.settings import MIB, Settings
from service.worker.memory import request_bytes
from tests.deploy.support import DEPLOY, GATEWAY_TEMPLATE, directive_values, nginx_size

_KUBE_UNITS = {"Ki": 1024, "Mi": 1024**2, "Gi": 1024**3}


def _worst_case_values(count: int, seed: int) -> list[float]:
    """Doubles whose shortest round-trip form is as long as it gets (negative, 17 digits, three-digit exponent)."""
    rng = np.random.default_rng(seed)
    values = -(1.0 + rng.random(count)) * 1e-300
    return [float(v) for v in values]


def _largest_batch_bytes(settings: Settings) -> int:
    """Bytes of ``{"series": [...]}`` with the most series and points allowed, every number at its longest."""
    per_series = settings.max_batch_points // settings.max_batch_series
    one = json.dumps({"x": _worst_case_values(per_series, 1), "y": _worst_case_values(per_series, 2)})
    longest = max(len(repr(v)) for v in _worst_case_values(per_series, 1))
    assert longest == 24, "the sample reaches the longest form of a double"
    envelope = len(json.dumps({"series": []}))
    return envelope + settings.max_batch_series * len(one) + (settings.max_batch_series - 1) * len(", ")


def _kube_bytes(value: str) -> int:
    match = re.fullmatch(r"(\d+)(Ki|Mi|Gi)", value)
    assert match, value
    return int(match.group(1)) * _KUBE_UNITS[match.group(2)]


def test_largest_batch_of_full_precision_json_fits_the_body_limit() -> None:
    settings = Settings()
    assert settings.max_batch_series * settings.max_points >= settings.max_batch_points
    assert _largest_batch_bytes(settings) <= settings.max_body_bytes


def test_body_limit_fits_the_bytes_held_in_flight() -> None:
    settings = Settings()
    assert settings.body_bytes_in_flight >= 2 * settings.max_body_bytes, "two largest bodies can arrive at once"


def test_largest_batch_in_one_worker_fits_the_memory_model() -> None:
    settings = Settings()
    per_series = settings.max_batch_points // settings.max_batch_series
    needed = request_bytes(settings.max_body_bytes, per_series, settings.default_curve_points, False)
    assert needed <= settings.request_memory_bytes, f"{needed / MIB:.0f} MiB"


def test_pod_memory_limit_holds_the_bodies_and_every_worker_budget() -> None:
    settings = Settings()
    configmap = yaml.safe_load((DEPLOY / "k8s" / "configmap.yaml").read_text(encoding="utf-8"))["data"]
    workers = int(configmap["BANDWISE_WORKERS"])
    body_limit = int(configmap.get("BANDWISE_MAX_BODY_BYTES", settings.max_body_bytes))
    in_flight = max(int(configmap.get("BANDWISE_BODY_BYTES_IN_FLIGHT", settings.body_bytes_in_flight)), body_limit)
    per_request = int(configmap.get("BANDWISE_REQUEST_MEMORY_BYTES", settings.request_memory_bytes))
    deployment = yaml.safe_load((DEPLOY / "k8s" / "deployment.yaml").read_text(encoding="utf-8"))
    (container,) = deployment["spec"]["template"]["spec"]["containers"]
    limit = _kube_bytes(container["resources"]["limits"]["memory"])
    assert in_flight + workers * per_request <= limit


def test_every_front_door_allows_the_largest_batch() -> None:
    settings = Settings()
    needed = _largest_batch_bytes(settings)
    configmap = yaml.safe_load((DEPLOY / "k8s" / "configmap.yaml").read_text(encoding="utf-8"))["data"]
    ingress = yaml.safe_load((DEPLOY / "k8s" / "ingress.yaml").read_text(encoding="utf-8"))
    compose = (DEPLOY / "compose.yaml").read_text(encoding="utf-8")
    (compose_default,) = re.findall(r"BANDWISE_MAX_BODY_BYTES:-(\d+)", compose)
    limits = {
        "gateway client_max_body_size": nginx_size(directive_values(GATEWAY_TEMPLATE.read_text(encoding="utf-8"), "client_max_body_size")[0]),
        "ingress proxy-body-size": nginx_size(ingress["metadata"]["annotations"]["nginx.ingress.kubernetes.io/proxy-body-size"]),
        "configmap BANDWISE_MAX_BODY_BYTES": int(configmap["BANDWISE_MAX_BODY_BYTES"]),
        "compose BANDWISE_MAX_BODY_BYTES": int(compose_default),
    }
    too_small = {name: value for name, value in limits.items() if value < needed}
    assert not too_small, f"the largest batch is {needed} bytes"
