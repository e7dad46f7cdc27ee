"""Settings from the environment: defaults, parsing, and a clear failure naming the variable."""
import re
from pathlib import Path

import pytest

from uvdose.service.app import create_app
from uvdose.service.config import (
    SERVER_SETTINGS,
    SETTINGS,
    ConfigurationError,
    parse_value,
    server_settings_from_environment,
    settings_from_environment,
)

REPO = Path(__file__).resolve().parents[2]


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


def test_app_config_is_parsed_like_the_environment():
    app = create_app({"TESTING": True, "UVDOSE_MAX_RECORDS": "3", "UVDOSE_CACHE_TTL_S": 60,
                      "UVDOSE_REQUEST_LOG": "off", "UVDOSE_LOG_LEVEL": "warning"})
    assert app.config["UVDOSE_MAX_RECORDS"] == 3
    assert app.config["UVDOSE_CACHE_TTL_S"] == 60.0 and app.config["UVDOSE_REQUEST_LOG"] is False
    assert app.config["UVDOSE_LOG_LEVEL"] == "WARNING" and app.config["TESTING"] is True
    with pytest.raises(ConfigurationError, match="UVDOSE_MAX_RECORDS"):
        create_app({"UVDOSE_MAX_RECORDS": 0})


def test_an_empty_variable_counts_as_unset():
    empty = settings_from_environment({setting.env: "" for setting in SETTINGS})
    assert empty == settings_from_environment({})
    assert server_settings_from_environment({setting.env: "" for setting in SERVER_SETTINGS}) == \
        server_settings_from_environment({})


def test_server_settings_defaults_and_refusals():
    settings = server_settings_from_environment({})
    assert settings["UVDOSE_BIND"] == "127.0.0.1:8080" and settings["UVDOSE_WORKERS"] == 2
    assert settings["UVDOSE_PRELOAD"] is True and settings["UVDOSE_LOG_LEVEL"] == "INFO"
    with pytest.raises(ConfigurationError, match="UVDOSE_KEEPALIVE"):
        server_settings_from_environment({"UVDOSE_KEEPALIVE": "-1"})


def test_every_setting_says_what_it_takes():
    for setting in SETTINGS + SERVER_SETTINGS:
        assert setting.help and setting.kind, setting.env
        assert parse_value(setting, None) == setting.default


def _readme_configuration_names() -> set[str]:
    text = (REPO / "README.md").read_text(encoding="utf-8")
    section = text.split("\n## Configuration\n", 1)[1].split("\n## ", 1)[0]
    names = set()
    for line in section.splitlines():
        if line.startswith("| `"):
            names |= set(re.findall(r"`([A-Z][A-Z0-9_]+)`", line.split("|")[1]))
    return names


def test_the_readme_lists_exactly_the_settings_the_service_reads():
    assert _readme_configuration_names() == {setting.env for setting in SETTINGS + SERVER_SETTINGS}


def test_only_the_configuration_module_reads_the_environment():
    # metrics.py follows prometheus_client, which reads PROMETHEUS_MULTIPROC_DIR itself;
    # server.py (uvdose serve and the gunicorn config) sets that variable for it before the
    # app is imported.
    readers = {path.relative_to(REPO / "service").as_posix()
               for path in (REPO / "service").rglob("*.py")
               if re.search(r"os\.environ|getenv", path.read_text(encoding="utf-8"))}
    assert readers <= {"config.py", "metrics.py", "server.py"}
