"""Service fixtures: the app, a test client held to openapi.yaml, a real gunicorn server.

Every response the ``client`` fixture receives is validated against openapi.yaml with
openapi-core: its status must be documented for the operation and its body must match
the documented schema for its media type. Responses to paths or methods the document
does not have (404, 405) must still be RFC 9457 problem documents.
"""
from __future__ import annotations

import contextlib
import copy
import json
import os
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest
import yaml
from flask.testing import FlaskClient
from openapi_core import Config, OpenAPI
from openapi_core.contrib.werkzeug import WerkzeugOpenAPIRequest, WerkzeugOpenAPIResponse
from openapi_core.templating.paths.exceptions import OperationNotFound, PathNotFound
from openapi_schema_validator import OAS31Validator

from werkzeug.test import EnvironBuilder
from werkzeug.wrappers import Request, Response

from uvdose.service.app import create_app

REPO = Path(__file__).resolve().parents[2]
SPEC_PATH = REPO / "openapi.yaml"


def load_spec() -> dict:
    return yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))


@pytest.fixture(scope="session")
def openapi_spec() -> dict:
    return load_spec()


@pytest.fixture(scope="session")
def openapi_checker(openapi_spec):
    spec = copy.deepcopy(openapi_spec)
    # The test client talks to http://localhost/; match paths regardless of server URL.
    spec["servers"] = [{"url": "/"}]
    config = Config(extra_media_type_deserializers={
        "application/problem+json": json.loads,
        "text/csv": _text,
        "application/x-ndjson": _text,
        "application/yaml": _text,
        "text/html": _text,
        "text/css": _text,
        "text/javascript": _text,
        "image/svg+xml": _text,
        "application/x-ndjson": _text,
        "application/vnd.apache.parquet": _binary,
    })
    return OpenAPI.from_dict(spec, config=config)


def _binary(body) -> str:
    """A binary body as the string its schema (``format: binary``) stands for."""
    return f"<{len(body)} bytes>"


def _text(body) -> str:
    return body.decode("utf-8") if isinstance(body, bytes) else body


def _problem_validator(spec: dict) -> OAS31Validator:
    schema = dict(spec["components"]["schemas"]["Problem"])
    schema["components"] = spec["components"]
    schema["properties"] = dict(schema["properties"])
    schema["properties"]["errors"] = {"type": "array", "items": {"$ref": "#/components/schemas/FieldError"}}
    return OAS31Validator(schema)


def _bodiless_copy(request: Request) -> Request:
    # The app has read the body already; response checks need only method, path and query.
    headers = [(k, v) for k, v in request.headers.items() if k.lower() != "content-length"]
    return Request(EnvironBuilder(path=request.path, method=request.method,
                                  query_string=request.query_string.decode("latin-1"), headers=headers).get_environ())


def _decoded(response):
    """The response with its body decoded from its content coding (gzip, zstd), for the checks."""
    coding = response.headers.get("Content-Encoding")
    if coding is None:
        return response
    import gzip

    import zstandard

    data = response.get_data()
    body = gzip.decompress(data) if coding == "gzip" else zstandard.ZstdDecompressor().decompressobj().decompress(data)
    decoded = Response(body, status=response.status_code, headers=[
        (k, v) for k, v in response.headers.items() if k.lower() not in ("content-encoding", "content-length")])
    decoded.request = response.request
    return decoded


class ContractError(AssertionError):
    """A response the OpenAPI document does not allow."""


class ContractClient(FlaskClient):
    """A Flask test client that checks each response against openapi.yaml."""

    checker: OpenAPI
    problem_validator: OAS31Validator

    def open(self, *args, **kwargs):
        response = super().open(*args, **kwargs)
        self.check(response)
        return response

    def check(self, response) -> None:
        request = WerkzeugOpenAPIRequest(_bodiless_copy(response.request))
        response = _decoded(response)
        try:
            self.checker.validate_response(request, WerkzeugOpenAPIResponse(response))
        except (PathNotFound, OperationNotFound):
            if response.status_code not in (404, 405):
                raise ContractError(f"{request.method} {request.path} is not in openapi.yaml")
            if response.mimetype != "application/problem+json":
                raise ContractError(f"{response.status_code} without a problem document")
            self.problem_validator.validate(response.get_json())
        except Exception as error:
            raise ContractError(
                f"{request.method} {request.path} -> {response.status_code} breaks openapi.yaml: {error!r}\n"
                f"body: {response.get_data(as_text=True)[:2000]}"
            ) from error


@pytest.fixture
def app():
    return create_app({"TESTING": True})


@pytest.fixture
def make_app():
    """Build an app with extra config (e.g. low limits)."""
    return lambda **config: create_app({"TESTING": True, **config})


@pytest.fixture
def contract_client_for(openapi_checker, openapi_spec):
    validator = _problem_validator(openapi_spec)

    def build(flask_app):
        flask_app.test_client_class = ContractClient
        ContractClient.checker = openapi_checker
        ContractClient.problem_validator = validator
        return flask_app.test_client()

    return build


@pytest.fixture
def client(app, contract_client_for):
    return contract_client_for(app)


def record_errors(response) -> dict:
    """A 422 problem's errors as {(index, id, field): reason}."""
    assert response.status_code == 422, response.get_data(as_text=True)
    assert response.mimetype == "application/problem+json"
    return {(e["index"], e["id"], e["field"]): e["reason"] for e in response.get_json()["errors"]}


def free_loopback_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def wait_until_answers(url: str, process: subprocess.Popen, timeout_s: float = 30.0) -> None:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise RuntimeError(f"server exited with {process.returncode} before answering {url}")
        try:
            with urllib.request.urlopen(url, timeout=1) as reply:
                if reply.status == 200:
                    return
        except OSError:
            time.sleep(0.1)
    raise RuntimeError(f"server did not answer {url} within {timeout_s} s")


def stop(process: subprocess.Popen) -> None:
    from uvdose.service.job_cluster import stop_process

    stop_process(process, grace_s=15.0)


@contextlib.contextmanager
def running_gunicorn(tmp_path_factory, app: str = "uvdose.service.app:create_app()", port: int | None = None,
                     **settings: str):
    """A real gunicorn (2 workers, multiprocess metrics) on ``port`` (default: a free
    loopback port) serving ``app``, with ``settings`` added to its environment; yields its
    base URL, stops it afterwards."""
    port = port or free_loopback_port()
    metrics_dir = tmp_path_factory.mktemp("prometheus")
    env = {**os.environ, "PROMETHEUS_MULTIPROC_DIR": str(metrics_dir), **settings}
    if "REDIS_URL" not in settings:
        env.pop("REDIS_URL", None)
    log = (tmp_path_factory.mktemp("gunicorn") / "stderr.log").open("wb")
    process = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "--workers", "2", "--bind", f"127.0.0.1:{port}",
         "--timeout", "60", app],
        cwd=REPO, env=env, stdout=subprocess.DEVNULL, stderr=log,
    )
    base_url = f"http://127.0.0.1:{port}"
    try:
        wait_until_answers(base_url + "/livez", process)
        yield base_url
    finally:
        stop(process)
        log.close()


@pytest.fixture(scope="module")
def dask_scheduler():
    """The address of the embedded Dask cluster (a scheduler and two worker processes, what
    ``uvdose serve`` starts), for a module's jobs. Its workers' cache is off: with it on, a
    value depends on which record filled its state's entry first (within the cache's stated
    tolerance), and a job's rows could not be compared exactly with the endpoint's."""
    from uvdose.service import job_cluster

    with pytest.MonkeyPatch.context() as environment:
        environment.setenv("UVDOSE_CACHE", "off")
        process, address = job_cluster.start_embedded(2)
        yield address
        job_cluster.stop_embedded(process)


@pytest.fixture(scope="session")
def gunicorn_server(tmp_path_factory):
    """Base URL of a real gunicorn on its defaults (see :func:`running_gunicorn`)."""
    with running_gunicorn(tmp_path_factory) as base_url:
        yield base_url
