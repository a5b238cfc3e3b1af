"""deploy/compose.yaml: three replicas behind the gateway, configured by environment.

Not run (no Docker engine on the development machines); checked for consistency
with the gateway template, the Dockerfile and the service settings.
"""

from __future__ import annotations

import re
from pathlib import PurePosixPath
from typing import Any

import pytest
import yaml

from service.runtime.settings import Settings
from tests.deploy.support import DEPLOY, GATEWAY_TEMPLATE, strip_comments

COMPOSE: dict[str, Any] = yaml.safe_load((DEPLOY / "compose.yaml").read_text(encoding="utf-8"))
SERVICES = COMPOSE["services"]


def interpolate_defaults(value: str) -> str:
    """What compose makes of ``${NAME:-default}`` with NAME unset."""
    return re.sub(r"\$\{\w+:-([^}]*)\}", r"\1", value)


def test_three_replicas_behind_a_gateway_that_waits_for_them() -> None:
    assert SERVICES["bandwise"]["deploy"]["replicas"] == 3
    gateway = SERVICES["gateway"]
    assert gateway["depends_on"]["bandwise"]["condition"] == "service_healthy"
    assert "/readyz" in " ".join(SERVICES["bandwise"]["healthcheck"]["test"])
    assert (DEPLOY / SERVICES["bandwise"]["build"]["context"] / SERVICES["bandwise"]["build"]["dockerfile"]).resolve() == (DEPLOY / "Dockerfile").resolve()


def test_gateway_renders_the_repository_template_and_runs_it() -> None:
    gateway = SERVICES["gateway"]
    env = gateway["environment"]
    (volume,) = gateway["volumes"]
    source, target, _mode = volume.split(":")
    assert (DEPLOY / source).resolve() == GATEWAY_TEMPLATE.resolve()
    # The nginx image renders TEMPLATE_DIR/<name>.template into OUTPUT_DIR/<name>.
    target_path = PurePosixPath(target)
    assert target_path.parent == PurePosixPath(env["NGINX_ENVSUBST_TEMPLATE_DIR"])
    assert target_path.suffix == ".template"
    rendered = PurePosixPath(env["NGINX_ENVSUBST_OUTPUT_DIR"]) / target_path.stem
    command = gateway["command"]
    assert command[0] == "nginx" and command[command.index("-c") + 1] == str(rendered)
    placeholders = set(re.findall(r"\$\{(\w+)\}", strip_comments(GATEWAY_TEMPLATE.read_text(encoding="utf-8"))))
    assert placeholders <= set(env), "every placeholder of the template is set"
    assert all(re.search(env["NGINX_ENVSUBST_FILTER"], p) for p in placeholders)
    replica_host = env["BANDWISE_REPLICA"].split(":")[0]
    assert replica_host in SERVICES
    published = [p.split(":")[-1] for p in gateway["ports"]]
    assert published == [env["BANDWISE_GATEWAY_LISTEN"]]


def test_replica_settings_are_real_and_valid(monkeypatch: pytest.MonkeyPatch) -> None:
    env = {k: interpolate_defaults(str(v)) for k, v in SERVICES["bandwise"]["environment"].items()}
    known = {f"BANDWISE_{name.upper()}" for name in Settings.model_fields}
    assert set(env) <= known, f"not settings: {sorted(set(env) - known)}"
    for key, value in env.items():
        monkeypatch.setenv(key, value)
    settings = Settings()
    replica_port = SERVICES["gateway"]["environment"]["BANDWISE_REPLICA"].split(":")[1]
    assert settings.port == int(replica_port) and settings.host == "0.0.0.0"
    grace = float(SERVICES["bandwise"]["stop_grace_period"].removesuffix("s"))
    assert grace > settings.drain_seconds


@pytest.mark.parametrize("name", ["bandwise", "gateway"])
def test_containers_are_read_only_without_capabilities(name: str) -> None:
    service = SERVICES[name]
    assert service["read_only"] is True
    assert "/tmp" in service["tmpfs"]
    assert service["cap_drop"] == ["ALL"]
