"""Settings from the environment: defaults, parsing, and a clear failure naming the variable."""
import pytest

from uvdose.service.app import create_app
from uvdose.service.config import ConfigurationError, settings_from_environment


def test_embedded_defaults_need_no_environment():
    settings = settings_from_environment({})
    assert settings["UVDOSE_MAX_RECORDS"] == 10_000
    assert settings["MAX_CONTENT_LENGTH"] == 16 * 1024 * 1024
    assert settings["REDIS_URL"] is None
    assert settings["UVDOSE_HANDLE_ERRORS_AS_PROBLEMS"] is True


def test_values_are_parsed():
    settings = settings_from_environment({"UVDOSE_MAX_RECORDS": "250", "UVDOSE_MAX_BODY_BYTES": "1048576",
                                          "UVDOSE_HANDLE_ERRORS_AS_PROBLEMS": "off", "REDIS_URL": ""})
    assert settings["UVDOSE_MAX_RECORDS"] == 250
    assert settings["MAX_CONTENT_LENGTH"] == 1_048_576
    assert settings["UVDOSE_HANDLE_ERRORS_AS_PROBLEMS"] is False
    assert settings["REDIS_URL"] is None


@pytest.mark.parametrize("name, value", [
    ("UVDOSE_MAX_RECORDS", "lots"), ("UVDOSE_MAX_RECORDS", "0"), ("UVDOSE_MAX_BODY_BYTES", "-5"),
    ("UVDOSE_HANDLE_ERRORS_AS_PROBLEMS", "perhaps"),
])
def test_an_unusable_value_stops_the_app_naming_the_variable(monkeypatch, name, value):
    with pytest.raises(ConfigurationError, match=name):
        settings_from_environment({name: value})
    monkeypatch.setenv(name, value)
    with pytest.raises(ConfigurationError, match=name):
        create_app()


def test_the_environment_reaches_the_running_app(monkeypatch, contract_client_for):
    monkeypatch.setenv("UVDOSE_MAX_RECORDS", "2")
    client = contract_client_for(create_app({"TESTING": True}))
    records = [{"time": "2026-06-21T12:00:00Z", "lat": 44.0, "lon": 4.9}] * 3
    assert client.post("/v1/irradiance", json={"records": records}).status_code == 413


def test_the_listed_errors_can_be_capped_but_all_are_counted(make_app, contract_client_for):
    client = contract_client_for(make_app(UVDOSE_MAX_ERRORS_LISTED=5))
    records = [{"time": "2026-06-21T12:00:00Z", "lat": 91.0, "lon": 4.9}] * 12
    body = client.post("/v1/irradiance", json={"records": records}).get_json()
    assert body["error_count"] == 12 and len(body["errors"]) == 5
    assert [error["index"] for error in body["errors"]] == [0, 1, 2, 3, 4]
