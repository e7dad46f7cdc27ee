"""A client generated from openapi.yaml by a general-purpose generator works: it is
generated with no warning, installs, and every README example sent through it against a
live gunicorn parses into its typed models (tests/service/generated_client_replay.py).

The generator is openapi-python-client, run with the configuration the README gives
integrators ("Integrators", "Generated clients").
"""
from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
import urllib.parse
from pathlib import Path

import pytest
import yaml

from tests.service.conftest import SPEC_PATH, running_gunicorn
from tests.service.readme_examples import README, all_examples

pytestmark = [pytest.mark.gunicorn, pytest.mark.slow]

PACKAGE = "uvdose_generated"
REPLAY = Path(__file__).with_name("generated_client_replay.py")


def readme_generator_config() -> dict:
    """The generator configuration shown in the README's integrators section."""
    section = README.read_text(encoding="utf-8").split("### Generated clients", 1)[1].split("\n### ", 1)[0]
    return yaml.safe_load(re.search(r"```yaml\n(.*?)```", section, flags=re.S).group(1))


def _generator() -> list[str]:
    found = shutil.which("openapi-python-client") or shutil.which(
        "openapi-python-client", path=str(Path(sys.executable).parent))
    if found is None:
        pytest.fail("openapi-python-client is not installed (it is in the test extra)")
    return [found]


@pytest.fixture(scope="module")
def generated(tmp_path_factory) -> dict:
    """Generate the client, install it into a fresh venv; its python and the generator's output."""
    root = tmp_path_factory.mktemp("generated-client")
    config = root / "generator.yaml"
    config.write_text(yaml.safe_dump({**readme_generator_config(), "package_name_override": PACKAGE,
                                      "project_name_override": "uvdose-generated"}), encoding="utf-8")
    out = root / "uvdose-generated"
    run = subprocess.run(_generator() + ["generate", "--path", str(SPEC_PATH), "--config", str(config),
                                         "--meta", "setup", "--output-path", str(out), "--fail-on-warning"],
                         capture_output=True, text=True, timeout=300)
    venv = root / "venv"
    subprocess.run([sys.executable, "-m", "venv", "--system-site-packages", str(venv)], check=True, timeout=300)
    python = venv / "bin" / "python"
    if run.returncode == 0:
        subprocess.run([str(python), "-m", "pip", "install", "-q", "--no-deps", str(out)],
                       check=True, capture_output=True, timeout=300)
    return {"run": run, "python": python, "out": out}


def test_the_generator_reads_the_whole_contract_with_no_warning(generated):
    run = generated["run"]
    output = run.stdout + run.stderr
    assert run.returncode == 0, output
    assert "warning" not in output.lower() and "error" not in output.lower(), output
    spec = yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))
    modules = {p.stem for p in (generated["out"] / PACKAGE / "api").rglob("*.py") if p.stem != "__init__"}
    assert modules == {_module(operation).split(".")[1] for operation in _operations(spec).values()}
    models = {p.stem for p in (generated["out"] / PACKAGE / "models").glob("*.py")}
    for name, schema in spec["components"]["schemas"].items():
        if schema.get("type") == "object" or "allOf" in schema:
            assert _snake(name) in models, f"{name} has no generated model"


def test_the_generated_client_imports_outside_the_source_tree(generated):
    assert generated["run"].returncode == 0
    where = subprocess.run([str(generated["python"]), "-c", f"import {PACKAGE}; print({PACKAGE}.__file__)"],
                           capture_output=True, text=True, cwd=generated["out"].parent.parent, check=True)
    assert str(generated["python"].parent.parent) in where.stdout


def _snake(name: str) -> str:
    return re.sub(r"(?<!^)(?=[A-Z])", "_", name).lower()


def _operations(spec: dict) -> dict[tuple[str, str], dict]:
    return {(method.upper(), path): operation for path, item in spec["paths"].items()
            for method, operation in item.items() if isinstance(operation, dict) and "operationId" in operation}


def _module(operation: dict) -> str:
    return f"{operation['tags'][0]}.{_snake(operation['operationId'])}"


def _named(spec: dict, schema: dict) -> list[str]:
    """The generated model classes a body schema may become (the branches of a union)."""
    name = schema["$ref"].rsplit("/", 1)[-1]
    target = spec["components"]["schemas"][name]
    return [branch["$ref"].rsplit("/", 1)[-1] for branch in target["oneOf"]] if "oneOf" in target else [name]


def _plan(spec: dict, base_url: str) -> dict:
    operations = _operations(spec)
    responses = spec["components"]["responses"]
    examples = []
    for example in all_examples():
        path, _, query = example.path.partition("?")
        operation = operations[(example.method, path)]
        csv = example.headers.get("Content-Type") == "text/csv"
        body_models = []
        if example.body is not None and not csv:
            body_models = _named(spec, operation["requestBody"]["content"]["application/json"]["schema"])
        status = example.expected_status
        answer = operation["responses"][str(status)]
        answer = responses[answer["$ref"].rsplit("/", 1)[-1]] if "$ref" in answer else answer
        media = next(iter(answer["content"]))
        # The generated client reads one media type per status, the first it supports (JSON
        # here): an example that asks for CSV back is sent without that Accept header, so the
        # CSV body it sends is answered in JSON rows.
        examples.append({"path": example.path, "module": _module(operation), "query": query, "csv": csv,
                         "body": example.body.decode() if example.body is not None else None,
                         "body_models": body_models, "answer_models": _named(spec, answer["content"][media]["schema"]),
                         "status": status, "asked_for_csv": example.headers.get("Accept") == "text/csv"})
    maps = [name for name, schema in spec["components"]["schemas"].items()
            if isinstance(schema.get("additionalProperties"), dict) and not schema.get("properties")]
    return {"package": PACKAGE, "base_url": base_url, "maps": maps, "examples": examples}


def test_every_readme_example_parses_into_the_generated_models(generated, tmp_path_factory):
    assert generated["run"].returncode == 0
    spec = yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))
    with running_gunicorn(tmp_path_factory) as base_url:
        plan = _plan(spec, base_url)
        plan_file = tmp_path_factory.mktemp("replay") / "plan.json"
        plan_file.write_text(json.dumps(plan), encoding="utf-8")
        replayed = subprocess.run([str(generated["python"]), str(REPLAY), str(plan_file)], capture_output=True,
                                  text=True, timeout=600, cwd=plan_file.parent)
    assert replayed.returncode == 0, replayed.stderr
    outcomes = json.loads(replayed.stdout)
    assert len(outcomes) == len(plan["examples"]) >= 8
    for planned, outcome in zip(plan["examples"], outcomes):
        where = f"{planned['path']} ({outcome['parsed_as']})"
        assert outcome["status"] == planned["status"], where
        assert outcome["parsed"], f"{where}: not parsed into {planned['answer_models']}"
        assert outcome["leftovers"] == [], f"{where}: members the schema does not declare: {outcome['leftovers']}"
        assert outcome["round_trip"], f"{where}: the parsed model does not give back the JSON sent"
        if planned["status"] == 422:
            assert outcome["errors"] and set(outcome["errors"]) == {"FieldError"}, where
    assert {urllib.parse.urlsplit(p["path"]).path for p in plan["examples"]} >= {
        "/v1/irradiance", "/v1/catalogue", "/readyz", "/v1/doses/fields", "/v1/doses/routes"}
