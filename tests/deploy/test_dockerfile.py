"""deploy/Dockerfile: linted with hadolint, and checked for the properties the deployment relies on.

These tests check the file; tests/system/test_container.py builds the image with
podman and runs it.
"""

from __future__ import annotations

import fnmatch
import importlib.util
import json
import os
import re
import shlex
import subprocess
import sys
from pathlib import Path

import httpx
import pytest
import yaml

from service.runtime.settings import Settings
from tests.conftest import require_program
from tests.deploy.support import DEPLOY, REPO, bandwise_executable, free_port, stop, wait_until_ok

DOCKERFILE = DEPLOY / "Dockerfile"


def instructions() -> list[tuple[str, str]]:
    """(INSTRUCTION, arguments) pairs, continuation lines joined, comments dropped."""
    text = re.sub(r"\\\n", " ", DOCKERFILE.read_text(encoding="utf-8"))
    result = []
    for line in text.splitlines():
        line = line.strip()
        if not line or line.startswith("#"):
            continue
        keyword, _, rest = line.partition(" ")
        result.append((keyword.upper(), rest.strip()))
    return result


def stages() -> list[list[tuple[str, str]]]:
    """Instructions grouped by build stage (each starts with FROM)."""
    groups: list[list[tuple[str, str]]] = []
    for keyword, rest in instructions():
        if keyword == "FROM":
            groups.append([])
        if groups:
            groups[-1].append((keyword, rest))
    return groups


def env_of(stage: list[tuple[str, str]]) -> dict[str, str]:
    env: dict[str, str] = {}
    for keyword, rest in stage:
        if keyword == "ENV":
            for item in shlex.split(rest):
                key, _, value = item.partition("=")
                env[key] = value
    return env


def image_command() -> list[str]:
    (cmd,) = [json.loads(rest) for kw, rest in stages()[-1] if kw == "CMD"]
    return cmd


def hadolint() -> str:
    beside = Path(sys.executable).with_name("hadolint")
    return str(beside) if beside.exists() else require_program("hadolint")


def run_hadolint(path: Path) -> list[dict[str, object]]:
    result = subprocess.run(
        [hadolint(), "--format", "json", "--failure-threshold", "style", "--no-color", str(path)],
        capture_output=True, text=True, timeout=60,
    )
    return json.loads(result.stdout or "[]")


def test_hadolint_finds_nothing() -> None:
    findings = run_hadolint(DOCKERFILE)
    assert findings == [], "\n".join(f"line {f['line']}: {f['code']} {f['message']}" for f in findings)


def test_hadolint_is_really_linting(tmp_path: Path) -> None:
    # Rules DL3007 (":latest" tag) and DL3013 (unpinned pip install), from hadolint's rule list.
    bad = tmp_path / "Dockerfile"
    bad.write_text("FROM python:latest\nRUN pip install --no-cache-dir numpy\n", encoding="utf-8")
    codes = {f["code"] for f in run_hadolint(bad)}
    assert {"DL3007", "DL3013"} <= codes


def test_multi_stage_build_on_a_slim_python_base() -> None:
    all_stages = stages()
    assert len(all_stages) >= 2
    args = {rest.split("=", 1)[0]: rest.split("=", 1)[1] for kw, rest in instructions() if kw == "ARG" and "=" in rest}
    for stage in all_stages:
        base = stage[0][1].split()[0]
        base = args.get(base.strip("${}"), base)
        assert re.fullmatch(r"python:3\.\d+(\.\d+)?-slim(-\w+)?", base), base
    final = all_stages[-1]
    copies = [rest for kw, rest in final if kw == "COPY"]
    assert any(c.startswith("--from=") for c in copies), "the runtime stage copies the built environment"
    assert not any(kw == "RUN" and "pip install" in rest for kw, rest in final), "no installs in the runtime stage"


def test_dependencies_come_from_the_pinned_requirements() -> None:
    build = stages()[0]
    runs = " ".join(rest for kw, rest in build if kw == "RUN")
    assert "--requirement /tmp/requirements.txt" in runs or "-r /tmp/requirements.txt" in runs
    assert "COPY deploy/requirements.txt /tmp/requirements.txt" in [f"{kw} {rest}" for kw, rest in build]
    # The project itself must not pull in unpinned dependencies.
    project_installs = [args.strip() for kw, rest in build if kw == "RUN" for args in re.findall(r"pip install ([^&;]*)", rest)]
    assert any("--no-deps" in args and args.split()[-1] == "." for args in project_installs)


def test_runs_as_non_root_with_healthcheck_and_writable_tmp() -> None:
    final = stages()[-1]
    users = [rest for kw, rest in final if kw == "USER"]
    assert users and users[-1].split(":")[0] not in {"0", "root"}
    (healthcheck,) = [rest for kw, rest in final if kw == "HEALTHCHECK"]
    assert "/healthz" in healthcheck and "urllib.request" in healthcheck
    assert "curl" not in healthcheck and "wget" not in healthcheck
    env = env_of(final)
    assert env["TMPDIR"] == "/tmp" and env["PYTHONDONTWRITEBYTECODE"] == "1"


def test_command_is_the_service_itself_configured_by_environment(monkeypatch: pytest.MonkeyPatch) -> None:
    final = stages()[-1]
    env = env_of(final)
    cmd = image_command()
    assert cmd[:2] == ["sh", "-c"] and cmd[2].endswith("; exec bandwise serve"), "exec: the service is PID 1 and receives SIGTERM"
    assert not [rest for kw, rest in final if kw == "ENTRYPOINT"]
    # numba ignores a cache directory it cannot write: it must be under TMPDIR.
    assert env["NUMBA_CACHE_DIR"].startswith(env["TMPDIR"] + "/")
    build = stages()[0]
    (warm_up,) = [rest for kw, rest in build if kw == "RUN" and "-m estimators.warmup" in rest]
    # numba keys its cache to the source path: the warm-up must import the installed
    # package, so it runs outside the source tree (WORKDIR /, and the tree is gone).
    workdirs = [rest for kw, rest in build[: build.index(("RUN", warm_up))] if kw == "WORKDIR"]
    assert workdirs[-1] == "/" and "rm -rf /src" in warm_up
    # The cache is built for a CPU target the runtime stage names too (numba keys it to the CPU).
    assert "NUMBA_CPU_NAME=${NUMBA_CPU_NAME}" in warm_up and env["NUMBA_CPU_NAME"] == "${NUMBA_CPU_NAME}"
    args = {rest.split("=", 1)[0]: rest.split("=", 1)[1] for kw, rest in instructions() if kw == "ARG" and "=" in rest}
    assert args["NUMBA_CPU_NAME"] == "generic"
    assert importlib.util.find_spec("estimators.warmup") is not None
    settings_env = {k: v for k, v in env.items() if k.startswith("BANDWISE_")}
    known = {f"BANDWISE_{name.upper()}" for name in Settings.model_fields}
    assert set(settings_env) <= known
    for key, value in settings_env.items():
        monkeypatch.setenv(key, value)
    settings = Settings()
    assert settings.host == "0.0.0.0" and settings.workers >= 1
    (expose,) = [rest for kw, rest in final if kw == "EXPOSE"]
    assert int(expose) == settings.port
    deployment = yaml.safe_load((DEPLOY / "k8s" / "deployment.yaml").read_text(encoding="utf-8"))
    pod = deployment["spec"]["template"]["spec"]
    (container,) = pod["containers"]
    assert [p["containerPort"] for p in container["ports"]] == [settings.port]
    uid = [rest for kw, rest in final if kw == "USER"][-1].split(":")[0]
    assert int(uid) == pod["securityContext"]["runAsUser"]


@pytest.mark.system
def test_image_command_serves_from_environment_alone(tmp_path: Path) -> None:
    """The image's command, run as the image runs it: every setting from the environment."""
    port = free_port()
    bin_dir = str(Path(bandwise_executable()).parent)
    env = {**os.environ, "BANDWISE_HOST": "127.0.0.1", "BANDWISE_PORT": str(port), "BANDWISE_WORKERS": "1",
           "TMPDIR": str(tmp_path), "PATH": bin_dir + os.pathsep + os.environ.get("PATH", "")}
    with open(tmp_path / "serve.log", "wb") as log:
        # /opt/bandwise/numba-cache does not exist here: the copy fails quietly, as the
        # command allows (numba then uses its cache beside the sources).
        proc = subprocess.Popen(image_command(), env=env, stdout=log, stderr=subprocess.STDOUT)
    try:
        wait_until_ok(f"http://127.0.0.1:{port}/readyz", proc)
        assert httpx.get(f"http://127.0.0.1:{port}/readyz", timeout=5.0).json()["workers"] == 1
        # The HEALTHCHECK command itself, run as the image would run it.
        (healthcheck,) = [rest for kw, rest in stages()[-1] if kw == "HEALTHCHECK"]
        probe = json.loads(healthcheck[healthcheck.index("CMD") + 3:].strip())
        assert probe[0] == "python"
        result = subprocess.run([sys.executable, *probe[1:]], env={**env, "BANDWISE_PORT": str(port)}, timeout=30)
        assert result.returncode == 0
    finally:
        assert stop(proc) == 0, "SIGTERM with nothing in flight: a clean exit"


def dockerignore_keeps(path: str, patterns: list[str]) -> bool:
    """Whether the build context keeps ``path`` (last matching pattern wins, parents count)."""
    keep = True
    parts = path.split("/")
    candidates = ["/".join(parts[: i + 1]) for i in range(len(parts))]
    for pattern in patterns:
        negate = pattern.startswith("!")
        body = pattern[1:] if negate else pattern
        if any(fnmatch.fnmatchcase(c, body) or fnmatch.fnmatchcase(c, body.removeprefix("**/")) for c in candidates):
            keep = negate
    return keep


@pytest.mark.parametrize("source", ["pyproject.toml", "README.md", "estimators", "service", "deploy/requirements.txt"])
def test_build_context_keeps_what_the_build_copies(source: str) -> None:
    copied = [item for kw, rest in instructions() if kw == "COPY" and not rest.startswith("--from") for item in rest.split()[:-1]]
    assert source in copied
    patterns = [
        line.strip()
        for line in (REPO / ".dockerignore").read_text(encoding="utf-8").splitlines()
        if line.strip() and not line.startswith("#")
    ]
    assert dockerignore_keeps(source, patterns)
    assert not dockerignore_keeps(".git", patterns) and not dockerignore_keeps("tests", patterns)
    assert (REPO / source).exists()
