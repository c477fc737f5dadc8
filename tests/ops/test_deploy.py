"""The container and Kubernetes files, parsed (no container engine exists here to build them)."""

from __future__ import annotations

import inspect
import json
import pathlib
import re
import shlex
import subprocess
import sys
import tomllib

import pytest
import yaml
from dockerfile_parse import DockerfileParser

from service.config import DEFAULTS
from service.ops.keys import parse_entries
from tests.integration import conftest as integration

ROOT = pathlib.Path(__file__).resolve().parents[2]
K8S = ROOT / "deploy" / "k8s"
#: The one way the service is started: the Makefile, the integration tests and the image.
SERVER_ARGS = ["-c", "deploy/gunicorn.conf.py"]


# --------------------------------------------------------------------------- Dockerfile


@pytest.fixture(scope="module")
def dockerfile() -> list[dict]:
    return DockerfileParser(path=str(ROOT / "deploy" / "Dockerfile")).structure


def _stages(structure: list[dict]) -> list[list[dict]]:
    stages: list[list[dict]] = []
    for item in structure:
        if item["instruction"] == "FROM":
            stages.append([])
        if stages:
            stages[-1].append(item)
    return stages


def _final(structure: list[dict]) -> list[dict]:
    return _stages(structure)[-1]


def _values(stage: list[dict], instruction: str) -> list[str]:
    return [i["value"] for i in stage if i["instruction"] == instruction]


def test_image_runs_as_an_unprivileged_numeric_user(dockerfile):
    final = _final(dockerfile)
    users = _values(final, "USER")
    assert users, "the final stage must set USER"
    uid = users[-1].split(":")[0]
    assert uid.isdigit() and int(uid) >= 1000  # numeric, so runAsNonRoot can verify it
    created = " ".join(_values(final, "RUN"))
    assert f"--uid {uid}" in created
    order = [i["instruction"] for i in final]
    assert order.index("USER") < order.index("CMD")


def test_healthcheck_uses_the_service_probe(dockerfile):
    checks = _values(_final(dockerfile), "HEALTHCHECK")
    assert len(checks) == 1
    options, _, command = checks[0].partition("CMD")
    assert json.loads(command) == ["python", "-m", "service.ops.healthcheck"]
    assert re.search(r"--interval=\d+s", options) and re.search(r"--timeout=\d+s", options)


def test_cmd_is_the_command_the_integration_tests_and_make_serve_run(dockerfile):
    cmd = json.loads(_values(_final(dockerfile), "CMD")[-1])  # exec form: gunicorn is PID 1
    assert cmd == ["gunicorn", *SERVER_ARGS]
    # the integration tests start <venv>/gunicorn with the same arguments from the repo root
    assert '"-c", "deploy/gunicorn.conf.py"' in inspect.getsource(integration.start_server)
    assert "gunicorn -c deploy/gunicorn.conf.py" in (ROOT / "Makefile").read_text()
    # ... and the image puts the configuration where that relative path finds it
    final = _final(dockerfile)
    workdir = _values(final, "WORKDIR")[-1]
    copies = [v.split() for v in _values(final, "COPY")]
    assert ["deploy/gunicorn.conf.py", f"{workdir}/deploy/gunicorn.conf.py"] in copies


def test_listening_port_matches_expose(dockerfile):
    final = _final(dockerfile)
    env = " ".join(_values(final, "ENV"))
    port = re.search(r"CONDUCTION_BIND=0\.0\.0\.0:(\d+)", env).group(1)
    assert _values(final, "EXPOSE") == [port]


def test_dependencies_have_their_own_layer_and_no_build_tools_reach_the_image(dockerfile):
    build, final = _stages(dockerfile)
    steps = [(i["instruction"], i["value"]) for i in build]
    copy_pyproject = steps.index(("COPY", "pyproject.toml ./"))
    install_deps = next(n for n, (ins, v) in enumerate(steps)
                        if ins == "RUN" and "--requirement requirements.txt" in v)
    copy_code = steps.index(("COPY", "service ./service"))
    assert copy_pyproject < install_deps < copy_code
    final_runs = " ".join(_values(final, "RUN"))
    assert "pip" not in final_runs and "apt-get" not in final_runs
    assert not re.search(r"\b(gcc|g\+\+|build-essential|make)\b",
                         " ".join(i["value"] for i in dockerfile if i["instruction"] == "RUN"))
    assert any("--from=build /opt/venv" in v for v in _values(final, "COPY"))


def test_requirements_step_lists_the_pyproject_dependencies(dockerfile, tmp_path):
    run = next(i["value"] for i in dockerfile
               if i["instruction"] == "RUN" and "requirements.txt" in i["value"])
    command = run.split(" > requirements.txt")[0]
    argv = shlex.split(command)
    assert argv[:2] == ["python", "-c"]
    (tmp_path / "pyproject.toml").write_bytes((ROOT / "pyproject.toml").read_bytes())
    out = subprocess.run([sys.executable, "-c", argv[2]], cwd=tmp_path, capture_output=True,
                         text=True, check=True).stdout.split()
    expected = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["dependencies"]
    assert out == [d.replace(" ", "") for d in expected]


def test_pyproject_declares_the_ops_dependencies():
    # the image installs exactly [project] dependencies; make test installs the test extra
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    runtime = " ".join(project["dependencies"]).lower()
    test_extra = " ".join(project["optional-dependencies"]["test"]).lower()
    assert "prometheus-client" in runtime, "add prometheus-client to [project] dependencies"
    for name in ("dockerfile-parse", "pyyaml"):
        assert name in test_extra, f"add {name} to the test extra"


def test_same_base_image_for_both_stages(dockerfile):
    froms = [i["value"].split()[0] for i in dockerfile if i["instruction"] == "FROM"]
    assert froms == ["${PYTHON_IMAGE}", "${PYTHON_IMAGE}"]  # the copied venv's python exists


# --------------------------------------------------------------------------- compose


def test_compose_builds_this_dockerfile_hardened():
    compose = yaml.safe_load((ROOT / "deploy" / "compose.yaml").read_text())
    service = compose["services"]["conduction"]
    context = (ROOT / "deploy" / service["build"]["context"]).resolve()
    assert (context / service["build"]["dockerfile"]).is_file()
    assert service["read_only"] is True and service["user"].startswith("10001")
    assert any(t.startswith("/tmp") for t in service["tmpfs"])
    assert service["cap_drop"] == ["ALL"]
    env = service["environment"]
    grace = int(service["stop_grace_period"].rstrip("s"))
    assert grace > float(env["CONDUCTION_DRAIN_SECONDS"]) + int(env["CONDUCTION_GRACEFUL_TIMEOUT"])


# --------------------------------------------------------------------------- Kubernetes


@pytest.fixture(scope="module")
def manifests() -> dict[str, dict]:
    out = {}
    for path in sorted(K8S.glob("*.yaml")):
        for doc in yaml.safe_load_all(path.read_text()):
            if doc and doc.get("kind") != "Kustomization":
                out[doc["kind"]] = doc
    return out


@pytest.fixture(scope="module")
def container(manifests) -> dict:
    return manifests["Deployment"]["spec"]["template"]["spec"]["containers"][0]


@pytest.fixture(scope="module")
def config(manifests) -> dict[str, str]:
    return manifests["ConfigMap"]["data"]


def test_kustomization_lists_every_manifest():
    kustomization = yaml.safe_load((K8S / "kustomization.yaml").read_text())
    files = {p.name for p in K8S.glob("*.yaml")} - {"kustomization.yaml"}
    assert set(kustomization["resources"]) == files


def test_probes(container):
    port = container["ports"][0]["name"]
    assert container["livenessProbe"]["httpGet"] == {"path": "/healthz", "port": port}
    assert container["readinessProbe"]["httpGet"] == {"path": "/readyz", "port": port}
    assert container["startupProbe"]["httpGet"]["path"] == "/healthz"


def test_liveness_outlasts_the_time_budget(container, config):
    # sync workers answer probes only between requests: liveness must not kill a container
    # whose workers are all busy with requests inside the time budget
    probe = container["livenessProbe"]
    tolerance = probe["periodSeconds"] * probe["failureThreshold"]
    assert tolerance > float(config["CONDUCTION_TIME_BUDGET_SECONDS"])
    assert probe["timeoutSeconds"] >= 2


def test_resources_requests_and_limits(container, config):
    resources = container["resources"]
    for kind in ("cpu", "memory"):
        assert kind in resources["requests"] and kind in resources["limits"]
    assert int(config["CONDUCTION_WORKERS"]) <= float(resources["limits"]["cpu"])


def test_security_context(manifests, container):
    pod = manifests["Deployment"]["spec"]["template"]["spec"]
    context = container["securityContext"]
    assert pod["securityContext"]["runAsNonRoot"] is True
    assert context["runAsNonRoot"] is True
    assert context["readOnlyRootFilesystem"] is True
    assert context["allowPrivilegeEscalation"] is False
    assert context["capabilities"]["drop"] == ["ALL"]
    uid = _values(_final(DockerfileParser(
        path=str(ROOT / "deploy" / "Dockerfile")).structure), "USER")[-1].split(":")[0]
    assert context["runAsUser"] == int(uid)
    assert pod["automountServiceAccountToken"] is False


def test_writable_scratch_is_memory(manifests, container):
    pod = manifests["Deployment"]["spec"]["template"]["spec"]
    volumes = {v["name"]: v for v in pod["volumes"]}
    mounts = {m["mountPath"]: m["name"] for m in container["volumeMounts"]}
    for path in ("/tmp", "/dev/shm"):
        assert volumes[mounts[path]]["emptyDir"]["medium"] == "Memory"


def test_termination_grace_covers_drain_and_in_flight_requests(manifests, config):
    grace = manifests["Deployment"]["spec"]["template"]["spec"]["terminationGracePeriodSeconds"]
    drain = float(config["CONDUCTION_DRAIN_SECONDS"])
    graceful = int(config["CONDUCTION_GRACEFUL_TIMEOUT"])
    assert drain > 0
    assert grace > drain + 1 + graceful  # the master notices the end of the drain within 1 s
    assert graceful >= float(config["CONDUCTION_TIME_BUDGET_SECONDS"])
    assert int(config["CONDUCTION_WORKER_TIMEOUT"]) > float(
        config["CONDUCTION_TIME_BUDGET_SECONDS"])


def test_configmap_names_only_known_settings(config):
    gunicorn_vars = set(re.findall(r"CONDUCTION_[A-Z_]+",
                                   (ROOT / "deploy" / "gunicorn.conf.py").read_text()))
    known = {f"CONDUCTION_{key}" for key in DEFAULTS} | gunicorn_vars
    assert set(config) - known == set()
    assert config["CONDUCTION_BIND"].endswith(":8000")


def test_api_key_secret_is_mounted_where_the_config_points(manifests, container, config):
    key_file = pathlib.PurePosixPath(config["CONDUCTION_API_KEY_FILE"])
    mount = next(m for m in container["volumeMounts"] if m["mountPath"] == str(key_file.parent))
    pod = manifests["Deployment"]["spec"]["template"]["spec"]
    volume = next(v for v in pod["volumes"] if v["name"] == mount["name"])
    secret = manifests["Secret"]
    assert volume["secret"]["secretName"] == secret["metadata"]["name"]
    content = secret["stringData"][key_file.name]
    # the shipped Secret holds no digest: every protected request is refused until one is added
    assert parse_entries(content.splitlines(), "secret") == []


def test_service_hpa_and_pdb_point_at_the_pods(manifests, container):
    labels = manifests["Deployment"]["spec"]["template"]["metadata"]["labels"]
    selector = manifests["Deployment"]["spec"]["selector"]["matchLabels"]
    assert selector.items() <= labels.items()
    service = manifests["Service"]["spec"]
    assert service["selector"].items() <= labels.items()
    assert service["ports"][0]["targetPort"] == container["ports"][0]["name"]
    assert manifests["PodDisruptionBudget"]["spec"]["selector"]["matchLabels"].items() \
        <= labels.items()
    target = manifests["HorizontalPodAutoscaler"]["spec"]["scaleTargetRef"]
    assert (target["kind"], target["name"]) == ("Deployment",
                                                manifests["Deployment"]["metadata"]["name"])
    hpa = manifests["HorizontalPodAutoscaler"]["spec"]
    assert 2 <= hpa["minReplicas"] < hpa["maxReplicas"]
    assert manifests["PodDisruptionBudget"]["spec"]["minAvailable"] < hpa["minReplicas"]
    rolling = manifests["Deployment"]["spec"]["strategy"]["rollingUpdate"]
    assert rolling["maxUnavailable"] == 0


# --------------------------------------------------------------------------- README


def test_readme_lists_every_setting():
    readme = (ROOT / "README.md").read_text()
    gunicorn_vars = set(re.findall(r"CONDUCTION_[A-Z_]+",
                                   (ROOT / "deploy" / "gunicorn.conf.py").read_text()))
    missing = sorted(v for v in {f"CONDUCTION_{k}" for k in DEFAULTS} | gunicorn_vars
                     if f"`{v}`" not in readme)
    assert missing == []
