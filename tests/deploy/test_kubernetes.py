"""deploy/kubernetes: every manifest valid against the Kubernetes schemas (offline), and consistent
with the service: settings the service accepts, probes on its endpoints, the grace period covering
its drain, the Secret where the keys file is read, selectors that select the pods.

Schemas: kubernetes-validate (PyPI), which bundles the published OpenAPI schemas of each
Kubernetes release; nothing is fetched at test time.
"""

from __future__ import annotations

import re
from pathlib import Path

import kubernetes_validate
import pytest
import yaml
from dockerfile_parse import DockerfileParser

from service.config import SETTINGS, Settings

ROOT = Path(__file__).resolve().parents[2]
FOLDER = ROOT / "deploy" / "kubernetes"
KUSTOMIZATION = yaml.safe_load((FOLDER / "kustomization.yaml").read_text())
# The oldest Kubernetes release still maintained when this was written, and the newest bundled.
VERSIONS = ["1.30", kubernetes_validate.utils.latest_version()]


def _resources() -> list[dict]:
    docs = []
    for name in KUSTOMIZATION["resources"]:
        docs.extend(d for d in yaml.safe_load_all((FOLDER / name).read_text()) if d)
    for generator in KUSTOMIZATION.get("configMapGenerator", []):
        data = {}
        for item in generator["files"]:
            key, _, path = item.partition("=")
            data[key] = (FOLDER / path).read_text()
        docs.append({"apiVersion": "v1", "kind": "ConfigMap", "metadata": {"name": generator["name"]}, "data": data})
    return docs


RESOURCES = _resources()


def _one(kind: str, name: str | None = None) -> dict:
    found = [d for d in RESOURCES if d["kind"] == kind and (name is None or d["metadata"]["name"] == name)]
    assert len(found) == 1, (kind, name, len(found))
    return found[0]


DEPLOYMENT = _one("Deployment")
POD = DEPLOYMENT["spec"]["template"]["spec"]
CONTAINERS = {c["name"]: c for c in POD["containers"]}
SETTINGS_MAP = _one("ConfigMap", "rolloff-settings")["data"]
PROXY_CONF = _one("ConfigMap", "rolloff-proxy")["data"]["nginx.conf"]


def test_kustomization_lists_every_manifest_in_the_folder():
    listed = set(KUSTOMIZATION["resources"])
    present = {p.name for p in FOLDER.glob("*.yaml")} - {"kustomization.yaml"}
    assert listed == present
    kinds = {d["kind"] for d in RESOURCES}
    assert {"Deployment", "Service", "HorizontalPodAutoscaler", "PodDisruptionBudget", "ConfigMap"} <= kinds


@pytest.mark.parametrize("version", VERSIONS)
@pytest.mark.parametrize("doc", RESOURCES, ids=lambda d: f"{d['kind']}/{d['metadata']['name']}")
def test_manifest_is_valid_against_the_kubernetes_schema(doc, version):
    # source: Kubernetes OpenAPI schemas of each release, as bundled by kubernetes-validate (reference schemas)
    kubernetes_validate.validate(doc, version, strict=True)  # raises ValidationError on any mismatch


def test_the_validator_refuses_a_broken_manifest():
    broken = yaml.safe_load(yaml.safe_dump(DEPLOYMENT))
    broken["spec"]["template"]["spec"]["containers"][0]["readinessProbe"]["httpGet"]["port"] = ["app"]
    with pytest.raises(kubernetes_validate.ValidationError):
        kubernetes_validate.validate(broken, VERSIONS[-1], strict=True)
    unknown = yaml.safe_load(yaml.safe_dump(DEPLOYMENT))
    unknown["spec"]["template"]["spec"]["terminationGracePeriod"] = 30  # misspelled field
    with pytest.raises(kubernetes_validate.ValidationError):
        kubernetes_validate.validate(unknown, VERSIONS[-1], strict=True)


def test_settings_are_ones_the_service_knows_and_accepts():
    known = {s.env for s in SETTINGS}
    assert set(SETTINGS_MAP) <= known, set(SETTINGS_MAP) - known
    Settings.from_env(SETTINGS_MAP)  # raises ConfigError on a value the service would refuse at start
    rolloff = CONTAINERS["rolloff"]
    assert rolloff["envFrom"] == [{"configMapRef": {"name": "rolloff-settings"}}]
    assert POD["enableServiceLinks"] is False  # else Kubernetes injects ROLLOFF_PORT=tcp://...


def test_probes_use_the_service_endpoints():
    rolloff = CONTAINERS["rolloff"]
    port = next(p for p in rolloff["ports"] if p["name"] == "app")
    assert port["containerPort"] == int(SETTINGS_MAP["ROLLOFF_PORT"])
    assert rolloff["readinessProbe"]["httpGet"] == {"path": "/readyz", "port": "app"}
    assert rolloff["livenessProbe"]["httpGet"] == {"path": "/healthz", "port": "app"}
    assert rolloff["startupProbe"]["httpGet"]["path"] == "/healthz"
    # liveness tolerates a worker busy for a whole worker timeout
    live = rolloff["livenessProbe"]
    assert live["periodSeconds"] * live["failureThreshold"] > int(SETTINGS_MAP["ROLLOFF_TIMEOUT_S"])


def test_grace_period_covers_pre_stop_pause_and_drain():
    rolloff = CONTAINERS["rolloff"]
    pause = int(rolloff["lifecycle"]["preStop"]["exec"]["command"][-1])
    drain = int(SETTINGS_MAP["ROLLOFF_GRACEFUL_TIMEOUT_S"])
    grace = POD["terminationGracePeriodSeconds"]
    assert pause + drain < grace <= pause + drain + 10
    proxy_stop = " ".join(CONTAINERS["proxy"]["lifecycle"]["preStop"]["exec"]["command"])
    assert f"sleep {pause}" in proxy_stop and "-s quit" in proxy_stop  # the proxy drains, not drops


def test_containers_are_locked_down():
    assert POD["securityContext"]["runAsNonRoot"] is True
    assert POD["automountServiceAccountToken"] is False
    image_user = [i["value"] for i in DockerfileParser(path=str(ROOT / "Dockerfile")).structure
                  if i["instruction"] == "USER"][-1]
    assert POD["securityContext"]["runAsUser"] == int(image_user)
    for container in CONTAINERS.values():
        ctx = container["securityContext"]
        assert ctx["readOnlyRootFilesystem"] is True
        assert ctx["allowPrivilegeEscalation"] is False
        assert ctx["capabilities"]["drop"] == ["ALL"]
        assert ctx.get("runAsUser", POD["securityContext"]["runAsUser"]) != 0
        mounts = {m["mountPath"]: m["name"] for m in container["volumeMounts"]}
        volume = next(v for v in POD["volumes"] if v["name"] == mounts["/tmp"])
        assert "emptyDir" in volume


def _quantity(text: str) -> float:
    units = {"m": 1e-3, "Ki": 2**10, "Mi": 2**20, "Gi": 2**30}
    m = re.fullmatch(r"([0-9.]+)([A-Za-z]*)", str(text))
    return float(m.group(1)) * units.get(m.group(2), 1)


def test_resources_follow_the_worker_count():
    res = CONTAINERS["rolloff"]["resources"]
    workers = int(SETTINGS_MAP["ROLLOFF_WORKERS"])
    slots = int(SETTINGS_MAP.get("ROLLOFF_COMPUTE_SLOTS", "1"))
    # one core per computation at once: every request is CPU-bound numpy work (README "Capacity")
    assert _quantity(res["requests"]["cpu"]) == workers * slots
    for kind in ("cpu", "memory"):
        assert _quantity(res["limits"][kind]) >= _quantity(res["requests"][kind])
    # measured (README "Capacity"): master ~100 MiB, a worker up to ~800 MiB in a Monte Carlo run,
    # plus the in-memory /tmp volume
    tmp = next(v for v in POD["volumes"] if v["name"] == "tmp")["emptyDir"]
    assert _quantity(res["limits"]["memory"]) >= (100 + workers * 800) * 2**20 + _quantity(tmp["sizeLimit"])


def test_api_keys_come_from_a_secret_where_the_service_reads_them():
    keys_file = Path(SETTINGS_MAP["ROLLOFF_API_KEYS_FILE"])
    mount = next(m for m in CONTAINERS["rolloff"]["volumeMounts"] if m["mountPath"] == str(keys_file.parent))
    volume = next(v for v in POD["volumes"] if v["name"] == mount["name"])
    assert volume["secret"]["secretName"] == "rolloff-api-keys"
    assert not volume["secret"].get("optional", False)  # no Secret, no pod: never open by accident
    assert "subPath" not in mount  # a subPath mount would not see a rotated key


def test_selectors_select_the_pods():
    labels = DEPLOYMENT["spec"]["template"]["metadata"]["labels"]
    selectors = [DEPLOYMENT["spec"]["selector"]["matchLabels"], _one("Service")["spec"]["selector"],
                 _one("PodDisruptionBudget")["spec"]["selector"]["matchLabels"],
                 _one("NetworkPolicy")["spec"]["podSelector"]["matchLabels"]]
    for selector in selectors:
        assert selector.items() <= labels.items()
    hpa = _one("HorizontalPodAutoscaler")["spec"]
    assert hpa["scaleTargetRef"] == {"apiVersion": "apps/v1", "kind": "Deployment", "name": "rolloff"}
    assert hpa["metrics"][0]["resource"]["name"] == "cpu"
    assert hpa["minReplicas"] > _one("PodDisruptionBudget")["spec"]["minAvailable"]


def test_traffic_enters_through_the_buffering_proxy():
    service_port = _one("Service")["spec"]["ports"][0]
    proxy_ports = {p["name"]: p["containerPort"] for p in CONTAINERS["proxy"]["ports"]}
    assert service_port["targetPort"] in proxy_ports
    assert f"listen {proxy_ports[service_port['targetPort']]};" in PROXY_CONF
    assert f"server 127.0.0.1:{SETTINGS_MAP['ROLLOFF_PORT']};" in PROXY_CONF
    backend = _one("Ingress")["spec"]["rules"][0]["http"]["paths"][0]["backend"]["service"]
    assert backend == {"name": "rolloff", "port": {"name": service_port["name"]}}
    allowed = [rule["ports"][0]["port"] for rule in _one("NetworkPolicy")["spec"]["ingress"] if "from" not in rule]
    assert allowed == [proxy_ports[service_port["targetPort"]]]


def test_proxy_limits_agree_with_the_service():
    body = int(SETTINGS_MAP["ROLLOFF_MAX_BODY_BYTES"])
    m = re.search(r"client_max_body_size (\d+)m;", PROXY_CONF)
    assert m and int(m.group(1)) * 2**20 == body
    read = int(re.search(r"proxy_read_timeout (\d+)s;", PROXY_CONF).group(1))
    assert read > int(SETTINGS_MAP["ROLLOFF_TIMEOUT_S"])
    assert read > int(SETTINGS_MAP["ROLLOFF_REQUEST_DEADLINE_S"])
    for timeout in ("client_header_timeout", "client_body_timeout"):
        value = int(re.search(rf"{timeout} (\d+)s;", PROXY_CONF).group(1))
        assert value == int(SETTINGS_MAP["ROLLOFF_BODY_TIMEOUT_S"]), timeout
    for directive in ("proxy_request_buffering on;", "proxy_buffering on;", "client_body_timeout",
                      "client_header_timeout"):
        assert directive in PROXY_CONF
    # every path the proxy writes is under its /tmp volume
    for path in re.findall(r"(?:pid|_temp_path) (\S+);", PROXY_CONF):
        assert path.startswith("/tmp/"), path
