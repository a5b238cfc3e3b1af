"""deploy/requirements.txt: exact pins that satisfy pyproject.toml and close over their dependencies."""

from __future__ import annotations

import tomllib
from importlib.metadata import PackageNotFoundError, distribution

from packaging.markers import default_environment
from packaging.requirements import Requirement
from packaging.utils import canonicalize_name

from tests.deploy.support import DEPLOY, REPO

# The image's interpreter (deploy/Dockerfile: python:3.11 on Debian, x86_64 or arm64).
IMAGE_ENVIRONMENT = {**default_environment(), "python_version": "3.11", "sys_platform": "linux",
                     "platform_system": "Linux", "os_name": "posix", "implementation_name": "cpython"}


def pins() -> dict[str, str]:
    result: dict[str, str] = {}
    for line in (DEPLOY / "requirements.txt").read_text(encoding="utf-8").splitlines():
        line = line.split("#", 1)[0].strip()
        if not line:
            continue
        req = Requirement(line)
        (spec,) = req.specifier
        assert spec.operator == "==", f"{line}: pin with =="
        name = canonicalize_name(req.name)
        assert name not in result, f"{name} pinned twice"
        result[name] = spec.version
    return result


def applies(req: Requirement) -> bool:
    return req.marker is None or req.marker.evaluate({**IMAGE_ENVIRONMENT, "extra": ""})


def test_every_runtime_dependency_is_pinned_within_its_range() -> None:
    project = tomllib.loads((REPO / "pyproject.toml").read_text(encoding="utf-8"))["project"]
    pinned = pins()
    for line in project["dependencies"]:
        req = Requirement(line)
        name = canonicalize_name(req.name)
        assert name in pinned, f"{name} is a runtime dependency but not pinned"
        assert req.specifier.contains(pinned[name], prereleases=True), f"{name}=={pinned[name]} outside {req.specifier}"


def test_pins_include_the_dependencies_of_pinned_packages() -> None:
    """Checked with the metadata of installed distributions at exactly the pinned version."""
    pinned = pins()
    checked = 0
    for name, version in pinned.items():
        try:
            dist = distribution(name)
        except PackageNotFoundError:
            continue
        if dist.version != version:
            continue
        checked += 1
        for line in dist.requires or []:
            req = Requirement(line)
            if not applies(req):
                continue
            dep = canonicalize_name(req.name)
            assert dep in pinned, f"{name}=={version} needs {req}, which is not pinned"
            assert req.specifier.contains(pinned[dep], prereleases=True), f"{name} needs {req}; pinned {pinned[dep]}"
    assert checked > 0, "no pinned version is installed here: the pins are stale"
