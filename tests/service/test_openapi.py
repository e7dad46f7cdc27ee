"""openapi.yaml is a valid OpenAPI 3.1 document, is served as written, and is enforced."""
import re

import pytest
import yaml
from flask import jsonify
from openapi_spec_validator import validate

from tests.service.conftest import SPEC_PATH, ContractError


def test_the_document_is_valid_openapi_3_1(openapi_spec):
    assert openapi_spec["openapi"].startswith("3.1")
    validate(openapi_spec)  # raises on any violation of the OpenAPI 3.1 meta-schema


def test_openapi_yaml_is_served_as_written(client):
    response = client.get("/openapi.yaml")
    assert response.status_code == 200
    assert response.get_data(as_text=True) == SPEC_PATH.read_text(encoding="utf-8")
    assert yaml.safe_load(response.get_data(as_text=True))["info"]["title"] == "uvdose"


def test_docs_page_lists_every_operation_and_schema(client, openapi_spec):
    response = client.get("/docs")
    assert response.status_code == 200 and response.mimetype == "text/html"
    html = response.get_data(as_text=True)
    # Nothing inline (a strict Content-Security-Policy holds) and nothing from elsewhere.
    assert re.findall(r"<script[^>]*>", html) == ['<script src="/docs/page.js" defer>']
    assert "<style" not in html and " style=" not in html and " on" + "click=" not in html
    assert "http://" not in html.replace("http://127.0.0.1:8080", "") and "https://" not in html
    for path, item in openapi_spec["paths"].items():
        for method, operation in item.items():
            assert f'id="op-{operation["operationId"]}"' in html, (method, path)
    for name in openapi_spec["components"]["schemas"]:
        assert f'id="schema-{name}"' in html


def test_the_contract_client_rejects_an_undocumented_body(app, contract_client_for):
    # "sleeping" is not in the documented enum of /livez statuses.
    app.view_functions["health.livez"] = lambda: jsonify({"status": "sleeping"})
    with pytest.raises(ContractError):
        contract_client_for(app).get("/livez")


def test_openapi_lists_the_action_spectra_the_models_define(openapi_spec):
    from uvdose.models.action_spectra import ACTION_SPECTRA
    from uvdose.models.engine import DEFAULT_SPECTRA

    from marshmallow import validate

    from uvdose.service.irradiance_batch import IrradianceOptionsSchema

    schemas = openapi_spec["components"]["schemas"]
    assert set(schemas["SpectrumName"]["enum"]) == set(ACTION_SPECTRA)
    assert schemas["SpectraOption"]["default"] == list(DEFAULT_SPECTRA)
    (length,) = [v for v in IrradianceOptionsSchema().fields["spectra"].validators if isinstance(v, validate.Length)]
    assert (schemas["SpectraOption"]["minItems"], schemas["SpectraOption"]["maxItems"]) == (length.min, length.max)


# --- property-based: generated requests never make the service fail -------------------------

import schemathesis  # noqa: E402
from hypothesis import HealthCheck, settings  # noqa: E402
from schemathesis.checks import not_a_server_error  # noqa: E402
from schemathesis.config import SchemathesisConfig  # noqa: E402
from schemathesis.specs.openapi.checks import (  # noqa: E402
    content_type_conformance,
    response_schema_conformance,
    status_code_conformance,
)


@pytest.fixture
def generated_schema():
    from uvdose.service.app import create_app

    # A small record limit keeps each generated batch cheap to compute.
    app = create_app({"TESTING": True, "UVDOSE_MAX_RECORDS": 20, "UVDOSE_CACHE": "off"})
    # Bounded for the 2-core CI box: examples and fuzzing, no exhaustive coverage phase.
    # In process, nothing decodes a gzip or zstd answer before the checks read it (over real
    # HTTP below, the client does): ask for identity answers.
    config = SchemathesisConfig.from_dict({"phases": {"coverage": {"enabled": False}}, "seed": 20261202,
                                           "headers": {"Accept-Encoding": "identity"}})
    return schemathesis.openapi.from_wsgi("/openapi.yaml", app, config=config)


generated = schemathesis.pytest.from_fixture("generated_schema")

CHECKS = [not_a_server_error, status_code_conformance, content_type_conformance,
          response_schema_conformance]


@generated.parametrize()
@settings(max_examples=20, deadline=None, suppress_health_check=list(HealthCheck))
def test_generated_requests_get_documented_answers_and_never_a_5xx(case):
    case.call_and_validate(checks=CHECKS)


@pytest.fixture(scope="module")
def live_schema(tmp_path_factory):
    """The same contract, fetched from and exercised against a real gunicorn on loopback."""
    from tests.service.conftest import running_gunicorn

    with running_gunicorn(tmp_path_factory, UVDOSE_MAX_RECORDS="20", UVDOSE_CACHE="off") as base_url:
        config = SchemathesisConfig.from_dict({"base-url": base_url, "seed": 20261202,
                                               "phases": {"coverage": {"enabled": False}}})
        yield schemathesis.openapi.from_url(base_url + "/openapi.yaml", config=config)


live = schemathesis.pytest.from_fixture("live_schema")


@live.parametrize()
@settings(max_examples=8, deadline=None, suppress_health_check=list(HealthCheck))
def test_generated_requests_to_the_live_server_never_get_a_5xx(case):
    # Only the 5xx check here: in front of the app, gunicorn answers protocol-level limits
    # itself (414 for a request line over its 4094 bytes, in HTML), which the app's
    # contract does not describe. Full conformance is checked in-process above.
    case.call_and_validate(checks=[not_a_server_error])


# --- every check schemathesis has, 200 examples per operation -------------------------------

# Statuses the contract documents for requests the schema cannot tell from good ones: a
# 422 for the rules JSON Schema cannot state (times in order, a window's end after its
# start, a route's span, a daily entry's field index below the number of fields, one of
# two exclusive fields, a query option beside a JSON body, a CSV line that is not a
# record), a 413 for counts bounded by the deployment's settings (records, samples) rather
# than by the document. A 400 for a schema-valid request is still a failure.
_DOCUMENTED_REFUSALS = {
    "checks": {
        "positive_data_acceptance": {"expected-statuses": ["2xx", "401", "403", "404", "409", "413", "422", "429"]},
        "negative_data_rejection": {"expected-statuses": ["400", "401", "403", "404", "405", "406", "409", "413",
                                                          "415", "422", "428", "429"]},
    },
}


@pytest.fixture
def all_checks_schema(dask_scheduler, tmp_path):
    # The jobs operations run too: each accepted submission a real job on a real local Dask
    # cluster, its body under the ...ForJobs schemas (any number of records within the
    # body's size); the status and results paths answer an unknown job with a documented 404.
    from uvdose.service import jobs
    from uvdose.service.app import create_app

    app = create_app({"TESTING": True, "UVDOSE_MAX_RECORDS": 3, "UVDOSE_CACHE": "off",
                      "UVDOSE_DASK_SCHEDULER": dask_scheduler, "UVDOSE_JOBS_STORE": str(tmp_path / "store"),
                      "REDIS_URL": None, "UVDOSE_JOBS_METADATA_DIR": str(tmp_path / "metadata"),
                      "UVDOSE_REQUEST_LOG": False})
    config = SchemathesisConfig.from_dict({
        "phases": {"coverage": {"enabled": False}}, "seed": 20261202,
        "headers": {"Accept-Encoding": "identity"}, **_DOCUMENTED_REFUSALS})
    yield schemathesis.openapi.from_wsgi("/openapi.yaml", app, config=config)
    app.extensions[jobs.EXTENSION].close()


all_checks = schemathesis.pytest.from_fixture("all_checks_schema")


@pytest.mark.slow
@all_checks.parametrize()
@settings(max_examples=200, deadline=None, suppress_health_check=list(HealthCheck))
def test_generated_requests_pass_every_schemathesis_check(case):
    # Every built-in check (as `schemathesis run --checks all`): valid data accepted,
    # invalid data refused, statuses, media types, headers and bodies as documented.
    case.call_and_validate()
