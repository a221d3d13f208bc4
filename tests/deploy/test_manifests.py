"""The deployment files in deploy/ hold together: they parse, carry the fields their kinds
require, point their probes at the service's real routes and run as the image's user.

What the manifests must say is the service's contract (docs/contract.md, "Starting the
service", "Settings" and "Routes"); the required fields per kind are those of the Kubernetes
API reference for apps/v1 Deployment, v1 Service and Secret, autoscaling/v2
HorizontalPodAutoscaler and policy/v1 PodDisruptionBudget, and of the Compose specification.
No cluster or engine is needed: the image itself is built and run by deploy/image-check.sh.
"""

from __future__ import annotations

import re
from pathlib import Path, PurePosixPath
from typing import Any

import pytest
import yaml

DEPLOY = Path(__file__).resolve().parents[2] / "deploy"
K8S = DEPLOY / "k8s"
CONTAINERFILE = DEPLOY / "Containerfile"

#: The fixed routes (docs/contract.md, "Routes").
LIVENESS, READINESS, METRICS = "/healthz", "/readyz", "/metrics"
PORT = 8000

YAML_FILES = sorted(p for p in DEPLOY.rglob("*") if p.suffix in (".yaml", ".yml"))


def _load(path: Path) -> list[Any]:
    with path.open(encoding="utf-8") as fh:
        return [doc for doc in yaml.safe_load_all(fh) if doc is not None]


def _k8s_objects() -> list[dict[str, Any]]:
    return [
        doc
        for path in sorted(K8S.glob("*.yaml"))
        if path.name != "kustomization.yaml"
        for doc in _load(path)
    ]


def _one(kind: str) -> dict[str, Any]:
    found = [o for o in _k8s_objects() if o.get("kind") == kind]
    assert len(found) == 1, f"expected one {kind} in deploy/k8s, found {len(found)}"
    return found[0]


def _containerfile_user() -> tuple[int, int]:
    """The numeric uid and gid of the last USER instruction of the Containerfile."""
    users = re.findall(r"^USER\s+(\S+)\s*$", CONTAINERFILE.read_text(), flags=re.MULTILINE)
    assert users, "the Containerfile sets no USER"
    uid, _, gid = users[-1].partition(":")
    assert uid.isdigit(), "USER must be numeric, or runAsNonRoot cannot verify it"
    return int(uid), int(gid or uid)


def _deployment_container() -> dict[str, Any]:
    containers = _one("Deployment")["spec"]["template"]["spec"]["containers"]
    assert len(containers) == 1
    return containers[0]


def _env(container: dict[str, Any]) -> dict[str, str]:
    return {e["name"]: e.get("value") for e in container.get("env", [])}


def _within(path: str, folder: str) -> bool:
    return PurePosixPath(folder) in (PurePosixPath(path), *PurePosixPath(path).parents)


# --- every file ---------------------------------------------------------------------------


def test_there_are_files_to_check() -> None:
    names = {p.relative_to(DEPLOY).as_posix() for p in YAML_FILES}
    for expected in (
        "compose.yaml",
        "prometheus.yml",
        "k8s/kustomization.yaml",
        "k8s/deployment.yaml",
        "k8s/service.yaml",
        "k8s/secret.yaml",
        "k8s/hpa.yaml",
        "k8s/pdb.yaml",
    ):
        assert expected in names


@pytest.mark.parametrize("path", YAML_FILES, ids=lambda p: p.relative_to(DEPLOY).as_posix())
def test_every_yaml_file_parses_to_mappings(path: Path) -> None:
    docs = _load(path)
    assert docs, f"{path.name} is empty"
    assert all(isinstance(d, dict) for d in docs)


def test_kubernetes_objects_have_the_required_fields() -> None:
    objects = _k8s_objects()
    assert {o["kind"] for o in objects} == {
        "Deployment",
        "Service",
        "Secret",
        "HorizontalPodAutoscaler",
        "PodDisruptionBudget",
    }
    api = {
        "Deployment": "apps/v1",
        "Service": "v1",
        "Secret": "v1",
        "HorizontalPodAutoscaler": "autoscaling/v2",
        "PodDisruptionBudget": "policy/v1",
    }
    for obj in objects:
        assert obj.get("apiVersion") == api[obj["kind"]], obj["kind"]
        assert re.fullmatch(r"[a-z0-9]([-a-z0-9]*[a-z0-9])?", obj["metadata"]["name"])
        if obj["kind"] != "Secret":
            assert "spec" in obj, obj["kind"]


def test_kustomization_lists_every_manifest() -> None:
    (kustomization,) = _load(K8S / "kustomization.yaml")
    listed = set(kustomization["resources"])
    present = {p.name for p in K8S.glob("*.yaml")} - {"kustomization.yaml"}
    assert listed == present
    image = _deployment_container()["image"]
    assert any(image.startswith(entry["name"]) for entry in kustomization["images"])


# --- the Deployment -------------------------------------------------------------------------


def test_deployment_selector_matches_its_pods() -> None:
    spec = _one("Deployment")["spec"]
    selector = spec["selector"]["matchLabels"]
    labels = spec["template"]["metadata"]["labels"]
    assert selector and selector.items() <= labels.items()


def test_probes_point_at_the_health_routes_on_the_service_port() -> None:
    container = _deployment_container()
    ports = {p["name"]: p["containerPort"] for p in container["ports"]}
    assert PORT in ports.values()
    expected = {"livenessProbe": LIVENESS, "readinessProbe": READINESS, "startupProbe": LIVENESS}
    for probe, path in expected.items():
        get = container[probe]["httpGet"]
        assert get["path"] == path, probe
        port = get["port"]
        assert (ports.get(port) if isinstance(port, str) else port) == PORT, probe


def test_probed_and_scraped_routes_exist_in_the_service() -> None:
    # The application itself, not a list of names: a renamed route breaks this test.
    from knotwork.api import create_app

    get_routes = {
        route.path for route in create_app().routes if "GET" in getattr(route, "methods", ())
    }
    container = _deployment_container()
    probed = {container[p]["httpGet"]["path"] for p in ("livenessProbe", "readinessProbe")}
    probed.add(container["startupProbe"]["httpGet"]["path"])
    probed.add(
        _one("Deployment")["spec"]["template"]["metadata"]["annotations"]["prometheus.io/path"]
    )
    (config,) = _load(DEPLOY / "prometheus.yml")
    probed.add(config["scrape_configs"][0]["metrics_path"])
    assert probed == {LIVENESS, READINESS, METRICS}
    assert probed <= get_routes


def test_resources_have_requests_and_limits() -> None:
    resources = _deployment_container()["resources"]
    for part in ("requests", "limits"):
        assert {"cpu", "memory"} <= resources[part].keys(), part
    assert _memory_bytes(resources["requests"]["memory"]) <= _memory_bytes(
        resources["limits"]["memory"]
    )


def test_processes_times_concurrency_fit_the_cpu_limit() -> None:
    # KNOTWORK_CONCURRENCY must be explicit: its default counts the cores the process may run
    # on, which under a CPU quota is the whole node (settings.py, usable_cores).
    container = _deployment_container()
    env = _env(container)
    cpu = container["resources"]["limits"]["cpu"]
    cores = int(cpu[:-1]) / 1000 if cpu.endswith("m") else float(cpu)
    assert int(env["KNOTWORK_WORKERS"]) * int(env["KNOTWORK_CONCURRENCY"]) == cores
    _, service = _compose_service()
    compose_env = service["environment"]
    compose_cpus = float(service["deploy"]["resources"]["limits"]["cpus"])
    assert (
        int(compose_env["KNOTWORK_WORKERS"]) * int(compose_env["KNOTWORK_CONCURRENCY"])
        == compose_cpus
    )


def _memory_bytes(quantity: str) -> int:
    units = {"Ki": 2**10, "Mi": 2**20, "Gi": 2**30, "K": 10**3, "M": 10**6, "G": 10**9}
    number, unit = re.fullmatch(r"(\d+)([KMG]i?)?", quantity).groups()
    return int(number) * units.get(unit or "", 1)


def test_pod_runs_as_the_images_non_root_user_on_a_read_only_root() -> None:
    uid, gid = _containerfile_user()
    assert uid != 0
    pod = _one("Deployment")["spec"]["template"]["spec"]
    container = _deployment_container()
    for context in (pod["securityContext"], container["securityContext"]):
        assert context["runAsNonRoot"] is True
        assert context["runAsUser"] == uid
        assert context.get("runAsGroup", gid) == gid
    security = container["securityContext"]
    assert security["readOnlyRootFilesystem"] is True
    assert security["allowPrivilegeEscalation"] is False
    assert security["capabilities"]["drop"] == ["ALL"]


def test_writable_paths_are_empty_dirs_and_tokens_come_from_the_secret() -> None:
    pod = _one("Deployment")["spec"]["template"]["spec"]
    volumes = {v["name"]: v for v in pod["volumes"]}
    mounts = {m["mountPath"]: m["name"] for m in _deployment_container()["volumeMounts"]}
    assert set(mounts.values()) <= volumes.keys()
    assert "emptyDir" in volumes[mounts["/tmp"]]

    env = _env(_deployment_container())
    assert all(isinstance(v, str) for v in env.values()), "env values must be strings"
    assert int(env.get("KNOTWORK_WORKERS", "1")) >= 1
    if int(env.get("KNOTWORK_WORKERS", "1")) > 1:
        # Several processes share metrics through files: the folder must be writable.
        folder = env["PROMETHEUS_MULTIPROC_DIR"]
        holders = [path for path in mounts if _within(folder, path)]
        assert holders and "emptyDir" in volumes[mounts[max(holders, key=len)]]

    tokens_file = env["KNOTWORK_TOKENS_FILE"]
    (holder,) = [path for path in mounts if _within(tokens_file, path)]
    volume = volumes[mounts[holder]]["secret"]
    secret = _one("Secret")
    assert volume["secretName"] == secret["metadata"]["name"]
    file_name = PurePosixPath(tokens_file).relative_to(holder).as_posix()
    keys = {item["path"]: item["key"] for item in volume.get("items", [])} or {
        k: k for k in secret["stringData"]
    }
    assert keys[file_name] in secret.get("stringData", {}) | secret.get("data", {})
    # Readable by the image's group (fsGroup) only, never world-readable.
    assert pod["securityContext"]["fsGroup"] == _containerfile_user()[1]
    assert volume.get("defaultMode", 0o644) & 0o007 == 0


def test_shipped_secret_holds_no_usable_token() -> None:
    # Deployed unedited, the pod must refuse to start rather than accept a published token:
    # blank lines and comments are not tokens (settings.py).
    text = _one("Secret")["stringData"]["tokens"]
    lines = [line.strip() for line in text.splitlines()]
    assert all(not line or line.startswith("#") for line in lines)


def test_graceful_shutdown_outlasts_a_request() -> None:
    pod = _one("Deployment")["spec"]["template"]["spec"]
    timeout = float(_env(_deployment_container())["KNOTWORK_REQUEST_TIMEOUT_S"])
    assert pod["terminationGracePeriodSeconds"] > timeout


# --- Service, autoscaler, disruption budget -------------------------------------------------


def test_service_routes_to_the_pods_port() -> None:
    service = _one("Service")["spec"]
    labels = _one("Deployment")["spec"]["template"]["metadata"]["labels"]
    assert service["selector"].items() <= labels.items()
    names = {p["name"] for p in _deployment_container()["ports"]}
    for port in service["ports"]:
        target = port["targetPort"]
        assert target in names if isinstance(target, str) else target == PORT


def test_autoscaler_targets_the_deployment() -> None:
    hpa = _one("HorizontalPodAutoscaler")["spec"]
    target = hpa["scaleTargetRef"]
    assert (target["kind"], target["name"]) == (
        "Deployment",
        _one("Deployment")["metadata"]["name"],
    )
    assert 2 <= hpa["minReplicas"] <= hpa["maxReplicas"]
    assert hpa["metrics"], "an autoscaler needs a metric"


def test_disruption_budget_covers_the_pods_and_leaves_one() -> None:
    pdb = _one("PodDisruptionBudget")["spec"]
    labels = _one("Deployment")["spec"]["template"]["metadata"]["labels"]
    assert pdb["selector"]["matchLabels"].items() <= labels.items()
    assert ("maxUnavailable" in pdb) != ("minAvailable" in pdb)
    if "maxUnavailable" in pdb:
        assert pdb["maxUnavailable"] < _one("HorizontalPodAutoscaler")["spec"]["minReplicas"]


# --- compose and Prometheus -----------------------------------------------------------------


def _compose_service() -> tuple[dict[str, Any], dict[str, Any]]:
    (compose,) = _load(DEPLOY / "compose.yaml")
    return compose, compose["services"]["knotwork"]


def test_compose_service_is_locked_down_like_the_pod() -> None:
    _, service = _compose_service()
    uid, gid = _containerfile_user()
    assert service["user"] == f"{uid}:{gid}"
    assert service["read_only"] is True
    assert any(t.split(":")[0] == "/tmp" for t in service["tmpfs"])
    assert service["cap_drop"] == ["ALL"]
    assert service["build"]["dockerfile"] == "deploy/Containerfile"
    # Published on the host's loopback only; a proxy in front decides who gets in.
    for port in service["ports"]:
        assert port.startswith("127.0.0.1:") and port.endswith(f":{PORT}")
    assert {"limits"} <= service["deploy"]["resources"].keys()


def test_compose_health_check_and_tokens() -> None:
    compose, service = _compose_service()
    assert LIVENESS in " ".join(service["healthcheck"]["test"])
    env = service["environment"]
    assert all(isinstance(v, str) for v in env.values()), "quote numbers in environment"
    (secret,) = service["secrets"]
    assert secret in compose["secrets"]
    assert env["KNOTWORK_TOKENS_FILE"] == f"/run/secrets/{secret}"
    if int(env.get("KNOTWORK_WORKERS", "1")) > 1:
        assert any(
            _within(env["PROMETHEUS_MULTIPROC_DIR"], t.split(":")[0]) for t in service["tmpfs"]
        )


def test_prometheus_example_scrapes_the_metrics_route() -> None:
    compose, _ = _compose_service()
    assert "metrics" in compose["services"]["prometheus"]["profiles"]
    (config,) = _load(DEPLOY / "prometheus.yml")
    (job,) = config["scrape_configs"]
    assert job["metrics_path"] == METRICS
    (static,) = job["static_configs"]
    assert static["targets"] == [f"knotwork:{PORT}"]


# --- the Containerfile ----------------------------------------------------------------------


def test_containerfile_contract() -> None:
    text = CONTAINERFILE.read_text()
    instructions = [line for line in text.splitlines() if line and not line.startswith("#")]
    assert instructions[0] == "ARG BASE_IMAGE=python:3.12-slim"
    assert len(re.findall(r"^FROM \$\{BASE_IMAGE\}", text, flags=re.MULTILINE)) >= 2
    assert re.search(rf"^EXPOSE {PORT}$", text, flags=re.MULTILINE)
    healthcheck = re.search(r"^HEALTHCHECK .*?\n(?:\s+.*\n)*", text, flags=re.MULTILINE)
    assert healthcheck and LIVENESS in healthcheck.group(0)
    assert "curl" not in healthcheck.group(0)
    assert "-c constraints.txt" in text or "-c /wheels/constraints.txt" in text
    assert "[dev]" not in text, "the image carries the runtime dependencies only"
    assert (DEPLOY / "knotwork-start").stat().st_mode & 0o111
