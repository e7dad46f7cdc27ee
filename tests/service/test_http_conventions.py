"""HTTP conventions on the answer side: content negotiation (406 on every operation that
cannot meet ``Accept``), gzip and zstd answers on request, ETag/Cache-Control/304 on the
catalogue and the contract. In-process through the contract-checking client, and once
through a real gunicorn."""
from __future__ import annotations

import gzip
import json
import re

import httpx
import pytest
import zstandard
from flask import Response, stream_with_context

from uvdose.service.negotiation import produced_by
from uvdose.service.response_compression import encode_stream

ORCHARD = {"id": "combe-basse/block-b", "time": "2026-06-21T13:30:00+02:00", "lat": 44.05, "lon": 4.92}
WINDOW = {"id": "crew-1", "start": "2026-06-10T06:30:00+02:00", "end": "2026-06-10T08:30:00+02:00",
          "lat": 44.31, "lon": 4.62}
ROUTE = {"id": "van-7", "points": [{"time": "2026-07-15T07:30:00+01:00", "lat": 51.512, "lon": -0.091},
                                   {"time": "2026-07-15T08:10:00+01:00", "lat": 51.547, "lon": -0.021}]}
BODIES = {
    "/v1/irradiance": {"records": [ORCHARD]},
    "/v1/ozone": {"records": [{"lat": 44.05, "lon": 4.92, "date": "2026-06-21"}]},
    "/v1/doses/windows": {"records": [WINDOW]},
    "/v1/doses/fields": {"records": [{"lat": 52.41, "lon": -1.62}], "first_day": "2026-04-01",
                         "last_day": "2026-04-02"},
    "/v1/doses/routes": {"routes": [ROUTE]},
}
QUERIES = {
    "/v1/pictures/uv-index-day": {"lat": 44.05, "lon": 4.92, "date": "2026-06-21", "utc_offset": "+02:00"},
    "/v1/pictures/field-season": {"lat": 44.05, "lon": 4.92, "first_day": "2026-04-01", "last_day": "2026-04-03"},
}
ASKED = ("application/json", "text/csv", "text/html", "application/yaml", "text/plain", "application/xml",
         "image/svg+xml")


def _operations(spec, with_jobs: bool = True):
    """(path, method) of every GET and POST (and DELETE) operation; ``with_jobs=False`` leaves
    out /v1/jobs, whose operations need a job (tests/service/test_jobs.py checks them)."""
    return [(path, method) for path, item in spec["paths"].items() for method in item
            if method in ("get", "post", "delete") and (with_jobs or not path.startswith("/v1/jobs/"))]


def _offered(spec, path, method) -> set[str]:
    responses = spec["paths"][path][method]["responses"]
    success = responses.get("200") or spec["components"]["responses"]["JobAccepted"]
    if "$ref" in success:
        success = spec["components"]["responses"][success["$ref"].rsplit("/", 1)[1]]
    return set(success["content"])


def _contract_path(rule: str) -> str:
    """A Flask rule in the contract's spelling: ``/v1/jobs/<int:part>`` -> ``/v1/jobs/{part}``."""
    return re.sub(r"<(?:[a-z]+:)?([a-z_]+)>", r"{\1}", rule)


def _call(client, path, method, **headers):
    if method == "post":
        return client.post(path, json=BODIES[path], headers=headers)
    return client.get(path, query_string=QUERIES.get(path), headers=headers)


# --- Accept --------------------------------------------------------------------------------

def test_every_view_declares_what_it_produces_as_the_contract_says(app, openapi_spec):
    documented = set(_operations(openapi_spec))
    for rule in app.url_map.iter_rules():
        if rule.endpoint == "static":
            continue
        offered = produced_by(app.view_functions[rule.endpoint])
        assert offered is not None, f"{rule.rule} declares no @produces"
        path = _contract_path(rule.rule)
        for method in rule.methods & {"GET", "POST", "DELETE"}:
            assert (path, method.lower()) in documented, (path, method)
            assert set(offered) == _offered(openapi_spec, path, method.lower()), rule.rule


@pytest.mark.parametrize("asked", ASKED)
def test_every_operation_answers_406_when_it_cannot_meet_accept(client, openapi_spec, asked):
    for path, method in _operations(openapi_spec, with_jobs=False):
        response = _call(client, path, method, Accept=asked)
        if asked in _offered(openapi_spec, path, method):
            assert response.status_code == 200 and response.mimetype == asked, (path, asked)
        else:
            assert response.status_code == 406, (path, asked, response.status_code)
            problem = response.get_json()
            assert problem["type"] == "urn:uvdose:problem:not-acceptable"
            assert set(problem["available"]) == _offered(openapi_spec, path, method)


def test_quality_values_and_wildcards_choose_among_what_is_offered(client):
    assert client.post("/v1/irradiance", json=BODIES["/v1/irradiance"],
                       headers={"Accept": "text/csv;q=0.9, application/json;q=0.5"}).mimetype == "text/csv"
    assert client.post("/v1/irradiance", json=BODIES["/v1/irradiance"],
                       headers={"Accept": "text/*"}).mimetype == "text/csv"
    assert client.get("/v1/catalogue", headers={"Accept": "*/*"}).status_code == 200
    assert client.get("/v1/catalogue", headers={"Accept": "application/*"}).status_code == 200
    assert client.get("/v1/catalogue", headers={"Accept": "application/json;q=0"}).status_code == 406


def test_406_comes_before_the_body_is_read(client):
    # A body that could not be read at all: the 406 is answered first.
    response = client.post("/v1/doses/windows", data=b"{not json", headers={
        "Content-Type": "application/json", "Accept": "application/yaml"})
    assert response.status_code == 406


# --- Accept-Encoding -----------------------------------------------------------------------

def _big_answer(client, **headers):
    records = [dict(ORCHARD, id=f"row-{i}") for i in range(200)]
    return client.post("/v1/irradiance", json={"records": records}, headers=headers)


@pytest.mark.parametrize("coding, decode", [("gzip", gzip.decompress),
                                            ("zstd", zstandard.ZstdDecompressor().decompressobj().decompress)])
def test_answers_come_coded_on_request_and_decode_to_the_same_body(client, coding, decode):
    plain = _big_answer(client)
    coded = _big_answer(client, **{"Accept-Encoding": coding})
    assert "Content-Encoding" not in plain.headers and plain.headers["Vary"] == "Accept-Encoding"
    assert coded.headers["Content-Encoding"] == coding and coded.headers["Vary"] == "Accept-Encoding"
    assert int(coded.headers["Content-Length"]) == len(coded.get_data()) < len(plain.get_data()) / 3
    assert json.loads(decode(coded.get_data())) == plain.get_json()


def test_the_coding_follows_the_clients_quality_values(client):
    def coding(accept_encoding):
        return _big_answer(client, **{"Accept-Encoding": accept_encoding}).headers.get("Content-Encoding")

    assert coding("gzip, deflate, br") == "gzip"
    assert coding("gzip, zstd") == "zstd"  # equal quality: the server's preference
    assert coding("zstd;q=0.5, gzip;q=1") == "gzip"
    assert coding("*") == "zstd"
    assert coding("*, zstd;q=0") == "gzip"
    assert coding("identity") is None
    assert coding("br") is None


def test_small_answers_and_problems_below_the_minimum_stay_identity(client, make_app, contract_client_for):
    small = client.get("/livez", headers={"Accept-Encoding": "gzip"})
    assert "Content-Encoding" not in small.headers and "Vary" not in small.headers
    everything = contract_client_for(make_app(UVDOSE_COMPRESS_MIN_BYTES=0))
    assert everything.get("/livez", headers={"Accept-Encoding": "gzip"}).headers["Content-Encoding"] == "gzip"


def test_streamed_answers_are_coded_chunk_by_chunk(app):
    @app.get("/test-stream")
    def _stream():
        return Response(stream_with_context(iter([b'{"line": 1}\n', b'{"line": 2}\n'])),
                        mimetype="application/x-ndjson")

    answer = app.test_client().get("/test-stream", headers={"Accept-Encoding": "gzip"})
    assert answer.headers["Content-Encoding"] == "gzip" and "Content-Length" not in answer.headers
    assert gzip.decompress(answer.get_data()) == b'{"line": 1}\n{"line": 2}\n'
    # Each chunk is flushed: the first line decodes before the stream ends.
    first = next(encode_stream(iter([b"abc\n", b"def\n"]), "zstd"))
    assert zstandard.ZstdDecompressor().decompressobj().decompress(first) == b"abc\n"


# --- ETag, Cache-Control, 304 --------------------------------------------------------------

@pytest.mark.parametrize("path", ["/v1/catalogue", "/openapi.yaml", "/docs"])
def test_catalogue_and_contract_revalidate_with_their_tag(client, path):
    first = client.get(path)
    tag = first.headers["ETag"]
    assert tag.startswith('"') and first.headers["Cache-Control"] == "public, max-age=300"
    assert client.get(path).headers["ETag"] == tag  # the same body, the same tag
    again = client.get(path, headers={"If-None-Match": tag})
    assert again.status_code == 304 and again.get_data() == b"" and again.headers["ETag"] == tag
    assert client.get(path, headers={"If-None-Match": '"something-else"'}).status_code == 200
    assert client.get(path, headers={"If-None-Match": "*"}).status_code == 304


@pytest.mark.parametrize("path", ["/v1/catalogue", "/openapi.yaml"])
def test_a_coded_answer_has_its_own_tag_and_revalidates_too(client, path):
    coded = client.get(path, headers={"Accept-Encoding": "gzip"})
    assert coded.headers["Content-Encoding"] == "gzip" and coded.headers["ETag"].endswith('-gzip"')
    again = client.get(path, headers={"Accept-Encoding": "gzip", "If-None-Match": coded.headers["ETag"]})
    assert again.status_code == 304 and again.headers["ETag"] == coded.headers["ETag"]
    assert again.headers["Vary"] == "Accept-Encoding"
    plain = client.get(path, headers={"If-None-Match": coded.headers["ETag"]})
    assert plain.status_code == 304 and not plain.headers["ETag"].endswith('-gzip"')


def test_a_changed_catalogue_has_a_new_tag(client, make_app, contract_client_for):
    other = contract_client_for(make_app(UVDOSE_MAX_RECORDS=12)).get("/v1/catalogue")
    assert other.headers["ETag"] != client.get("/v1/catalogue").headers["ETag"]


def test_behind_api_keys_the_catalogue_is_private(make_app, contract_client_for):
    keyed = contract_client_for(make_app(UVDOSE_API_KEYS="k-1"))
    answer = keyed.get("/v1/catalogue", headers={"X-API-Key": "k-1"})
    assert answer.headers["Cache-Control"] == "private, max-age=300"
    assert keyed.get("/openapi.yaml").headers["Cache-Control"] == "public, max-age=300"


# --- through a real server -----------------------------------------------------------------

@pytest.mark.gunicorn
def test_coding_negotiation_and_revalidation_through_gunicorn(gunicorn_server):
    records = [dict(ORCHARD, id=f"row-{i}") for i in range(300)]
    with httpx.Client(base_url=gunicorn_server, timeout=60) as http:
        sizes = {}
        for coding in ("identity", "gzip", "zstd"):
            answer = http.post("/v1/irradiance", json={"records": records}, headers={"Accept-Encoding": coding})
            assert answer.status_code == 200
            assert answer.headers.get("Content-Encoding", "identity") == coding
            assert len(answer.json()["results"]) == 300  # httpx decodes both codings
            sizes[coding] = int(answer.headers["Content-Length"])
        assert sizes["gzip"] < sizes["identity"] / 3 and sizes["zstd"] < sizes["identity"] / 3
        tag = http.get("/v1/catalogue").headers["ETag"]
        assert http.get("/v1/catalogue", headers={"If-None-Match": tag}).status_code == 304
        assert http.get("/v1/catalogue", headers={"Accept": "text/csv"}).status_code == 406
        assert http.post("/v1/doses/routes", json=BODIES["/v1/doses/routes"],
                         headers={"Accept": "application/yaml"}).status_code == 406
