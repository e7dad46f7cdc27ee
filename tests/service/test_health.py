"""Liveness, readiness and the problem documents for unknown URLs and methods."""
import pytest

from uvdose.service import engine_gateway


def test_livez_answers_alive(client):
    response = client.get("/livez")
    assert response.status_code == 200
    assert response.get_json() == {"status": "alive"}


def test_readyz_reports_engine_cache_and_contract(client):
    response = client.get("/readyz")
    body = response.get_json()
    assert set(body["checks"]) == {"engine", "cache", "contract"}
    assert response.status_code == (200 if body["checks"]["engine"]["ok"] else 503)
    assert isinstance(body["checks"]["cache"]["backend"], str)
    assert body["checks"]["contract"] == {"ok": True, "version": "0.1.0"}


@pytest.mark.parametrize("text", [None, "not: [an, openapi, document]\n"])
def test_readyz_is_503_when_the_contract_cannot_be_served(make_app, contract_client_for, tmp_path, text):
    path = tmp_path / "openapi.yaml"
    if text is not None:
        path.write_text(text, encoding="utf-8")
    client = contract_client_for(make_app(UVDOSE_OPENAPI_PATH=str(path)))
    response = client.get("/readyz")
    assert response.status_code == 503 and response.get_json()["status"] == "unready"
    assert response.get_json()["checks"]["contract"]["ok"] is False
    assert client.get("/openapi.yaml").status_code == 500
    assert client.get("/docs").status_code == 500


def test_readyz_is_503_when_the_engine_cannot_load(client, monkeypatch):
    from uvdose.models import irradiance_table

    def broken():
        raise ValueError("irradiance table is truncated")

    monkeypatch.setattr(irradiance_table, "load_table", broken)
    response = client.get("/readyz")
    assert response.status_code == 503
    body = response.get_json()
    assert body["status"] == "unready"
    assert "ValueError: irradiance table is truncated" in body["checks"]["engine"]["error"]


class _SilentCache:
    backend = "redis"

    def status(self):
        raise ConnectionError("connection refused")


def test_readyz_stays_ready_but_degraded_when_the_cache_does_not_answer(app, contract_client_for, monkeypatch):
    monkeypatch.setattr(engine_gateway, "engine_check", lambda: {"ok": True})
    app.extensions["uvdose_cache"] = _SilentCache()
    response = contract_client_for(app).get("/readyz")
    assert response.status_code == 200
    body = response.get_json()
    assert body["status"] == "degraded"
    assert body["checks"]["cache"] == {"backend": "redis", "answers": False,
                                       "error": "ConnectionError: connection refused"}


@pytest.mark.parametrize("method, path, status", [
    ("get", "/no/such/thing", 404),
    ("post", "/livez", 405),
    ("delete", "/readyz", 405),
])
def test_unknown_urls_and_methods_are_problem_documents(client, method, path, status):
    response = getattr(client, method)(path)
    assert response.status_code == status
    assert response.mimetype == "application/problem+json"
    body = response.get_json()
    assert body["status"] == status and body["type"] == "about:blank"
    if status == 405:
        assert "GET" in response.headers["Allow"]


def test_an_unexpected_exception_becomes_a_500_problem(app, contract_client_for, monkeypatch):
    def explode():
        raise RuntimeError("disk on fire")

    monkeypatch.setattr(engine_gateway, "cache_check", explode)
    monkeypatch.setattr(engine_gateway, "engine_check", lambda: {"ok": True})
    response = contract_client_for(app).get("/readyz")
    assert response.status_code == 500
    body = response.get_json()
    assert body["title"] == "Internal Server Error"
    assert "disk on fire" not in response.get_data(as_text=True)
