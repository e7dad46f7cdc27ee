"""Optional API-key authentication (service/auth.py)."""
import hashlib
import hmac
import json

import pytest
from flask import g, jsonify

from uvdose.service import auth
from uvdose.service.app import create_app
from uvdose.service.auth import OPEN_PATHS, ApiKeyConfigError

# Keys of an invented orchard cooperative; they must never appear in a log line.
ORCHARD_KEY = "orchard-coop-7Qm2v9XkL4"
DEPOT_KEY = "depot-north-Zr81pW0aT6"


def _app(**config):
    app = create_app(config)

    @app.get("/v1/test-protected")
    def test_protected():
        return jsonify({"ok": True})

    return app


def _sha256_hex(key):
    # SHA-256 as defined by FIPS 180-4, computed here with hashlib.
    return hashlib.sha256(key.encode()).hexdigest()


@pytest.fixture(autouse=True)
def no_keys_in_environment(monkeypatch):
    monkeypatch.delenv("UVDOSE_API_KEYS", raising=False)
    monkeypatch.delenv("UVDOSE_API_KEYS_FILE", raising=False)


def _assert_401(response, missing):
    assert response.status_code == 401
    assert response.mimetype == "application/problem+json"
    body = response.get_json()
    assert body["status"] == 401 and body["title"] == "Unauthorized"
    assert body["type"] == "urn:uvdose:problem:unauthorized"
    assert ("requires an API key" in body["detail"]) is missing
    assert response.headers["WWW-Authenticate"].startswith("Bearer")


def test_off_by_default():
    client = _app().test_client()
    assert client.get("/v1/test-protected").status_code == 200
    assert client.get("/v1/test-protected", headers={"X-API-Key": "anything"}).status_code == 200


def test_keys_from_the_environment(monkeypatch):
    monkeypatch.setenv("UVDOSE_API_KEYS", f"{ORCHARD_KEY}, {DEPOT_KEY}")
    client = _app().test_client()
    assert client.get("/v1/test-protected", headers={"X-API-Key": ORCHARD_KEY}).status_code == 200
    assert client.get("/v1/test-protected", headers={"X-API-Key": DEPOT_KEY}).status_code == 200
    _assert_401(client.get("/v1/test-protected"), missing=True)


def test_bearer_header_is_accepted():
    client = _app(UVDOSE_API_KEYS=ORCHARD_KEY).test_client()
    for header in (f"Bearer {ORCHARD_KEY}", f"bearer {ORCHARD_KEY}"):
        assert client.get("/v1/test-protected", headers={"Authorization": header}).status_code == 200
    _assert_401(client.get("/v1/test-protected", headers={"Authorization": f"Basic {ORCHARD_KEY}"}),
                missing=True)


@pytest.mark.parametrize(
    "headers",
    [
        {"X-API-Key": ORCHARD_KEY + "x"},
        {"X-API-Key": ORCHARD_KEY[:-1]},
        {"X-API-Key": ORCHARD_KEY.upper()},
        {"Authorization": f"Bearer {DEPOT_KEY}"},
        {"X-API-Key": "sha256:" + _sha256_hex(ORCHARD_KEY)},
    ],
)
def test_wrong_keys_are_refused(headers):
    client = _app(UVDOSE_API_KEYS=ORCHARD_KEY).test_client()
    _assert_401(client.get("/v1/test-protected", headers=headers), missing=False)


def test_unknown_paths_need_a_key_too():
    client = _app(UVDOSE_API_KEYS=ORCHARD_KEY).test_client()
    _assert_401(client.get("/v1/no-such-thing"), missing=True)
    assert client.get("/v1/no-such-thing", headers={"X-API-Key": ORCHARD_KEY}).status_code == 404


@pytest.mark.parametrize("path", sorted(OPEN_PATHS))
def test_probe_scrape_and_docs_paths_stay_open(path):
    app = _app(UVDOSE_API_KEYS=ORCHARD_KEY)
    assert path in {rule.rule for rule in app.url_map.iter_rules()}
    # Only the before-request hooks run: the key check, not the (slow) readiness view.
    with app.test_request_context(path):
        assert app.preprocess_request() is None
        assert g.uvdose_auth == "open"
    with app.test_request_context("/v1/test-protected"):
        assert app.preprocess_request().status_code == 401


def test_key_file_with_plain_and_hashed_entries(tmp_path):
    key_file = tmp_path / "api-keys"
    key_file.write_text(
        "# orchard cooperative, hashed at rest\n"
        f"sha256:{_sha256_hex(ORCHARD_KEY).upper()}\n"
        "\n"
        f"   {DEPOT_KEY}   \n"
    )
    client = _app(UVDOSE_API_KEYS_FILE=str(key_file)).test_client()
    assert client.get("/v1/test-protected", headers={"X-API-Key": ORCHARD_KEY}).status_code == 200
    assert client.get("/v1/test-protected", headers={"X-API-Key": DEPOT_KEY}).status_code == 200
    _assert_401(client.get("/v1/test-protected", headers={"X-API-Key": "# orchard cooperative"}),
                missing=False)


def test_environment_and_file_keys_combine(tmp_path, monkeypatch):
    key_file = tmp_path / "api-keys"
    key_file.write_text(f"sha256:{_sha256_hex(DEPOT_KEY)}\n")
    monkeypatch.setenv("UVDOSE_API_KEYS_FILE", str(key_file))
    monkeypatch.setenv("UVDOSE_API_KEYS", ORCHARD_KEY)
    client = _app().test_client()
    for key in (ORCHARD_KEY, DEPOT_KEY):
        assert client.get("/v1/test-protected", headers={"X-API-Key": key}).status_code == 200


def test_keys_are_held_only_as_digests():
    app = _app(UVDOSE_API_KEYS=f"{ORCHARD_KEY},{DEPOT_KEY}")
    ring = app.extensions["uvdose_auth"]
    assert sorted(ring.digests) == sorted(
        hashlib.sha256(k.encode()).digest() for k in (ORCHARD_KEY, DEPOT_KEY)
    )
    assert ORCHARD_KEY not in repr(ring) and DEPOT_KEY not in repr(ring)


def test_every_digest_is_compared_even_after_a_match(monkeypatch):
    calls = []
    real = hmac.compare_digest

    def counting(a, b):
        calls.append(1)
        return real(a, b)

    monkeypatch.setattr(auth.hmac, "compare_digest", counting)
    ring = auth.KeyRing(tuple(auth.key_digest(k) for k in (ORCHARD_KEY, DEPOT_KEY, "third-key")))
    assert ring.accepts(ORCHARD_KEY)
    assert len(calls) == 3
    assert not ring.accepts("nope")
    assert len(calls) == 6


@pytest.mark.parametrize(
    "content, message",
    [
        ("", "holds no keys"),
        ("# only a comment\n\n", "holds no keys"),
        ("sha256:abc123\n", "entry 1: a 'sha256:' entry needs exactly 64 hex digits"),
        (f"{ORCHARD_KEY}\nsha256:{'g' * 64}\n", "entry 2"),
        ("two words\n", "entry 1: a key may not contain whitespace"),
    ],
)
def test_an_unusable_key_file_stops_start_up(tmp_path, content, message):
    key_file = tmp_path / "api-keys"
    key_file.write_text(content)
    with pytest.raises(ApiKeyConfigError, match="UVDOSE_API_KEYS_FILE") as raised:
        _app(UVDOSE_API_KEYS_FILE=str(key_file))
    assert message in str(raised.value)
    assert ORCHARD_KEY not in str(raised.value)


def test_a_missing_key_file_stops_start_up(tmp_path):
    with pytest.raises(ApiKeyConfigError, match="cannot read"):
        _app(UVDOSE_API_KEYS_FILE=str(tmp_path / "not-mounted"))


def test_no_key_ever_appears_in_a_log_line(capsys, caplog):
    caplog.set_level("DEBUG")
    client = _app(UVDOSE_API_KEYS=ORCHARD_KEY, UVDOSE_LOG_LEVEL="DEBUG").test_client()
    capsys.readouterr()
    client.get("/v1/test-protected", headers={"X-API-Key": ORCHARD_KEY})
    client.get("/v1/test-protected", headers={"Authorization": f"Bearer {ORCHARD_KEY}"})
    client.get("/v1/test-protected", headers={"X-API-Key": DEPOT_KEY})
    client.get("/v1/test-protected", headers={"Authorization": f"Bearer {DEPOT_KEY}"})
    client.get("/v1/test-protected")
    out = capsys.readouterr()
    lines = [json.loads(line) for line in out.out.splitlines()]
    assert [line["auth"] for line in lines] == ["ok", "ok", "invalid", "invalid", "missing"]
    assert [line["status"] for line in lines] == [200, 200, 401, 401, 401]
    everything = out.out + out.err + caplog.text
    for secret in (ORCHARD_KEY, DEPOT_KEY, _sha256_hex(ORCHARD_KEY), _sha256_hex(DEPOT_KEY)):
        assert secret not in everything


def test_a_401_from_a_real_route_matches_openapi_yaml(contract_client_for):
    # The contract client checks every response against openapi.yaml (tests/service/conftest.py).
    client = contract_client_for(create_app({"TESTING": True, "UVDOSE_API_KEYS": ORCHARD_KEY}))
    response = client.get("/v1/catalogue")
    _assert_401(response, missing=True)
    assert client.get("/v1/catalogue", headers={"X-API-Key": ORCHARD_KEY}).status_code == 200


def test_openapi_yaml_states_where_keys_apply(openapi_spec):
    schemes = openapi_spec["components"]["securitySchemes"]
    assert schemes["ApiKey"] == {**schemes["ApiKey"], "type": "apiKey", "in": "header", "name": "X-API-Key"}
    assert (schemes["BearerKey"]["type"], schemes["BearerKey"]["scheme"]) == ("http", "bearer")
    assert {"ApiKey": []} in openapi_spec["security"] and {"BearerKey": []} in openapi_spec["security"]
    app = create_app()
    served = {rule.rule for rule in app.url_map.iter_rules()}
    for path, item in openapi_spec["paths"].items():
        for method, operation in item.items():
            if path in OPEN_PATHS:
                assert operation.get("security") == [], f"{method.upper()} {path} should be open"
                assert "401" not in operation["responses"]
            else:
                assert "security" not in operation, f"{method.upper()} {path} overrides security"
                assert "401" in operation["responses"], f"{method.upper()} {path} lacks a 401 response"
    assert OPEN_PATHS <= served
