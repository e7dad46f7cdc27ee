"""Headers on every answer, the CORS policy and the request deadline
(service/security_headers.py, service/cors.py, service/request_deadline.py)."""
from __future__ import annotations

import logging

import pytest
from flask import g

from uvdose.service import request_deadline
from uvdose.service.security_headers import DATA_POLICY, DOCS_POLICY

# The policy the docs page must run under (its browser test drives it with this one).
STRICT_DOCS_POLICY = ("default-src 'self'; img-src 'self'; style-src 'self'; script-src 'self'; "
                      "form-action 'self'; base-uri 'none'; frame-ancestors 'none'; object-src 'none'")

RECORD = {"id": "roof", "time": "2026-06-21T11:00:00Z", "lat": 45.0, "lon": 7.0}


@pytest.mark.parametrize("method, path, body", [
    ("get", "/livez", None), ("get", "/docs", None), ("get", "/docs/page.js", None),
    ("get", "/openapi.yaml", None), ("get", "/v1/catalogue", None), ("get", "/nowhere", None),
    ("post", "/v1/irradiance", {"records": [RECORD]}), ("post", "/v1/irradiance", {"records": [{}]}),
    ("post", "/v1/irradiance", "not json"), ("delete", "/v1/irradiance", None),
])
def test_every_answer_carries_the_security_headers(app, method, path, body):
    client = app.test_client()
    kwargs = {"json": body} if isinstance(body, dict) else {"data": body, "content_type": "application/json"}
    response = getattr(client, method)(path, **(kwargs if body is not None else {}))
    assert response.headers["X-Content-Type-Options"] == "nosniff"
    assert response.headers["X-Frame-Options"] == "DENY"
    assert response.headers["Referrer-Policy"] == "no-referrer"
    policy = response.headers["Content-Security-Policy"]
    assert "frame-ancestors 'none'" in policy
    assert policy == (DOCS_POLICY if path.startswith("/docs") else DATA_POLICY)


def test_the_docs_page_policy_is_the_strict_one(client):
    assert client.get("/docs").headers["Content-Security-Policy"] == STRICT_DOCS_POLICY


PREFLIGHT = {"Origin": "https://orchard.example", "Access-Control-Request-Method": "POST",
             "Access-Control-Request-Headers": "content-type, x-api-key"}


def test_without_configured_origins_no_cors_header_and_no_401(make_app):
    client = make_app(UVDOSE_API_KEYS="orchard-key").test_client()
    preflight = client.options("/v1/irradiance", headers=PREFLIGHT)
    assert preflight.status_code == 200  # Flask's plain OPTIONS answer, not a 401
    assert "POST" in preflight.headers["Allow"]
    assert not [name for name in preflight.headers.keys() if name.startswith("Access-Control-")]
    answer = client.post("/v1/irradiance", json={"records": [RECORD]},
                         headers={"Origin": "https://orchard.example", "X-API-Key": "orchard-key"})
    assert answer.status_code == 200 and "Access-Control-Allow-Origin" not in answer.headers


def test_a_configured_origin_gets_its_preflight_and_answers_others_do_not(make_app):
    client = make_app(UVDOSE_API_KEYS="orchard-key", UVDOSE_CORS_ORIGINS="https://orchard.example").test_client()
    preflight = client.options("/v1/irradiance", headers=PREFLIGHT)
    assert preflight.status_code == 204
    assert preflight.headers["Access-Control-Allow-Origin"] == "https://orchard.example"
    assert preflight.headers["Access-Control-Allow-Methods"] == "OPTIONS, POST"
    allowed = {h.strip().lower() for h in preflight.headers["Access-Control-Allow-Headers"].split(",")}
    assert {"content-type", "x-api-key", "authorization"} <= allowed
    assert "Access-Control-Allow-Credentials" not in preflight.headers
    answer = client.post("/v1/irradiance", json={"records": [RECORD]},
                         headers={"Origin": "https://orchard.example", "X-API-Key": "orchard-key"})
    assert answer.status_code == 200
    assert answer.headers["Access-Control-Allow-Origin"] == "https://orchard.example"
    assert "X-Request-ID" in answer.headers["Access-Control-Expose-Headers"]
    assert "Origin" in answer.headers["Vary"]
    other = client.options("/v1/irradiance", headers={**PREFLIGHT, "Origin": "https://elsewhere.example"})
    assert other.status_code == 200 and "Access-Control-Allow-Origin" not in other.headers
    refused = client.post("/v1/irradiance", json={"records": [RECORD]}, headers={"Origin": "https://orchard.example"})
    assert refused.status_code == 401  # CORS is no way around the key
    assert refused.headers["Access-Control-Allow-Origin"] == "https://orchard.example"  # so the page can read why


def _season(n_fields: int, days: int) -> dict:
    """Invented plots on a transect (a demo scenario of our own)."""
    return {"records": [{"id": f"plot-{i}", "lat": 40.0 + i * 0.5, "lon": 5.0} for i in range(n_fields)],
            "first_day": "2026-05-01", "last_day": f"2026-05-{days:02d}", "step_s": 600}


def test_a_request_past_its_deadline_is_a_503_with_retry_after_and_logged(make_app, contract_client_for, caplog):
    client = contract_client_for(make_app(UVDOSE_REQUEST_DEADLINE_S=1e-6))
    with caplog.at_level(logging.WARNING, logger="uvdose.service.request_deadline"):
        response = client.post("/v1/doses/fields", json=_season(1, 2))
    assert response.status_code == 503, response.get_data(as_text=True)
    problem = response.get_json()
    assert problem["type"] == "urn:uvdose:problem:deadline-exceeded" and problem["deadline_s"] == 1e-6
    assert int(response.headers["Retry-After"]) > 0
    assert any("request deadline" in record.getMessage() for record in caplog.records)


def test_the_deadline_is_checked_between_parts_of_the_work(client, monkeypatch):
    calls = []
    real_check = request_deadline.check

    def deadline_passes_on_the_third_part():
        calls.append(1)
        if len(calls) == 3:
            g.uvdose_deadline = 0.0
        real_check()

    monkeypatch.setattr(request_deadline, "check", deadline_passes_on_the_third_part)
    response = client.post("/v1/doses/fields", json=_season(24, 31))  # 24 fields x 31 days: several chunks
    assert response.status_code == 503
    assert len(calls) == 3  # it went on through two parts and stopped at the third


def test_within_the_deadline_nothing_changes(client):
    assert client.post("/v1/doses/fields", json=_season(1, 2)).status_code == 200


def test_stopping_the_server_brings_deadlines_forward(client, monkeypatch):
    monkeypatch.setattr(request_deadline, "_stop_at", None)
    request_deadline.stop_by(0.0)  # long past
    response = client.post("/v1/irradiance", json={"records": [RECORD]})
    assert response.status_code == 503 and "stopping" in response.get_json()["detail"]
