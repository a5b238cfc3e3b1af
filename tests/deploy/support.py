"""Helpers for the deployment tests: repository paths, the gateway template, processes.

Real processes only: replicas are started with the README's run command
(``bandwise serve --host 127.0.0.1 --port P``) and the gateway is the system's
nginx reading ``deploy/gateway/nginx.conf`` rendered to loopback ports.
"""

from __future__ import annotations

import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Mapping, Sequence
from pathlib import Path

import httpx

REPO = Path(__file__).resolve().parents[2]
DEPLOY = REPO / "deploy"
GATEWAY_TEMPLATE = DEPLOY / "gateway" / "nginx.conf"
GATEWAY_RENDER = DEPLOY / "gateway" / "render.sh"
LISTEN_PLACEHOLDER = "${BANDWISE_GATEWAY_LISTEN}"
REPLICA_PLACEHOLDER = "${BANDWISE_REPLICA}"

_SIZE_UNITS = {"": 1, "k": 1024, "m": 1024**2, "g": 1024**3}


def render_gateway_config(template: str, listen: str, replicas: Sequence[str]) -> str:
    """Fill the gateway template the way its header comment describes.

    An independent reading of the template's rules, to check ``render.sh`` against.

    Parameters
    ----------
    template : str
        Text of ``deploy/gateway/nginx.conf``.
    listen : str
        Value for ``${BANDWISE_GATEWAY_LISTEN}``, e.g. ``"127.0.0.1:18080"``.
    replicas : sequence of str
        ``host:port`` of each replica; every non-comment line holding
        ``${BANDWISE_REPLICA}`` is repeated once per replica.

    Returns
    -------
    str
        An nginx configuration with no placeholders left outside comments.
    """
    if not replicas:
        raise ValueError("at least one replica is needed")
    out: list[str] = []
    for line in template.splitlines(keepends=True):
        if line.lstrip().startswith("#"):
            out.append(line)
        elif REPLICA_PLACEHOLDER in line:
            out.extend(line.replace(REPLICA_PLACEHOLDER, replica) for replica in replicas)
        else:
            out.append(line.replace(LISTEN_PLACEHOLDER, listen))
    return "".join(out)


def render_with_script(listen: str, replicas: Sequence[str]) -> str:
    """The gateway configuration as ``deploy/gateway/render.sh`` writes it."""
    result = subprocess.run(
        ["sh", str(GATEWAY_RENDER), listen, *replicas], capture_output=True, text=True, timeout=30, check=True
    )
    return result.stdout


def strip_comments(conf: str) -> str:
    """nginx configuration text without ``#`` comments (quoted ``#`` are not used)."""
    return "\n".join(line.split("#", 1)[0] for line in conf.splitlines())


def directive_values(conf: str, name: str) -> list[str]:
    """Arguments of every ``name ...;`` directive in an nginx configuration."""
    pattern = re.compile(rf"(?:^|[\s{{;]){re.escape(name)}\s+([^;{{]*);", re.MULTILINE)
    return [m.group(1).strip() for m in pattern.finditer(strip_comments(conf))]


def nginx_size(value: str) -> int:
    """Bytes meant by an nginx size such as ``64m`` (units k, m, g are powers of 1024)."""
    match = re.fullmatch(r"(\d+)([kKmMgG]?)", value.strip())
    if not match:
        raise ValueError(f"not an nginx size: {value!r}")
    return int(match.group(1)) * _SIZE_UNITS[match.group(2).lower()]


def nginx_seconds(value: str) -> float:
    """Seconds meant by an nginx time such as ``40s``, ``2m`` or ``500ms``."""
    match = re.fullmatch(r"(\d+)(ms|s|m|h)?", value.strip())
    if not match:
        raise ValueError(f"not an nginx time: {value!r}")
    scale = {"ms": 0.001, "s": 1.0, None: 1.0, "m": 60.0, "h": 3600.0}[match.group(2)]
    return int(match.group(1)) * scale


def free_port(host: str = "127.0.0.1") -> int:
    """A TCP port that was free on ``host`` a moment ago."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind((host, 0))
        return int(sock.getsockname()[1])


def bandwise_executable() -> str:
    """The ``bandwise`` console script of the running interpreter's environment."""
    beside = Path(sys.executable).with_name("bandwise")
    if beside.exists():
        return str(beside)
    found = shutil.which("bandwise")
    if found is None:
        raise FileNotFoundError("no `bandwise` executable beside the interpreter or on PATH")
    return found


def start_replica(port: int, log_path: Path, env: Mapping[str, str] | None = None) -> subprocess.Popen[bytes]:
    """Start one replica with the README's run command, logging to ``log_path``."""
    full_env = {**os.environ, **(env or {})}
    log = open(log_path, "wb")  # noqa: SIM115 - handed to the child, closed with it
    try:
        return subprocess.Popen(
            [bandwise_executable(), "serve", "--host", "127.0.0.1", "--port", str(port)],
            stdout=log,
            stderr=subprocess.STDOUT,
            env=full_env,
            start_new_session=True,
        )
    finally:
        log.close()


def start_gateway(
    nginx: str, prefix: Path, listen_port: int, replica_ports: Sequence[int]
) -> subprocess.Popen[bytes]:
    """Render the gateway template with ``render.sh`` into ``prefix``; run nginx there in the foreground.

    The access log (nginx's stdout) goes to ``prefix/access.log``, the error log
    to ``prefix/error.log``.
    """
    prefix.mkdir(parents=True, exist_ok=True)
    # Started as root, nginx would run its workers as "nobody", who cannot reach a
    # prefix inside pytest's private temp directory; keep them as the current user,
    # as they are when nginx starts unprivileged (compose runs it as uid 101).
    global_directives = "daemon off;"
    if os.geteuid() == 0:
        global_directives += " user root;"
    conf = render_with_script(f"127.0.0.1:{listen_port}", [f"127.0.0.1:{port}" for port in replica_ports])
    conf_path = prefix / "nginx.conf"
    conf_path.write_text(conf, encoding="utf-8")
    access = open(prefix / "access.log", "wb")  # noqa: SIM115
    errors = open(prefix / "error.log", "wb")  # noqa: SIM115
    try:
        return subprocess.Popen(
            [nginx, "-p", f"{prefix}/", "-c", str(conf_path), "-e", "stderr", "-g", global_directives],
            stdout=access,
            stderr=errors,
            start_new_session=True,
        )
    finally:
        access.close()
        errors.close()


def wait_until_ok(url: str, process: subprocess.Popen[bytes], timeout: float = 30.0) -> None:
    """Poll ``url`` until it answers 200; fail early if ``process`` exits."""
    deadline = time.monotonic() + timeout
    last_error = "no answer"
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise RuntimeError(f"process exited with {process.returncode} before {url} answered")
        try:
            response = httpx.get(url, timeout=1.0)
            if response.status_code == 200:
                return
            last_error = f"status {response.status_code}"
        except httpx.HTTPError as exc:
            last_error = repr(exc)
        time.sleep(0.1)
    raise TimeoutError(f"{url} did not answer 200 within {timeout} s: {last_error}")


def stop(process: subprocess.Popen[bytes], timeout: float = 10.0) -> int | None:
    """Stop a process this test started: SIGTERM, then SIGKILL; return its exit code."""
    if process.poll() is None:
        process.send_signal(signal.SIGTERM)
        try:
            process.wait(timeout=timeout)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=timeout)
    return process.returncode
