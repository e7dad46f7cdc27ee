"""Every dose request is held to the work it implies and the size of its answer, counted
from the request before any engine work: beyond the limits a 413 problem states the amount
asked, the limit, its setting and the jobs API (service.work_bounds)."""
import datetime
import json

import numpy as np
import pytest

from uvdose.models import engine
from uvdose.service import work_bounds
from uvdose.service.engine_gateway import Gateway

ALL_SPECTRA = ["erythema", "actinic_icnirp", "plant_damage", "plant_growth", "dna_damage", "previtamin_d3",
               "uvb", "uva"]


@pytest.fixture
def no_engine(monkeypatch):
    """Fail the test if anything reaches the engine; count evaluators built."""
    built = []

    def refuse(*args, **kwargs):
        raise AssertionError("the engine was called")

    original = Gateway.dose_evaluator

    def counting(self, *args, **kwargs):
        built.append(args)
        return original(self, *args, **kwargs)

    monkeypatch.setattr(engine, "compute", refuse)
    monkeypatch.setattr(Gateway, "dose_evaluator", counting)
    return built


def _post(client, path, body, accept="application/json"):
    return client.post(path, data=json.dumps(body), content_type="application/json", headers={"Accept": accept})


def _fields(n, first="2026-01-01", days=365, **options):
    last = (datetime.date.fromisoformat(first) + datetime.timedelta(days=days - 1)).isoformat()
    records = [{"id": f"parcel-{i:05d}", "lat": round(40.0 + (i % 200) * 0.05, 2), "lon": round(-2.0 + (i // 200) * 0.05, 2)}
               for i in range(n)]
    return {"records": records, "first_day": first, "last_day": last, **options}


def _assert_413(response, slug, quantity, asked, limit, setting):
    assert response.status_code == 413, response.get_data(as_text=True)[:500]
    problem = response.get_json()
    assert problem["type"] == f"urn:uvdose:problem:{slug}"
    assert (problem["quantity"], problem["asked"], problem["limit"], problem["setting"]) == (
        quantity, asked, limit, setting)
    operation = response.request.path.rsplit("/", 1)[1]
    assert problem["jobs"] == f"/v1/jobs/{operation}"  # where the same body goes as a job
    assert f"{asked}" in problem["detail"] and f"{limit}" in problem["detail"]
    assert f"POST /v1/jobs/{operation}" in problem["detail"]
    return problem


def test_a_season_of_5000_fields_is_refused_before_any_engine_work(client, no_engine):
    body = _fields(5000)
    assert 200_000 < len(json.dumps(body)) < 280_000  # about the 221 KB of the request users sent
    response = _post(client, "/v1/doses/fields", body)
    # 5 000 fields × 365 days × 8 Gauss–Legendre nodes × 3 default spectra.
    _assert_413(response, "too-much-work", "sample_spectra", 5000 * 365 * 8 * 3, 6_000_000,
                "UVDOSE_MAX_SAMPLE_SPECTRA")
    assert no_engine == []  # not even an evaluator was built


def test_a_thousand_month_long_windows_are_refused(client, no_engine):
    window = {"lat": 45.0, "lon": 5.0, "start": "2026-05-01T00:00:00Z", "end": "2026-06-01T00:00:00Z"}
    response = _post(client, "/v1/doses/windows", {"records": [window] * 1000})
    # 31 days at the 600 s default step: 4 463 interior multiples and 2 edges, 2 default spectra.
    _assert_413(response, "too-much-work", "sample_spectra", 1000 * (31 * 144 + 1) * 2, 6_000_000,
                "UVDOSE_MAX_SAMPLE_SPECTRA")
    assert no_engine == []


def test_month_long_routes_at_a_10_s_step_are_refused(client, no_engine):
    """Each route within the 31-day span a route may have, but sampled every 10 s."""
    def route(i):
        return {"id": f"van-{i}", "points": [{"time": "2026-05-01T00:00:00Z", "lat": 45.0, "lon": 5.0},
                                             {"time": "2026-06-01T00:00:00Z", "lat": 45.1, "lon": 5.1}]}

    per_route = (31 * 8640 + 2 * 2) * 2  # span over the step, two per point, 2 default spectra
    _assert_413(_post(client, "/v1/doses/routes", {"routes": [route(i) for i in range(30)], "step_s": 10}),
                "too-much-work", "sample_spectra", 30 * per_route, 6_000_000, "UVDOSE_MAX_SAMPLE_SPECTRA")
    problem = _assert_413(_post(client, "/v1/doses/routes", {"routes": [route(0)], "step_s": 10}),
                          "too-much-work", "record_sample_spectra", per_route, 250_000, "UVDOSE_CHUNK_SAMPLE_SPECTRA")
    assert (problem["index"], problem["id"]) == (0, "van-0")
    assert no_engine == []


def test_one_record_beyond_a_chunk_is_named(client, no_engine):
    records = [{"id": "short", "lat": 45.0, "lon": 5.0, "start": "2026-05-01T00:00:00Z",
                "end": "2026-05-01T12:00:00Z"},
               {"id": "month", "lat": 45.0, "lon": 5.0, "start": "2026-05-01T00:00:00Z",
                "end": "2026-06-01T00:00:00Z"}]
    response = _post(client, "/v1/doses/windows", {"records": records, "step_s": 30, "spectra": ALL_SPECTRA})
    problem = _assert_413(response, "too-much-work", "record_sample_spectra", (31 * 2880 + 1) * 8, 250_000,
                          "UVDOSE_CHUNK_SAMPLE_SPECTRA")
    assert (problem["index"], problem["id"]) == (1, "month")
    assert no_engine == []


def test_the_work_counted_is_the_work_done(make_app, contract_client_for):
    """Windows are counted exactly (the trapezoid's nodes); fields and routes by a bound that
    holds: what the answer reports as evaluated never exceeds what was counted."""
    client = contract_client_for(make_app(UVDOSE_MAX_SAMPLE_SPECTRA=1))
    cases = {
        "/v1/doses/windows": {"records": [{"lat": 45.0, "lon": 5.0, "start": "2026-05-01T05:07:00Z",
                                           "end": "2026-05-02T17:00:10Z"},
                                          {"lat": 60.0, "lon": 5.0, "start": "2026-06-01T00:00:00Z",
                                           "end": "2026-06-01T00:00:00Z"}], "step_s": 900},
        "/v1/doses/fields": dict(_fields(3, days=20), daily={"field": [0], "day": ["2026-01-02"], "ozone_du": [300]}),
        "/v1/doses/routes": {"routes": [{"points": [{"time": "2026-07-01T08:00:00Z", "lat": 45.0, "lon": 5.0},
                                                    {"time": "2026-07-01T09:13:00Z", "lat": 45.2, "lon": 5.1,
                                                     "stop": True},
                                                    {"time": "2026-07-01T10:00:00Z", "lat": 45.2, "lon": 5.1},
                                                    {"time": "2026-07-01T11:01:00Z", "lat": 45.3, "lon": 5.3}]}],
                             "parked_dose": True},
    }
    free = contract_client_for(make_app())
    for path, body in cases.items():
        asked = _post(client, path, body).get_json()["asked"]
        answer = _post(free, path, body).get_json()
        done = answer["samples"] * len(answer["spectra"])
        if path.endswith("windows"):
            assert done == asked, path
        else:
            assert done <= asked <= 3 * done, (path, done, asked)


def test_a_whole_answer_too_large_points_to_the_streamed_one(make_app, contract_client_for, no_engine):
    client = contract_client_for(make_app(UVDOSE_MAX_ANSWER_BYTES=100_000))
    body = _fields(10, days=60)
    estimate = work_bounds.answer_bytes("fields", "application/json", 600, 3, 600 * len('"parcel-00000"'))
    problem = _assert_413(_post(client, "/v1/doses/fields", body), "answer-too-large", "answer_bytes",
                          estimate, 100_000, "UVDOSE_MAX_ANSWER_BYTES")
    assert "application/x-ndjson" in problem["detail"]
    assert no_engine == []
    tight = contract_client_for(make_app(UVDOSE_MAX_STREAMED_ANSWER_BYTES=100_000))
    _assert_413(_post(tight, "/v1/doses/fields", body, "text/csv"), "answer-too-large", "answer_bytes",
                work_bounds.answer_bytes("fields", "text/csv", 600, 3, 600 * len('"parcel-00000"')), 100_000,
                "UVDOSE_MAX_STREAMED_ANSWER_BYTES")


@pytest.mark.parametrize("media_type", ["application/json", "application/x-ndjson", "text/csv"])
@pytest.mark.parametrize("spectra", [["erythema"], ALL_SPECTRA[:5]])
def test_the_answer_estimate_is_near_the_answer(client, media_type, spectra):
    """The estimate is at least the answer and not far above it (different places, days and
    spectra than the measurement behind ROW_BYTES)."""
    windows = [{"id": f"crew-{i}", "lat": -33.9 + i, "lon": 18.4, "start": "2026-01-10T06:00:00+02:00",
                "end": "2026-01-10T17:30:00+02:00"} for i in range(30)]
    route = {"id": "van-3", "points": [{"time": "2026-03-02T07:00:00Z", "lat": 52.0, "lon": 0.1},
                                       {"time": "2026-03-02T08:30:00Z", "lat": 52.3, "lon": 0.4},
                                       {"time": "2026-03-02T10:00:00Z", "lat": 52.4, "lon": 0.9}]}
    cases = [("windows", "/v1/doses/windows", {"records": windows, "spectra": spectra}, 30, 30),
             ("fields", "/v1/doses/fields", _fields(4, first="2026-08-01", days=15, spectra=spectra), 60, 60),
             ("routes", "/v1/doses/routes", {"routes": [route] * 30, "spectra": spectra}, 30, 30)]
    for kind, path, body, rows, ids in cases:
        response = _post(client, path, body, media_type)
        size = len(response.get_data())
        id_bytes = ids * len(json.dumps((body.get("records") or body["routes"])[0]["id"]))
        estimate = work_bounds.answer_bytes(kind, media_type, rows, len(spectra), id_bytes)
        assert size <= estimate <= 1.6 * size, (kind, size, estimate)


def test_chunks_hold_the_work_and_the_rows():
    work = np.array([5, 5, 5, 20, 1, 1, 1, 1])
    parts = work_bounds.record_chunks(work, chunk=10)
    assert parts == [slice(0, 2), slice(2, 3), slice(3, 4), slice(4, 8)]
    assert work_bounds.record_chunks(np.zeros(0, int), chunk=10) == []
    rows = work_bounds.record_chunks(np.ones(10_000, int), chunk=10**9, rows_per_record=366)
    assert {part.stop - part.start for part in rows[:-1]} == {work_bounds.CHUNK_ROWS // 366}
    assert rows[-1].stop == 10_000
