"""Request bodies are counted while read, whatever their framing and content coding
(service/request_body.py): over the limit is a 413 with the amount and the limit, a body
that ends early is a 400, and nothing is computed for either."""
from __future__ import annotations

import gzip
import io
import json

import pytest
import zstandard

from uvdose.service import engine_gateway

LIMIT = 4000


def _batch(n: int) -> bytes:
    """Invented plots around solar noon (a demo scenario of our own)."""
    return json.dumps({"records": [{"id": f"plot-{i}", "time": "2026-06-21T11:00:00Z", "lat": 45.0 + i * 0.01,
                                    "lon": 7.0} for i in range(n)]}).encode()


@pytest.fixture
def small_limit(make_app, contract_client_for):
    return contract_client_for(make_app(MAX_CONTENT_LENGTH=LIMIT))


def _stream_post(client, body: bytes, **headers):
    """POST ``body`` as a stream with no Content-Length, as a server hands a chunked body
    to the app (``wsgi.input_terminated``, RFC 9112 §7.1)."""
    return client.post("/v1/irradiance", content_type="application/json", headers=headers,
                       environ_overrides={"wsgi.input": io.BytesIO(body), "wsgi.input_terminated": True})


@pytest.fixture
def engine_must_not_run(monkeypatch):
    def refuse(*args, **kwargs):
        raise AssertionError("the engine ran for a refused body")

    monkeypatch.setattr(engine_gateway.Gateway, "irradiance", refuse)
    monkeypatch.setattr(engine_gateway.Gateway, "dose_evaluator", refuse)


def test_a_streamed_body_over_the_limit_is_413_never_cut_to_the_limit(small_limit, engine_must_not_run):
    body = _batch(60)
    assert len(body) > LIMIT
    response = _stream_post(small_limit, body)
    assert response.status_code == 413, response.get_data(as_text=True)
    problem = response.get_json()
    assert problem["type"] == "urn:uvdose:problem:body-too-large"
    assert problem["max_body_bytes"] == LIMIT
    assert problem["body_bytes"] > LIMIT and problem["body_bytes_exact"] is False


def test_a_streamed_body_within_the_limit_is_read_whole(small_limit):
    body = _batch(20)
    assert len(body) < LIMIT
    response = _stream_post(small_limit, body)
    assert response.status_code == 200
    assert [r["id"] for r in response.get_json()["results"]] == [f"plot-{i}" for i in range(20)]


def test_a_declared_length_over_the_limit_is_413_with_the_exact_amount(small_limit):
    body = _batch(60)
    response = small_limit.post("/v1/irradiance", data=body, content_type="application/json")
    assert response.status_code == 413
    problem = response.get_json()
    assert (problem["body_bytes"], problem["body_bytes_exact"], problem["max_body_bytes"]) == (len(body), True, LIMIT)


def test_a_body_shorter_than_its_content_length_is_400(small_limit):
    body = _batch(10)
    response = small_limit.post("/v1/irradiance", content_type="application/json",
                                environ_overrides={"wsgi.input": io.BytesIO(body[:-40]),
                                                   "CONTENT_LENGTH": str(len(body))})
    assert response.status_code == 400
    problem = response.get_json()
    assert problem["type"] == "urn:uvdose:problem:incomplete-body"
    assert f"{len(body) - 40} of the {len(body)} bytes" in problem["detail"]


@pytest.mark.parametrize("coding, encode", [("gzip", gzip.compress),
                                             ("zstd", zstandard.ZstdCompressor().compress)])
def test_coded_bodies_are_decoded_and_their_decoded_size_counted(small_limit, coding, encode):
    body = _batch(20)
    response = small_limit.post("/v1/irradiance", data=encode(body), content_type="application/json",
                                headers={"Content-Encoding": coding})
    assert response.status_code == 200
    assert len(response.get_json()["results"]) == 20
    # A bomb: 3 MiB of spaces (JSON whitespace) in front of the batch, under 4 kB on the wire.
    bomb = encode(b" " * (3 << 20) + body)
    assert len(bomb) < LIMIT
    response = small_limit.post("/v1/irradiance", data=bomb, content_type="application/json",
                                headers={"Content-Encoding": coding})
    assert response.status_code == 413
    problem = response.get_json()
    assert problem["type"] == "urn:uvdose:problem:body-too-large" and "decoded" in problem["detail"]
    assert problem["body_bytes"] == LIMIT + 1 and problem["max_body_bytes"] == LIMIT


@pytest.mark.parametrize("coding, encode", [("gzip", gzip.compress),
                                             ("zstd", zstandard.ZstdCompressor().compress)])
def test_a_cut_coded_body_is_400_not_a_shorter_batch(small_limit, coding, encode):
    coded = encode(_batch(15))
    response = small_limit.post("/v1/irradiance", data=coded[: len(coded) // 2], content_type="application/json",
                                headers={"Content-Encoding": coding})
    assert response.status_code == 400
    assert response.get_json()["type"] == "urn:uvdose:problem:incomplete-body"


def test_two_gzip_members_are_one_body(small_limit):
    body = _batch(12)
    coded = gzip.compress(body[:100]) + gzip.compress(body[100:])
    response = small_limit.post("/v1/irradiance", data=coded, content_type="application/json",
                                headers={"Content-Encoding": "gzip"})
    assert response.status_code == 200 and len(response.get_json()["results"]) == 12


def test_an_unknown_content_coding_is_415_naming_those_taken(small_limit):
    response = small_limit.post("/v1/irradiance", data=_batch(2), content_type="application/json",
                                headers={"Content-Encoding": "br"})
    assert response.status_code == 415
    assert response.get_json()["type"] == "urn:uvdose:problem:unsupported-content-encoding"
    assert response.headers["Accept-Encoding"] == "gzip, zstd"


def test_route_bodies_are_counted_too(small_limit, engine_must_not_run):
    route = {"id": "walk", "points": [{"time": "2026-06-21T10:00:00Z", "lat": 45.0, "lon": 7.0},
                                      {"time": "2026-06-21T10:30:00Z", "lat": 45.01, "lon": 7.0}]}
    body = json.dumps({"routes": [route] * 40}).encode()
    assert len(body) > LIMIT
    response = small_limit.post("/v1/doses/routes", content_type="application/json",
                                environ_overrides={"wsgi.input": io.BytesIO(body), "wsgi.input_terminated": True})
    assert response.status_code == 413
    assert response.get_json()["type"] == "urn:uvdose:problem:body-too-large"
