"""The package as it leaves the repository: what the wheel and the sdist carry, and an
installed wheel serving from any directory.

The wheel and sdist are built with ``python -m build`` from a copy of the files a build
reads (pyproject.toml, README.md, openapi.yaml, models/, service/), so the source tree
stays untouched. The install test uses a fresh virtual environment without the system's
site-packages: its dependencies come from the package index, as a user's would.
"""
from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import tarfile
import urllib.request
import zipfile
from pathlib import Path, PurePosixPath

import pytest

from tests.service.conftest import free_loopback_port, stop, wait_until_answers

REPO = Path(__file__).resolve().parents[1]
BUILD_INPUTS = ("pyproject.toml", "README.md", "openapi.yaml", "models", "service")
INTENDED_PACKAGES = {"uvdose/models", "uvdose/service", "uvdose/service/cache", "uvdose/client"}
"""Every folder of the wheel that holds Python modules (``uvdose`` itself is a namespace)."""


@pytest.fixture(scope="module")
def built(tmp_path_factory) -> dict[str, Path]:
    source = tmp_path_factory.mktemp("source")
    for name in BUILD_INPUTS:
        origin = REPO / name
        if origin.is_dir():
            shutil.copytree(origin, source / name, symlinks=True,
                            ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
        else:
            shutil.copy2(origin, source / name)
    out = tmp_path_factory.mktemp("dist")
    done = subprocess.run([sys.executable, "-m", "build", "--outdir", str(out), str(source)],
                          capture_output=True, text=True, timeout=900)
    assert done.returncode == 0, done.stdout[-3000:] + done.stderr[-3000:]
    (wheel,) = out.glob("*.whl")
    (sdist,) = out.glob("*.tar.gz")
    return {"wheel": wheel, "sdist": sdist}


def _wheel_names(wheel: Path) -> list[str]:
    with zipfile.ZipFile(wheel) as archive:
        return archive.namelist()


@pytest.mark.slow
def test_the_wheel_installs_exactly_the_intended_packages(built):
    names = _wheel_names(built["wheel"])
    top = {PurePosixPath(name).parts[0] for name in names}
    assert top == {"uvdose", "uvdose-0.1.0.dist-info"}, top  # no bare `models` or `service`
    packages = {str(PurePosixPath(name).parent) for name in names if name.endswith(".py")}
    assert packages == INTENDED_PACKAGES | {"uvdose/models/data"}
    assert "uvdose/__init__.py" not in names
    # The client's folder sits in service/ but installs only as uvdose.client.
    assert not any(name.startswith("uvdose/service/client") for name in names)
    assert "uvdose/client/api.py" in names
    assert not any(name.startswith(("uvdose/tests", "uvdose/deploy")) for name in names)


@pytest.mark.slow
def test_the_wheel_carries_the_contract_and_the_tables(built):
    with zipfile.ZipFile(built["wheel"]) as archive:
        assert archive.read("uvdose/service/openapi.yaml") == (REPO / "openapi.yaml").read_bytes()
        names = set(archive.namelist())
    tables = {f"uvdose/models/data/{path.name}" for path in (REPO / "models" / "data").iterdir()
              if path.suffix in (".npz", ".csv", ".json", ".py")}
    assert tables and tables <= names


@pytest.mark.slow
def test_the_sdist_carries_the_contract_as_a_file(built):
    with tarfile.open(built["sdist"]) as archive:
        member = archive.getmember("uvdose-0.1.0/service/openapi.yaml")
        assert member.isfile()
        assert archive.extractfile(member).read() == (REPO / "openapi.yaml").read_bytes()


def test_the_packaged_contract_is_the_top_level_one():
    packaged = REPO / "service" / "openapi.yaml"
    assert packaged.is_symlink() and packaged.resolve() == (REPO / "openapi.yaml").resolve()


@pytest.fixture(scope="module")
def installed(built, tmp_path_factory) -> Path:
    """A fresh venv (no system site-packages) with the wheel and its dependencies."""
    venv = tmp_path_factory.mktemp("venv")
    subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True, timeout=300)
    done = subprocess.run([str(venv / "bin" / "python"), "-m", "pip", "install", "-q", str(built["wheel"])],
                          capture_output=True, text=True, timeout=1800)
    assert done.returncode == 0, done.stderr[-3000:]
    return venv


@pytest.mark.slow
def test_after_install_the_namespace_imports_and_bare_names_do_not(installed, tmp_path):
    python = str(installed / "bin" / "python")
    where = subprocess.run([python, "-c", "import uvdose.models, uvdose.service, uvdose.client; "
                            "print(uvdose.models.__file__); print(uvdose.service.__file__); "
                            "print(uvdose.client.__file__)"],
                           cwd=tmp_path, capture_output=True, text=True, check=True)
    for line in where.stdout.split():
        assert Path(line).is_relative_to(installed), line
    for bare in ("models", "service"):
        refused = subprocess.run([python, "-c", f"import {bare}"], cwd=tmp_path, capture_output=True, text=True)
        assert refused.returncode != 0 and "ModuleNotFoundError" in refused.stderr, bare


@pytest.mark.slow
@pytest.mark.gunicorn
def test_uvdose_serve_from_elsewhere_serves_the_contract_and_logs_json(installed, tmp_path):
    port = free_loopback_port()
    env = {key: value for key, value in os.environ.items()
           if not key.startswith(("UVDOSE_", "PROMETHEUS_", "REDIS_", "PYTHON"))}
    env.update(UVDOSE_BIND=f"127.0.0.1:{port}", UVDOSE_WORKERS="1", UVDOSE_CACHE="memory")
    stdout, stderr = tmp_path / "stdout.log", tmp_path / "stderr.log"
    with stdout.open("wb") as out, stderr.open("wb") as err:
        process = subprocess.Popen([str(installed / "bin" / "uvdose"), "serve"], cwd=tmp_path, env=env,
                                   stdout=out, stderr=err)
        base = f"http://127.0.0.1:{port}"
        try:
            wait_until_answers(base + "/livez", process, timeout_s=120)
            with urllib.request.urlopen(base + "/openapi.yaml", timeout=30) as reply:
                assert reply.read() == (REPO / "openapi.yaml").read_bytes()
            with urllib.request.urlopen(base + "/docs", timeout=30) as reply:
                assert reply.headers.get_content_type() == "text/html" and b'id="op-computeIrradiance"' in reply.read()
            with urllib.request.urlopen(base + "/readyz", timeout=30) as reply:
                assert json.load(reply)["checks"]["contract"]["ok"] is True
            record = {"id": "combe-basse/block-b", "time": "2026-06-21T13:30:00+02:00", "lat": 44.05, "lon": 4.92}
            ask = urllib.request.Request(base + "/v1/irradiance", data=json.dumps({"records": [record]}).encode(),
                                         headers={"Content-Type": "application/json"})
            with urllib.request.urlopen(ask, timeout=60) as reply:
                result = json.load(reply)["results"][0]
            assert result["id"] == "combe-basse/block-b" and result["uv_index"] > 5
            process.send_signal(signal.SIGTERM)
            assert process.wait(timeout=60) == 0
        finally:
            stop(process)
    server_lines = [json.loads(line) for line in stderr.read_text().splitlines() if line.strip()]
    assert any(line["logger"] == "gunicorn.error" and "Booting worker" in line["message"]
               for line in server_lines), server_lines[:5]
    request_lines = [json.loads(line) for line in stdout.read_text().splitlines() if line.strip()]
    assert {(line["method"], line["route"], line["status"]) for line in request_lines} >= {
        ("GET", "/openapi.yaml", 200), ("GET", "/docs", 200), ("POST", "/v1/irradiance", 200)}
