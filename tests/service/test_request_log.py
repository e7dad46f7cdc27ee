"""Request id and the one-JSON-line-per-request log (service/request_log.py)."""
import json
import logging
import re

import pytest
from flask import g, jsonify, request

from uvdose.service.app import create_app
from uvdose.service.config import ConfigurationError
from uvdose.service.request_log import (
    REQUEST_ID_HEADER,
    REQUEST_ID_MAX_LENGTH,
    ServerLogRedaction,
    json_handler,
)

# Values of an invented delivery-depot scenario; they must never reach a log line.
SECRET_LAT, SECRET_LON, SECRET_ID = "47.123456", "8.654321", "van-0042-kessler"


def _app(**config):
    app = create_app(config)

    @app.post("/v1/test-batch")
    def test_batch():
        records = request.get_json()["records"]
        g.uvdose_record_count = len(records)
        return jsonify({"n": len(records)})

    @app.get("/v1/test-failure")
    def test_failure():
        raise RuntimeError("deliberate failure for the log test")

    return app


def _lines(text):
    return [json.loads(line) for line in text.splitlines() if line.strip()]


def _request_lines(capsys):
    out = capsys.readouterr()
    return _lines(out.out), out.err


@pytest.fixture
def client():
    return _app().test_client()


def test_one_json_line_per_request_with_a_generated_id(client, capsys):
    capsys.readouterr()
    response = client.post("/v1/test-batch", json={"records": [{"id": "a"}, {"id": "b"}, {"id": "c"}]})
    assert response.status_code == 200
    lines, _ = _request_lines(capsys)
    assert len(lines) == 1
    line = lines[0]
    request_id = response.headers[REQUEST_ID_HEADER]
    assert re.fullmatch(r"[0-9a-f]{32}", request_id)
    assert line["request_id"] == request_id
    assert line["request_id_from"] == "generated"
    assert line["event"] == "request" and line["level"] == "info"
    assert line["method"] == "POST" and line["route"] == "/v1/test-batch"
    assert line["status"] == 200 and line["records"] == 3
    assert line["duration_ms"] >= 0
    assert line["response_bytes"] == len(response.data)
    assert line["request_bytes"] == len(json.dumps({"records": [{"id": "a"}, {"id": "b"}, {"id": "c"}]}))
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{3}Z", line["ts"])


def test_each_request_gets_its_own_id(client, capsys):
    ids = {client.get("/v1/nowhere").headers[REQUEST_ID_HEADER] for _ in range(5)}
    assert len(ids) == 5


@pytest.mark.parametrize("offered", ["req-7", "a" * REQUEST_ID_MAX_LENGTH, "0f:1e.2d_3c-4b"])
def test_a_well_formed_client_id_is_kept_and_echoed(client, capsys, offered):
    capsys.readouterr()
    response = client.get("/v1/nowhere", headers={REQUEST_ID_HEADER: offered})
    assert response.headers[REQUEST_ID_HEADER] == offered
    (line,), _ = _request_lines(capsys)
    assert line["request_id"] == offered and line["request_id_from"] == "client"


@pytest.mark.parametrize(
    "offered",
    ["", "a" * (REQUEST_ID_MAX_LENGTH + 1), "has space", "semi;colon", "ünïcode", "x\u2028y"],
)
def test_a_malformed_client_id_is_replaced_and_never_logged(client, capsys, offered):
    capsys.readouterr()
    response = client.get("/v1/nowhere", headers={REQUEST_ID_HEADER: offered})
    echoed = response.headers[REQUEST_ID_HEADER]
    assert echoed != offered and re.fullmatch(r"[0-9a-f]{32}", echoed)
    out = capsys.readouterr()
    (line,) = _lines(out.out)
    assert line["request_id"] == echoed and line["request_id_from"] == "replaced"
    if offered:
        assert offered not in out.out + out.err


def test_unmatched_paths_and_query_strings_are_not_logged(client, capsys):
    capsys.readouterr()
    response = client.get(f"/v1/{SECRET_ID}?lat={SECRET_LAT}&lon={SECRET_LON}")
    assert response.status_code == 404
    out = capsys.readouterr()
    (line,) = _lines(out.out)
    assert line["route"] is None and line["status"] == 404 and line["level"] == "warning"
    for secret in (SECRET_ID, SECRET_LAT, SECRET_LON):
        assert secret not in out.out + out.err


def test_record_contents_never_reach_the_log(client, capsys):
    capsys.readouterr()
    body = {"records": [{"id": SECRET_ID, "lat": float(SECRET_LAT), "lon": float(SECRET_LON)}]}
    response = client.post(
        f"/v1/test-batch?lat={SECRET_LAT}",
        json=body,
        headers={"User-Agent": f"depot-app {SECRET_ID}", "Authorization": f"Bearer {SECRET_ID}"},
    )
    assert response.status_code == 200
    out = capsys.readouterr()
    assert len(_lines(out.out)) == 1
    for secret in (SECRET_ID, SECRET_LAT, SECRET_LON):
        assert secret not in out.out + out.err


@pytest.fixture
def json_root_log():
    """A JSON handler on the root logger on stderr, as deploy/gunicorn.conf.py installs."""
    root = logging.getLogger()
    handler = json_handler("stderr")
    root.addHandler(handler)
    yield
    root.removeHandler(handler)


def test_an_unhandled_error_is_logged_as_json_with_its_request_id(capsys, json_root_log):
    client = _app().test_client()
    capsys.readouterr()
    response = client.get("/v1/test-failure", headers={REQUEST_ID_HEADER: "fail-1"})
    assert response.status_code == 500
    assert response.headers[REQUEST_ID_HEADER] == "fail-1"
    out = capsys.readouterr()
    (line,) = _lines(out.out)
    assert line["status"] == 500 and line["level"] == "error" and line["route"] == "/v1/test-failure"
    errors = _lines(out.err)
    assert errors, "the exception should be logged on stderr"
    assert any(e.get("request_id") == "fail-1" and "deliberate failure" in e.get("exception", "")
               for e in errors)


def test_request_log_can_be_switched_off_but_the_id_is_still_echoed(capsys):
    client = _app(UVDOSE_REQUEST_LOG="off").test_client()
    capsys.readouterr()
    response = client.get("/v1/nowhere", headers={REQUEST_ID_HEADER: "quiet-1"})
    assert response.headers[REQUEST_ID_HEADER] == "quiet-1"
    assert capsys.readouterr().out == ""


def test_creating_many_apps_does_not_duplicate_lines(capsys):
    for _ in range(3):
        client = _app().test_client()
    capsys.readouterr()
    client.get("/v1/nowhere")
    assert len(_lines(capsys.readouterr().out)) == 1


@pytest.mark.parametrize("name, value", [("UVDOSE_REQUEST_LOG", "sometimes"), ("UVDOSE_LOG_LEVEL", "loud")])
def test_unusable_log_settings_stop_start_up_naming_the_variable(name, value):
    with pytest.raises(ConfigurationError, match=name):
        create_app({name: value})


def test_log_level_applies_to_request_lines(capsys):
    client = _app(UVDOSE_LOG_LEVEL="warning").test_client()
    capsys.readouterr()
    client.get("/v1/nowhere")  # 404: a warning line
    client.post("/v1/test-batch", json={"records": []})  # 200: an info line, filtered
    lines = _lines(capsys.readouterr().out)
    assert [line["status"] for line in lines] == [404]


@pytest.mark.parametrize(
    "message, args, expected",
    [
        # Message shapes of gunicorn 27 (gunicorn/workers/base.py, handle_error).
        ("Invalid request from ip=%s: %s", ("203.0.113.7", "Invalid HTTP Header: 'X Y'"),
         "Invalid request from ip=<redacted>: Invalid HTTP Header: 'X Y'"),
        ("Invalid request from ip=%s: %s", ("2001:db8::17", "Invalid HTTP method"),
         "Invalid request from ip=<redacted>: Invalid HTTP method"),
        ("Error handling request %s %s", ("POST", f"/v1/irradiance?lat={SECRET_LAT}&lon={SECRET_LON}"),
         "Error handling request POST /v1/irradiance?<redacted>"),
        ("Booting worker with pid: %s", (4242,), "Booting worker with pid: 4242"),
    ],
)
def test_server_messages_lose_client_addresses_and_query_strings(message, args, expected):
    record = logging.LogRecord("gunicorn.error", logging.WARNING, __file__, 1, message, args, None)
    assert ServerLogRedaction().filter(record) is True
    assert record.getMessage() == expected
