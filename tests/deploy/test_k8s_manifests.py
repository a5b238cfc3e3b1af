"""Kubernetes manifests in deploy/k8s: schema-valid, consistent with each other and the service.

Schemas: the Kubernetes OpenAPI schemas shipped by ``kubernetes-validate`` (strict
mode, so unknown fields fail too), checked against the oldest and newest
Kubernetes versions the package carries that we support (1.29 and latest).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import kubernetes_validate
import pytest
import yaml

from service.runtime.settings import Settings
from tests.deploy.support import DEPLOY

K8S = DEPLOY / "k8s"
KUBERNETES_VERSIONS = ["1.29", kubernetes_validate.latest_version()]


def load_documents(path: Path) -> list[dict[str, Any]]:
    with path.open(encoding="utf-8") as handle:
        return [doc for doc in yaml.safe_load_all(handle) if doc]


def kustomization() -> dict[str, Any]:
    (doc,) = load_documents(K8S / "kustomization.yaml")
    return doc


def manifest_files() -> list[Path]:
    return sorted(p for p in K8S.glob("*.yaml") if p.name != "kustomization.yaml")


def resources() -> dict[str, dict[str, Any]]:
    """Every resource in the kustomization, by kind (one of each kind is expected)."""
    found: dict[str, dict[str, Any]] = {}
    for name in kustomization()["resources"]:
        for doc in load_documents(K8S / name):
            assert doc["kind"] not in found, f"two resources of kind {doc['kind']}"
            found[doc["kind"]] = doc
    return found


def pod_container() -> dict[str, Any]:
    (container,) = resources()["Deployment"]["spec"]["template"]["spec"]["containers"]
    return container


@pytest.mark.parametrize("version", KUBERNETES_VERSIONS)
@pytest.mark.parametrize("path", manifest_files(), ids=lambda p: p.name)
def test_manifest_is_valid_against_kubernetes_schema(path: Path, version: str) -> None:
    docs = load_documents(path)
    assert docs, f"{path.name} holds no resource"
    for doc in docs:
        # Raises ValidationError on a schema violation and SchemaNotFoundError on an
        # unknown kind/apiVersion; both must fail the test.
        kubernetes_validate.validate(doc, version, strict=True)


def test_kustomization_lists_every_manifest_except_the_ingress_example() -> None:
    listed = set(kustomization()["resources"])
    assert all((K8S / name).is_file() for name in listed)
    assert {p.name for p in manifest_files()} - listed == {"ingress.yaml"}


def test_all_required_kinds_are_present() -> None:
    kinds = set(resources())
    assert {"Deployment", "Service", "HorizontalPodAutoscaler", "PodDisruptionBudget", "ConfigMap"} <= kinds
    assert resources()["HorizontalPodAutoscaler"]["apiVersion"] == "autoscaling/v2"


def test_selectors_match_pod_labels() -> None:
    res = resources()
    deployment = res["Deployment"]
    pod_labels = deployment["spec"]["template"]["metadata"]["labels"]
    selectors = {
        "Deployment": deployment["spec"]["selector"]["matchLabels"],
        "Service": res["Service"]["spec"]["selector"],
        "PodDisruptionBudget": res["PodDisruptionBudget"]["spec"]["selector"]["matchLabels"],
    }
    for kind, selector in selectors.items():
        assert selector.items() <= pod_labels.items(), f"{kind} selector does not select the pods"
    for constraint in deployment["spec"]["template"]["spec"]["topologySpreadConstraints"]:
        assert constraint["labelSelector"]["matchLabels"].items() <= pod_labels.items()


def test_autoscaler_targets_the_deployment_on_cpu() -> None:
    res = resources()
    hpa = res["HorizontalPodAutoscaler"]["spec"]
    assert hpa["scaleTargetRef"] == {"apiVersion": "apps/v1", "kind": "Deployment", "name": res["Deployment"]["metadata"]["name"]}
    assert [m["resource"]["name"] for m in hpa["metrics"] if m["type"] == "Resource"] == ["cpu"]
    # The PDB must leave at least one pod running at the autoscaler's minimum.
    assert res["PodDisruptionBudget"]["spec"]["maxUnavailable"] < hpa["minReplicas"]


def test_service_routes_to_the_container_port() -> None:
    container = pod_container()
    port_names = {p["name"]: p["containerPort"] for p in container["ports"]}
    (service_port,) = resources()["Service"]["spec"]["ports"]
    assert service_port["targetPort"] in port_names
    env = resources()["ConfigMap"]["data"]
    assert int(env["BANDWISE_PORT"]) == port_names[service_port["targetPort"]]


def test_probes_use_the_service_health_endpoints() -> None:
    container = pod_container()
    assert container["readinessProbe"]["httpGet"]["path"] == "/readyz"
    assert container["livenessProbe"]["httpGet"]["path"] == "/healthz"
    port_names = {p["name"] for p in container["ports"]}
    for probe in ("readinessProbe", "livenessProbe", "startupProbe"):
        assert container[probe]["httpGet"]["port"] in port_names


def test_pod_is_locked_down() -> None:
    pod = resources()["Deployment"]["spec"]["template"]["spec"]
    container = pod_container()
    assert pod["securityContext"]["runAsNonRoot"] is True
    assert pod["securityContext"]["runAsUser"] != 0
    assert pod["automountServiceAccountToken"] is False
    security = container["securityContext"]
    assert security["readOnlyRootFilesystem"] is True
    assert security["allowPrivilegeEscalation"] is False
    assert security["capabilities"]["drop"] == ["ALL"]
    # A read-only root needs a writable TMPDIR: /tmp must be a volume.
    assert "/tmp" in {m["mountPath"] for m in container["volumeMounts"]}
    for kind in ("requests", "limits"):
        assert {"cpu", "memory"} <= set(container["resources"][kind])


def test_grace_period_covers_pre_stop_pause_and_drain() -> None:
    pod = resources()["Deployment"]["spec"]["template"]["spec"]
    command = pod_container()["lifecycle"]["preStop"]["exec"]["command"]
    assert command[0] == "sleep"
    pause = float(command[1])
    assert pause > 0, "the pause lets the endpoint leave the load balancers before SIGTERM"
    drain = float(resources()["ConfigMap"]["data"]["BANDWISE_DRAIN_SECONDS"])
    assert pod["terminationGracePeriodSeconds"] > pause + drain


def test_configmap_holds_only_real_settings_with_valid_values(monkeypatch: pytest.MonkeyPatch) -> None:
    data = resources()["ConfigMap"]["data"]
    known = {f"BANDWISE_{name.upper()}" for name in Settings.model_fields}
    unknown = set(data) - known
    assert not unknown, f"not settings of service/runtime/settings.py: {sorted(unknown)}"
    assert all(isinstance(v, str) for v in data.values()), "ConfigMap values must be strings"
    for key, value in data.items():
        monkeypatch.setenv(key, value)
    settings = Settings()  # raises if any value is invalid
    assert settings.host == "0.0.0.0", "in a pod the service must listen on all interfaces"
    cpu_limit = pod_container()["resources"]["limits"]["cpu"]
    assert settings.workers == int(float(cpu_limit)), "one worker per CPU the pod may use"


def test_ingress_example_points_at_the_service() -> None:
    (ingress,) = load_documents(K8S / "ingress.yaml")
    service = resources()["Service"]
    backends = [
        path["backend"]["service"]
        for rule in ingress["spec"]["rules"]
        for path in rule["http"]["paths"]
    ]
    service_port_names = {p["name"] for p in service["spec"]["ports"]}
    for backend in backends:
        assert backend["name"] == service["metadata"]["name"]
        assert backend["port"]["name"] in service_port_names
