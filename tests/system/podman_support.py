"""Build and run the service image with podman, the way a platform runs it.

No image registry is reachable from the test machines, so the base image is made
from Debian packages (``debootstrap --variant=minbase``) and imported into
podman's store under a tag that carries a hash of its recipe: a second run on the
same machine finds it and skips the minutes debootstrap takes.

``pip`` inside the build uses the machine's own package-index setup, found from
pip itself (``pip config list`` and the ``PIP_*`` environment variables): the
effective settings are written to one pip configuration file mounted read-only at
``/etc/pip.conf`` in the build containers, and every local path those settings name
(CA bundle, wheel folders, ``file://`` indexes, constraint files) is mounted
read-only at the same path.

Here a container may not set resource limits and crun refuses the host's hybrid
cgroups, so every podman call uses ``--runtime runc`` and a ``containers.conf``
with ``default_ulimits = []`` (``CONTAINERS_CONF``).

Also a command line, for building the image by hand::

    python -m tests.system.podman_support build   # prints the image tag
"""

from __future__ import annotations

import ast
import hashlib
import os
import shutil
import subprocess
import sys
import tempfile
import time
from collections.abc import Sequence
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
SUITE = "bookworm"
BASE_PACKAGES = ("python3", "python3-venv", "python-is-python3", "ca-certificates")
BASE_NAME = "localhost/bandwise-base"
IMAGE_NAME = "localhost/bandwise"
# pip settings that describe where packages come from; others (user, target, ...) stay behind.
_PATH_KEYS = ("cert", "client-cert", "find-links", "index-url", "extra-index-url", "constraint")
_SKIP_ENV = {"PIP_CONFIG_FILE", "PIP_REQUIRE_VIRTUALENV", "PIP_TARGET", "PIP_PREFIX", "PIP_USER", "PIP_ROOT", "PIP_SRC"}

CONTAINERS_CONF_TEXT = "[containers]\ndefault_ulimits = []\n"


def containers_conf(directory: Path) -> Path:
    """Write the ``containers.conf`` every podman call here uses; return its path."""
    path = directory / "containers.conf"
    path.write_text(CONTAINERS_CONF_TEXT)
    return path


class Podman:
    """``podman --runtime runc`` with ``CONTAINERS_CONF`` pointing at our configuration."""

    def __init__(self, executable: str, conf: Path) -> None:
        self.executable = executable
        self.env = {**os.environ, "CONTAINERS_CONF": str(conf)}

    def argv(self, *args: str) -> list[str]:
        return [self.executable, "--runtime", "runc", *args]

    def run(self, *args: str, check: bool = True, timeout: float = 120.0, input: bytes | None = None) -> subprocess.CompletedProcess[str]:
        result = subprocess.run(
            self.argv(*args), env=self.env, capture_output=True, text=input is None, timeout=timeout, input=input
        )
        if check and result.returncode != 0:
            raise RuntimeError(f"podman {' '.join(args)} failed ({result.returncode}): {result.stderr!s}"[-4000:])
        return result  # type: ignore[return-value]

    def image_exists(self, tag: str) -> bool:
        return self.run("image", "exists", tag, check=False).returncode == 0


def base_recipe() -> str:
    """Everything that decides the base image's content, as one string."""
    return f"debootstrap --variant=minbase --include={','.join(BASE_PACKAGES)} {SUITE}"


def base_tag() -> str:
    return f"{BASE_NAME}:{hashlib.sha256(base_recipe().encode()).hexdigest()[:16]}"


def ensure_base_image(podman: Podman, log: list[str] | None = None) -> tuple[str, float]:
    """The base image's tag, made with debootstrap unless already in the store; and seconds spent."""
    tag = base_tag()
    start = time.perf_counter()
    if podman.image_exists(tag):
        return tag, 0.0
    debootstrap = shutil.which("debootstrap") or "/usr/sbin/debootstrap"
    with tempfile.TemporaryDirectory(prefix="bandwise-rootfs-", dir="/var/tmp") as root:
        result = subprocess.run(
            [debootstrap, "--variant=minbase", f"--include={','.join(BASE_PACKAGES)}", SUITE, root],
            capture_output=True, text=True, timeout=1200,
        )
        if result.returncode != 0:
            raise RuntimeError(f"debootstrap failed: {result.stdout[-2000:]}{result.stderr[-2000:]}")
        tar = subprocess.Popen(["tar", "-C", root, "-c", "."], stdout=subprocess.PIPE)
        imported = subprocess.run(podman.argv("import", "-", tag), stdin=tar.stdout, env=podman.env, capture_output=True, text=True, timeout=600)
        tar.wait()
        if imported.returncode != 0:
            raise RuntimeError(f"podman import failed: {imported.stderr}")
    seconds = time.perf_counter() - start
    if log is not None:
        log.append(f"base image {tag} made in {seconds:.0f} s")
    return tag, seconds


def _pip_settings(python: str) -> dict[str, str]:
    """The effective pip settings of this machine: configuration files, then ``PIP_*`` variables."""
    listed = subprocess.run([python, "-m", "pip", "config", "list"], capture_output=True, text=True, timeout=60)
    settings: dict[str, str] = {}
    for line in listed.stdout.splitlines():
        key, sep, raw = line.partition("=")
        if not sep or "." not in key:
            continue
        section, _, name = key.partition(".")
        if section not in ("global", "install", "download"):
            continue
        try:
            value = ast.literal_eval(raw)
        except (SyntaxError, ValueError):
            value = raw.strip("'\"")
        settings[name] = str(value)
    for name, value in os.environ.items():
        if name.startswith("PIP_") and name not in _SKIP_ENV:
            settings[name[4:].lower().replace("_", "-")] = value
    return settings


def pip_build_mounts(directory: Path, python: str = sys.executable) -> list[str]:
    """``podman build`` volume options giving the build's pip this machine's package-index setup.

    Writes the merged pip configuration into ``directory`` and returns ``-v`` options
    for it and for every existing local path it names, all read-only.
    """
    settings = _pip_settings(python)
    conf = directory / "pip.conf"
    conf.write_text("[global]\n" + "".join(f"{k} = {v}\n" for k, v in sorted(settings.items())))
    mounts = ["-v", f"{conf}:/etc/pip.conf:ro"]
    seen: set[str] = set()
    for key in _PATH_KEYS:
        for item in settings.get(key, "").split():
            path = item.removeprefix("file://")
            if key.endswith("index-url") and item.startswith("file://"):
                # a local index's pages link to files beside it (../../files/...): mount its parent
                path = os.path.dirname(path.rstrip("/"))
            if os.path.isabs(path) and os.path.exists(path) and path not in seen:
                seen.add(path)
                mounts += ["-v", f"{path}:{path}:ro"]
    return mounts


def build_image(podman: Podman, base: str, work: Path, tag: str | None = None, extra: Sequence[str] = ()) -> tuple[str, float, str]:
    """Build ``deploy/Dockerfile`` on ``base``; return (tag, seconds, build log)."""
    digest = subprocess.run(["git", "-C", str(REPO), "rev-parse", "--short", "HEAD"], capture_output=True, text=True).stdout.strip() or "dev"
    tag = tag or f"{IMAGE_NAME}:{digest}-test"
    start = time.perf_counter()
    result = podman.run(
        "build", "--network", "host", *pip_build_mounts(work), "--build-arg", f"PYTHON_IMAGE={base}",
        *extra, "-f", str(REPO / "deploy" / "Dockerfile"), "-t", tag, str(REPO),
        check=False, timeout=1500,
    )
    seconds = time.perf_counter() - start
    output = f"{result.stdout}\n{result.stderr}"
    if result.returncode != 0:
        raise RuntimeError(f"podman build failed ({result.returncode}):\n{output[-6000:]}")
    return tag, seconds, output


def _main(argv: list[str]) -> int:
    if argv[:1] != ["build"]:
        print("usage: python -m tests.system.podman_support build", file=sys.stderr)
        return 2
    executable = shutil.which("podman")
    if executable is None:
        print("podman is not installed", file=sys.stderr)
        return 1
    with tempfile.TemporaryDirectory(prefix="bandwise-podman-") as tmp:
        work = Path(tmp)
        podman = Podman(executable, containers_conf(work))
        base, base_seconds = ensure_base_image(podman)
        made = f"made in {base_seconds:.0f} s" if base_seconds else "reused from podman's store"
        print(f"base image {base} ({made})", file=sys.stderr)
        tag, seconds, _ = build_image(podman, base, work)
        print(f"image built in {seconds:.0f} s", file=sys.stderr)
        print(tag)
    return 0


if __name__ == "__main__":
    raise SystemExit(_main(sys.argv[1:]))
