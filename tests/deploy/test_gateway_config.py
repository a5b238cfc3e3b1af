"""The gateway template deploy/gateway/nginx.conf: limits agree with the service, retries are safe.

Values compared against the service come from ``service.runtime.settings.Settings``
defaults, so a change on either side without the other fails here.
"""

from __future__ import annotations

import re
import subprocess

import pytest
import yaml

from service.runtime.settings import Settings
from tests.conftest import require_program
from tests.deploy.support import (
    DEPLOY,
    GATEWAY_TEMPLATE,
    LISTEN_PLACEHOLDER,
    REPLICA_PLACEHOLDER,
    directive_values,
    nginx_seconds,
    nginx_size,
    render_gateway_config,
    render_with_script,
    strip_comments,
)

TEMPLATE = GATEWAY_TEMPLATE.read_text(encoding="utf-8")
REPLICAS = ["127.0.0.1:18001", "127.0.0.1:18002", "127.0.0.1:18003"]


def default(field: str) -> object:
    return Settings.model_fields[field].default


def only(values: list[str]) -> str:
    assert len(values) == 1, values
    return values[0]


def test_gateway_body_limit_equals_service_default_limit() -> None:
    gateway = nginx_size(only(directive_values(TEMPLATE, "client_max_body_size")))
    assert gateway == default("max_body_bytes")


def test_deployments_keep_the_same_body_limit() -> None:
    limit = default("max_body_bytes")
    configmap = yaml.safe_load((DEPLOY / "k8s" / "configmap.yaml").read_text(encoding="utf-8"))
    assert int(configmap["data"]["BANDWISE_MAX_BODY_BYTES"]) == limit
    ingress = yaml.safe_load((DEPLOY / "k8s" / "ingress.yaml").read_text(encoding="utf-8"))
    annotation = ingress["metadata"]["annotations"]["nginx.ingress.kubernetes.io/proxy-body-size"]
    assert nginx_size(annotation) == limit
    compose = (DEPLOY / "compose.yaml").read_text(encoding="utf-8")
    (compose_default,) = re.findall(r"BANDWISE_MAX_BODY_BYTES:-(\d+)", compose)
    assert int(compose_default) == limit


def test_timeouts_let_the_service_deadline_answer_first() -> None:
    deadline = float(default("deadline_seconds"))  # type: ignore[arg-type]
    read_timeout = nginx_seconds(only(directive_values(TEMPLATE, "proxy_read_timeout")))
    assert read_timeout > deadline, "the service's own 503 past its deadline must reach the client"
    # A request answered 503 at its deadline is not retried: the retry window closes first.
    retry_window = nginx_seconds(only(directive_values(TEMPLATE, "proxy_next_upstream_timeout")))
    assert retry_window < deadline


def test_retries_cover_dead_and_stopping_replicas_including_posts() -> None:
    conditions = set(only(directive_values(TEMPLATE, "proxy_next_upstream")).split())
    assert conditions == {"error", "timeout", "http_502", "http_503", "non_idempotent"}
    assert int(only(directive_values(TEMPLATE, "proxy_next_upstream_tries"))) >= 2
    # A retry resends the body, so the gateway must hold the whole body.
    assert directive_values(TEMPLATE, "proxy_request_buffering") in ([], ["on"])


def test_upstream_servers_use_passive_health_checks() -> None:
    rendered = render_gateway_config(TEMPLATE, "127.0.0.1:18080", REPLICAS)
    servers = [v for v in directive_values(rendered, "server") if not v.startswith("{")]
    assert [s.split()[0] for s in servers] == REPLICAS
    for server in servers:
        params = dict(p.split("=", 1) for p in server.split()[1:])
        assert int(params["max_fails"]) >= 1
        assert nginx_seconds(params["fail_timeout"]) > 0


def test_rendering_leaves_no_placeholder() -> None:
    rendered = strip_comments(render_gateway_config(TEMPLATE, "127.0.0.1:18080", REPLICAS))
    assert LISTEN_PLACEHOLDER not in rendered and REPLICA_PLACEHOLDER not in rendered
    assert not re.search(r"\$\{[A-Z_]+\}", rendered)
    assert directive_values(rendered, "listen") == ["127.0.0.1:18080"]


def test_render_script_follows_the_template_rules() -> None:
    for replicas in (REPLICAS[:1], REPLICAS):
        assert render_with_script("127.0.0.1:18080", replicas) == render_gateway_config(TEMPLATE, "127.0.0.1:18080", replicas)
    assert subprocess.run(["sh", str(DEPLOY / "gateway" / "render.sh"), "8080"], capture_output=True, timeout=30).returncode == 2


def test_request_id_is_kept_or_generated_and_passed_on() -> None:
    conf = strip_comments(TEMPLATE)
    match = re.search(r"map\s+\$http_x_request_id\s+\$(\w+)\s*\{(.*?)\n\s*\}", conf, re.DOTALL)
    assert match, "a map from the client's X-Request-ID to the id sent upstream"
    variable, body = match.groups()
    assert re.search(r"default\s+\$request_id\s*;", body)
    assert f"X-Request-ID ${variable}" in directive_values(conf, "proxy_set_header")
    assert f"X-Request-ID ${variable} always" in directive_values(conf, "add_header")


def test_per_client_rate_limit_is_applied() -> None:
    zone = only(directive_values(TEMPLATE, "limit_req_zone"))
    assert zone.startswith("$binary_remote_addr ")
    zone_name = re.search(r"zone=(\w+):", zone).group(1)  # type: ignore[union-attr]
    assert any(v.startswith(f"zone={zone_name}") for v in directive_values(TEMPLATE, "limit_req"))
    assert only(directive_values(TEMPLATE, "limit_req_status")) == "429"


def test_gzip_covers_json_and_problem_responses() -> None:
    assert only(directive_values(TEMPLATE, "gzip")) == "on"
    types = only(directive_values(TEMPLATE, "gzip_types")).split()
    assert {"application/json", "application/problem+json"} <= set(types)


@pytest.mark.system
def test_rendered_config_is_accepted_by_nginx(tmp_path) -> None:  # type: ignore[no-untyped-def]
    nginx = require_program("nginx")
    conf = tmp_path / "nginx.conf"
    conf.write_text(render_with_script("127.0.0.1:18080", REPLICAS), encoding="utf-8")
    result = subprocess.run(
        [nginx, "-t", "-p", f"{tmp_path}/", "-c", str(conf), "-e", "stderr"],
        capture_output=True, text=True, timeout=30,
    )
    assert result.returncode == 0, result.stderr
