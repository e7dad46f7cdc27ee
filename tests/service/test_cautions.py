"""Cautions on every answer, in every format, and the flags that qualify particular figures.

Every answer carries the ``Uvdose-Caution`` header; JSON answers with computed figures
carry ``caution`` (and ``figure_cautions``); CSV answers the ``caution`` column on every
row; SVG pictures the caution as text. The examples come from openapi.yaml itself
(tests/service/contract_examples.py), so a new operation or format is checked as soon as
the contract shows it.
"""
from __future__ import annotations

import csv
import io
import json
import xml.etree.ElementTree as ET

import pytest
from openapi_schema_validator import OAS31Validator

from tests.service.contract_examples import examples, operations, success_media_types
from uvdose.service import cautions


def _spec_examples():
    from tests.service.conftest import load_spec

    return examples(load_spec())


EXAMPLES = _spec_examples()


def _assert_header(response) -> None:
    assert response.headers.get(cautions.CAUTION_HEADER) == cautions.HEADER_TEXT, (
        response.status_code, response.request.path)


def _resolve(spec: dict, schema: dict) -> dict:
    while "$ref" in schema:
        schema = spec["components"]["schemas"][schema["$ref"].rsplit("/", 1)[-1]]
    return schema


def _declares(spec: dict, schema: dict, member: str) -> bool:
    """Does a body of this schema have ``member`` (through compositions)?"""
    schema = _resolve(spec, schema)
    if member in schema.get("properties", {}):
        return True
    return any(_declares(spec, part, member) for key in ("allOf", "oneOf", "anyOf") for part in schema.get(key, ()))


def _call(client, example, accept):
    headers = {"Accept": accept}
    if example.body is None:
        return client.open(example.url, method=example.method.upper(), headers=headers)
    return client.open(example.url, method=example.method.upper(), data=example.body,
                       content_type=example.content_type, headers=headers)


def test_the_contract_has_an_example_for_every_operation(openapi_spec):
    with_examples = {example.operation_id for example in EXAMPLES}
    assert with_examples == {operation["operationId"] for _, _, operation in operations(openapi_spec)}
    for _, _, operation in operations(openapi_spec):
        if operation.get("requestBody"):
            json_media = operation["requestBody"]["content"]["application/json"]
            assert json_media.get("examples"), operation["operationId"]


def test_every_json_example_validates_against_its_request_schema(openapi_spec):
    for path, method, operation in operations(openapi_spec):
        content = (operation.get("requestBody") or {}).get("content", {})
        media = content.get("application/json")
        if not media:
            continue
        schema = dict(media["schema"], components=openapi_spec["components"])
        validator = OAS31Validator(schema)
        for name, example in media["examples"].items():
            errors = list(validator.iter_errors(example["value"]))
            assert not errors, f"{operation['operationId']} example {name}: {errors[0].message}"


@pytest.mark.parametrize("example", EXAMPLES, ids=[f"{e.operation_id}-{e.name}" for e in EXAMPLES])
def test_every_example_in_every_answer_format_carries_the_caution(client, openapi_spec, example):
    if "{" in example.path:
        pytest.skip("the path names a job; tests/service/test_jobs.py runs these on real jobs")
    operation = next(op for _, _, op in operations(openapi_spec) if op["operationId"] == example.operation_id)
    written = None  # the caution of the JSON answer, which the CSV column repeats
    for accept in success_media_types(operation):
        response = _call(client, example, accept)
        assert response.status_code == 200, (example, accept, response.get_data(as_text=True)[:500])
        assert response.mimetype == accept
        _assert_header(response)
        if accept == "application/json":
            schema = operation["responses"]["200"]["content"][accept]["schema"]
            body = response.get_json()
            if _declares(openapi_spec, schema, "caution"):
                assert "medical or occupational-health advice" in body["caution"].lower()
                written = cautions.csv_caution(body["caution"], body.get("figure_cautions"))
            if _declares(openapi_spec, schema, "figure_cautions"):
                assert isinstance(body["figure_cautions"], dict)
        elif accept == "text/csv":
            rows = list(csv.reader(io.StringIO(response.get_data(as_text=True))))
            header, lines = rows[0], rows[1:]
            assert header[-1] == cautions.CSV_CAUTION_COLUMN and lines
            assert {line[-1] for line in lines} == {written}
        elif accept == "image/svg+xml":
            root = ET.fromstring(response.get_data())
            words = " ".join("".join(element.itertext()) for element in root.iter("{http://www.w3.org/2000/svg}text"))
            assert "not a measurement" in words
        elif accept == "text/html":
            assert 'id="cautions"' in response.get_data(as_text=True)


def test_the_contract_documents_the_caution_header_on_every_answer(openapi_spec):
    missing = [f"{method.upper()} {path} {status}" for path, method, operation in operations(openapi_spec)
               for status, response in operation["responses"].items()
               if "$ref" not in response and cautions.CAUTION_HEADER not in response.get("headers", {})]
    missing += [name for name, response in openapi_spec["components"]["responses"].items()
                if cautions.CAUTION_HEADER not in response.get("headers", {})]
    assert missing == []


def test_error_and_operational_answers_carry_the_caution_header(client, make_app, contract_client_for):
    record = {"time": "2026-06-21T13:30:00+02:00", "lat": 44.05, "lon": 4.92}
    answers = [
        client.get("/livez"), client.get("/readyz"), client.get("/metrics"), client.get("/openapi.yaml"),
        client.get("/no/such/page"),                                                        # 404
        client.delete("/v1/irradiance"),                                                    # 405
        client.post("/v1/irradiance", data="{", content_type="application/json"),         # 400
        client.post("/v1/irradiance", data="x", content_type="text/plain"),                # 415
        client.post("/v1/irradiance", json={"records": [record]}, headers={"Accept": "image/png"}),  # 406
        client.post("/v1/irradiance", json={"records": [dict(record, lat=145)]}),          # 422
    ]
    limited = contract_client_for(make_app(UVDOSE_MAX_RECORDS=1))
    answers.append(limited.post("/v1/irradiance", json={"records": [record, record]}))     # 413
    locked = contract_client_for(make_app(UVDOSE_API_KEYS="orchard-key"))
    answers.append(locked.post("/v1/irradiance", json={"records": [record]}))               # 401
    assert sorted(response.status_code for response in answers) == [
        200, 200, 200, 200, 400, 401, 404, 405, 406, 413, 415, 422]
    for response in answers:
        _assert_header(response)


def test_an_unexpected_failure_carries_the_caution_header_too(make_app):
    app = make_app()

    @app.get("/v1/failing-on-purpose")
    def failing():
        raise RuntimeError("boom")

    response = app.test_client().get("/v1/failing-on-purpose")
    assert response.status_code == 500
    _assert_header(response)


# -- per-result flags and figure cautions ----------------------------------------------

WINDOW = {"lat": 44.05, "lon": 4.92, "elevation_m": 120}


def test_windows_longer_than_the_limit_period_are_flagged_per_result(client):
    records = [dict(WINDOW, id="shift", start="2026-06-22T06:30:00+02:00", end="2026-06-22T12:30:00+02:00"),
               dict(WINDOW, id="long-day", start="2026-06-22T06:00:00+02:00", end="2026-06-22T18:00:00+02:00"),
               dict(WINDOW, id="week", start="2026-06-22T00:00:00+02:00", end="2026-06-29T00:00:00+02:00")]
    body = client.post("/v1/doses/windows", json={"records": records, "spectra": ["erythema", "actinic_icnirp"]}
                       ).get_json()
    assert [r["limit_period_exceeded"] for r in body["results"]] == [False, True, True]
    texts = body["figure_cautions"]
    assert set(texts) == {"icnirp_limit_fraction", "time_to_icnirp_limit_s", "limit_period_exceeded",
                          "med_fraction"}
    assert "not a safe exposure time" in texts["time_to_icnirp_limit_s"]
    for name in ("icnirp_limit_fraction", "time_to_icnirp_limit_s"):
        assert "unprotected skin and eyes" in texts[name] and "35 %" in texts[name]
    assert "8 hours" in texts["limit_period_exceeded"]
    assert "200, 250, 350, 450, 600 and 1000" in texts["med_fraction"]


def test_without_the_occupational_spectrum_there_is_no_limit_flag(client):
    record = dict(WINDOW, start="2026-06-22T00:00:00+02:00", end="2026-06-24T00:00:00+02:00")
    body = client.post("/v1/doses/windows", json={"records": [record], "spectra": ["erythema"]}).get_json()
    assert "limit_period_exceeded" not in body["results"][0]
    assert set(body["figure_cautions"]) == {"med_fraction"}


def test_previtamin_d3_figures_carry_their_own_caution_and_source(client):
    record = {"time": "2026-06-21T13:30:00+02:00", "lat": 44.05, "lon": 4.92}
    body = client.post("/v1/irradiance", json={"records": [record], "spectra": ["previtamin_d3"]}).get_json()
    text = body["figure_cautions"]["previtamin_d3"]
    assert "CIE 174:2006" in text and "MacLaughlin" in text and "not a measure of vitamin D status" in text
    answer = client.post("/v1/irradiance", json={"records": [record], "spectra": ["previtamin_d3"]},
                         headers={"Accept": "text/csv"})
    (row,) = csv.DictReader(io.StringIO(answer.get_data(as_text=True)))
    assert row["caution"].startswith(cautions.CAUTION) and text in row["caution"]
    plain = client.post("/v1/irradiance", json={"records": [record]}).get_json()
    assert plain["figure_cautions"] == {}


def test_field_doses_defer_to_agronomic_advice(client):
    body = client.post("/v1/doses/fields", json={"records": [{"lat": 44.05, "lon": 4.92}],
                                                 "first_day": "2026-04-01", "last_day": "2026-04-02"}).get_json()
    assert "defer to agronomic advice" in body["caution"]


ROUTE_POINTS = [
    {"time": "2026-07-14T08:30:00+02:00", "lat": 45.7485, "lon": 4.8467},
    {"time": "2026-07-14T09:10:00+02:00", "lat": 45.7612, "lon": 4.859},
    {"time": "2026-07-14T10:05:00+02:00", "lat": 45.7702, "lon": 4.8803, "stop": True},
    {"time": "2026-07-14T10:30:00+02:00", "lat": 45.7702, "lon": 4.8803},
    {"time": "2026-07-14T12:15:00+02:00", "lat": 45.7485, "lon": 4.8467},
]


def test_routes_say_parked_time_is_not_counted_and_give_its_dose_when_asked(client):
    without_stop = [dict(point, stop=None) for point in ROUTE_POINTS]
    long_day = [dict(ROUTE_POINTS[0]), dict(ROUTE_POINTS[1], time="2026-07-14T18:45:00+02:00")]
    body = {"routes": [{"id": "with-stop", "cloud_factor": 0.9, "points": ROUTE_POINTS},
                       {"id": "no-stop", "points": without_stop},
                       {"id": "long-day", "points": long_day}],
            "parked_dose": True, "spectra": ["erythema", "actinic_icnirp"]}
    answer = client.post("/v1/doses/routes", json=body).get_json()
    results = answer["results"]
    assert [r["parked_time_excluded"] for r in results] == [True, False, False]
    assert [r["limit_period_exceeded"] for r in results] == [False, False, True]
    assert results[0]["parked_s"] == 25 * 60
    assert "parked legs" in answer["caution"] and "not in dose_j_m2" in answer["caution"]
    assert {"parked_time_excluded", "parked_dose_j_m2"} <= set(answer["figure_cautions"])
    assert results[1]["parked_dose_j_m2"] == {"erythema": 0.0, "actinic_icnirp": 0.0}

    # The parked dose is the open-sky window dose at the stop over the parked leg.
    window = {"id": "stop", "start": ROUTE_POINTS[2]["time"], "end": ROUTE_POINTS[3]["time"],
              "lat": ROUTE_POINTS[2]["lat"], "lon": ROUTE_POINTS[2]["lon"], "cloud_factor": 0.9}
    same = client.post("/v1/doses/windows", json={"records": [window], "spectra": ["erythema", "actinic_icnirp"],
                                                  "step_s": 300}).get_json()["results"][0]
    for name, value in results[0]["parked_dose_j_m2"].items():
        assert value == pytest.approx(same["dose_j_m2"][name], rel=1e-12)
        assert value > results[0]["dose_j_m2"][name] * 0.1  # open sky, not behind glass

    plain = client.post("/v1/doses/routes", json={"routes": body["routes"][:1]}).get_json()["results"][0]
    assert "parked_dose_j_m2" not in plain and plain["parked_time_excluded"] is True


def test_offline_batch_output_carries_the_same_cautions(tmp_path):
    from uvdose.service.cli import main

    source = tmp_path / "blocks.csv"
    source.write_text("id,time,lat,lon\ncombe-basse/block-b,2026-06-21T13:30:00+02:00,44.05,4.92\n"
                      "combe-basse/block-a,2026-06-21T14:30:00+02:00,44.06,4.91\n", encoding="utf-8")
    as_csv, as_json = tmp_path / "out.csv", tmp_path / "out.json"
    assert main(["batch", str(source), str(as_csv), "--spectra", "erythema", "previtamin_d3"]) == 0
    assert main(["batch", str(source), str(as_json), "--spectra", "erythema", "previtamin_d3"]) == 0
    rows = list(csv.DictReader(io.StringIO(as_csv.read_text(encoding="utf-8"))))
    body = json.loads(as_json.read_text(encoding="utf-8"))
    assert list(rows[0])[-1] == "caution"
    assert {row["caution"] for row in rows} == {cautions.csv_caution(body["caution"], body["figure_cautions"])}
    assert set(body["figure_cautions"]) == {"previtamin_d3"}
