"""openapi.yaml is a valid OpenAPI 3.1 document, is served as written, and is enforced."""
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
    assert "<script" not in html and "http://" not in html.replace("http://127.0.0.1:8080", "")
    for path, item in openapi_spec["paths"].items():
        for method in item:
            assert f'id="op-{method}-{path}"' in html
    for name in openapi_spec["components"]["schemas"]:
        assert f'id="schema-{name}"' in html


def test_the_contract_client_rejects_an_undocumented_body(app, contract_client_for):
    # "sleeping" is not in the documented enum of /livez statuses.
    app.view_functions["health.livez"] = lambda: jsonify({"status": "sleeping"})
    with pytest.raises(ContractError):
        contract_client_for(app).get("/livez")
