"""The dose endpoints' other answers: NDJSON and CSV streamed chunk by chunk, and the column
layout, hold the same rows as the whole JSON answer; chunking changes no figure; the first
bytes leave before the last chunk is computed; a streamed answer that fails says so."""
import csv
import io
import json
import subprocess
import sys
import textwrap

import pytest

from uvdose.models import engine
from uvdose.service import answer_streams
from uvdose.service.wire_formats import csv_cell

WINDOWS = {"records": [{"id": f"crew-{i}", "lat": 44.0 + 0.5 * i, "lon": 4.9, "start": "2026-06-22T06:30:00+02:00",
                        "end": "2026-06-22T18:30:00+02:00", "cloud_oktas": i % 9} for i in range(7)],
           "weather": {"window": [2, 2, 2], "time": ["2026-06-22T07:00:00+02:00", "2026-06-22T07:10:00+02:00",
                                                     "2026-06-22T07:20:00+02:00"], "cloud_factor": [0.9, 0.5, 0.7]}}
FIELDS = {"records": [{"id": f"block-{i}", "lat": 44.0 + i, "lon": 4.9 - i} for i in range(5)],
          "first_day": "2026-04-01", "last_day": "2026-04-09", "spectra": ["plant_damage", "erythema"],
          "daily": {"field": [1, 3], "day": ["2026-04-02", "2026-04-05"], "cloud_oktas": [6, 3]}}
ROUTES = {"routes": [{"id": f"van-{i}", "points": [
    {"time": "2026-07-15T07:30:00+01:00", "lat": 51.5, "lon": -0.1 + 0.01 * i},
    {"time": "2026-07-15T08:10:00+01:00", "lat": 51.55, "lon": -0.02, "stop": True},
    {"time": "2026-07-15T09:00:00+01:00", "lat": 51.55, "lon": -0.02},
    {"time": "2026-07-15T10:20:00+01:00", "lat": 51.6, "lon": 0.1}]} for i in range(6)],
    "spectra": ["erythema", "actinic_icnirp"], "parked_dose": True}
CASES = {"/v1/doses/windows": WINDOWS, "/v1/doses/fields": FIELDS, "/v1/doses/routes": ROUTES}


def _post(client, path, body, accept="application/json"):
    response = client.post(path, data=json.dumps(body), content_type="application/json", headers={"Accept": accept})
    assert response.status_code == 200, response.get_data(as_text=True)[:500]
    assert response.mimetype == accept
    return response


def _result_rows(path, answer):
    """The JSON answer's result rows, one per field and day for fields (with the field's id)."""
    if path.endswith("fields"):
        return [{"id": result["id"], **day} for result in answer["results"] for day in result["days"]]
    return answer["results"]


def _assert_close(got, expected, where="answer"):
    """Equal, numbers to 1e-12 relative (not ==: BLAS blocks its products by batch size)."""
    if isinstance(expected, dict):
        assert isinstance(got, dict) and list(got) == list(expected), where
        for key in expected:
            _assert_close(got[key], expected[key], f"{where}.{key}")
    elif isinstance(expected, list):
        assert isinstance(got, list) and len(got) == len(expected), where
        for index, (a, b) in enumerate(zip(got, expected)):
            _assert_close(a, b, f"{where}[{index}]")
    elif isinstance(expected, float) and not isinstance(got, bool):
        assert got == pytest.approx(expected, rel=1e-12, abs=1e-300), where
    else:
        assert got == expected, where


@pytest.fixture
def chunked(make_app, contract_client_for):
    """A client whose dose requests are computed a few records per chunk (cache off, so that
    every chunking evaluates the same states)."""
    return contract_client_for(make_app(UVDOSE_CHUNK_SAMPLE_SPECTRA=300, UVDOSE_CACHE="off"))


@pytest.fixture
def whole(make_app, contract_client_for):
    return contract_client_for(make_app(UVDOSE_CACHE="off"))


@pytest.mark.parametrize("path", CASES)
def test_chunks_change_no_figure(path, chunked, whole):
    one, many = (_post(client, path, CASES[path]).get_json() for client in (whole, chunked))
    _assert_close(many, one)
    body = CASES[path]
    assert len(_result_rows(path, many)) == (5 * 9 if path.endswith("fields") else len(body.get("records") or body["routes"]))


@pytest.mark.parametrize("path", CASES)
def test_ndjson_holds_the_json_rows_line_for_line(path, chunked):
    answer = _post(chunked, path, CASES[path]).get_json()
    lines = [json.loads(line) for line in _post(chunked, path, CASES[path], "application/x-ndjson").get_data(
        as_text=True).splitlines()]
    envelope, rows, complete = lines[0], lines[1:-1], lines[-1]
    expected = answer["results"]  # for fields one line per field with its days, as the jobs' downloads
    assert envelope == {"envelope": {k: v for k, v in answer.items() if k not in ("results", "samples")}}
    assert rows == expected
    assert complete == {"complete": {"results": len(expected), "samples": answer["samples"]}}


@pytest.mark.parametrize("path", CASES)
def test_csv_holds_the_json_rows_flattened(path, chunked):
    answer = _post(chunked, path, CASES[path]).get_json()
    table = list(csv.reader(io.StringIO(_post(chunked, path, CASES[path], "text/csv").get_data(as_text=True))))
    header, lines = table[0], table[1:]
    flat = [answer_streams.flat_row(row) for row in _result_rows(path, answer)]
    assert header == [*flat[0], "caution"]
    assert len(lines) == len(flat)
    for line, row in zip(lines, flat):
        assert line[:-1] == ["" if csv_cell(v) is None else str(csv_cell(v)) for v in row.values()]
        assert line[-1].startswith(answer["caution"])
    if path.endswith("windows"):  # a float reads back exactly (repr round-trips)
        assert float(lines[3][header.index("dose_j_m2.erythema")]) == answer["results"][3]["dose_j_m2"]["erythema"]


@pytest.mark.parametrize("path", CASES)
def test_the_column_layout_holds_the_json_rows(path, chunked):
    rows = _result_rows(path, _post(chunked, path, CASES[path]).get_json())
    answer = _post(chunked, path, dict(CASES[path], answer_layout="columns")).get_json()
    columns = answer["columns"]
    flat = [answer_streams.flat_row(row) for row in rows]
    assert list(columns) == list(flat[0])
    assert [dict(zip(columns, values)) for values in zip(*columns.values())] == flat
    assert "results" not in answer and answer["samples"] > 0


def test_a_columns_request_is_answered_in_columns(chunked):
    records = WINDOWS["records"]
    body = {"columns": {key: [record.get(key) for record in records] for key in records[0]}}
    answer = _post(chunked, "/v1/doses/windows", body).get_json()
    assert answer["columns"]["id"] == [record["id"] for record in records]


def _counting_engine(monkeypatch):
    calls = []
    original = engine.compute

    def compute(*args, **kwargs):
        calls.append(1)
        return original(*args, **kwargs)

    monkeypatch.setattr(engine, "compute", compute)
    return calls


@pytest.mark.parametrize("accept", ["application/x-ndjson", "text/csv"])
def test_the_first_bytes_leave_before_the_last_chunk_is_computed(make_app, monkeypatch, accept):
    app = make_app(UVDOSE_CHUNK_SAMPLE_SPECTRA=300, UVDOSE_CACHE="off")
    calls = _counting_engine(monkeypatch)
    response = app.test_client().post("/v1/doses/fields", data=json.dumps(FIELDS), content_type="application/json",
                                      headers={"Accept": accept}, buffered=False)
    assert response.status_code == 200 and response.is_streamed
    chunks = iter(response.response)
    next(chunks)
    at_first_bytes = len(calls)
    rest = b"".join(chunks)
    assert 0 < at_first_bytes < len(calls), (at_first_bytes, len(calls))
    assert rest


def test_a_streamed_answer_that_fails_part_way_says_so(make_app, monkeypatch):
    app = make_app(UVDOSE_CHUNK_SAMPLE_SPECTRA=300, UVDOSE_CACHE="off")
    calls = _counting_engine(monkeypatch)
    original = engine.compute

    def failing(*args, **kwargs):
        if len(calls) > 2:
            raise RuntimeError("disk on fire")
        calls.append(1)
        return original(*args, **kwargs)

    monkeypatch.setattr(engine, "compute", failing)
    response = app.test_client().post("/v1/doses/windows", data=json.dumps(WINDOWS), content_type="application/json",
                                      headers={"Accept": "application/x-ndjson"})
    lines = [json.loads(line) for line in response.get_data(as_text=True).splitlines()]
    assert response.status_code == 200  # sent before the failure
    assert "envelope" in lines[0] and "complete" not in lines[-1]
    assert lines[-1]["error"]["status"] == 500 and "incomplete" in lines[-1]["error"]["detail"]
    assert "disk on fire" not in json.dumps(lines[-1])  # no internals in the answer


_PEAK = textwrap.dedent("""
    import json, sys
    from uvdose.service.app import create_app

    def status(key):  # kB, from the kernel's view of this process
        line = next(l for l in open("/proc/self/status") if l.startswith(key + ":"))
        return int(line.split()[1])

    accept = sys.argv[1]
    app = create_app({"TESTING": True, "UVDOSE_CACHE": "off", "UVDOSE_CHUNK_SAMPLE_SPECTRA": 20000,
                      "UVDOSE_MAX_ANSWER_BYTES": 10**9, "UVDOSE_REQUEST_LOG": "off"})
    records = [{"id": f"f{i}", "lat": 35 + i * 0.2, "lon": 2.0} for i in range(40)]
    body = {"records": records, "first_day": "2026-03-01", "last_day": "2026-06-28",
            "spectra": ["erythema", "actinic_icnirp", "plant_damage", "plant_growth", "dna_damage", "uva"]}
    client = app.test_client()
    warm = client.post("/v1/doses/fields", json=dict(body, records=records[:4]), headers={"Accept": accept},
                       buffered=False)
    assert sum(len(chunk) for chunk in warm.response)
    with open("/proc/self/clear_refs", "w") as reset:  # the peak (VmHWM) starts again from now
        reset.write("5")
    before = status("VmRSS")
    response = client.post("/v1/doses/fields", json=body, headers={"Accept": accept}, buffered=False)
    size = sum(len(chunk) for chunk in response.response)
    print(json.dumps({"bytes": size, "grown_kib": status("VmHWM") - before}))
""")



def _peak(accept):
    done = subprocess.run([sys.executable, "-c", _PEAK, accept], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_a_streamed_answer_holds_one_chunk_at_a_time():
    """40 fields × 120 days at 6 spectra (4 800 rows, about 15 MB of NDJSON), computed one
    field per chunk: once a 4-field answer has run, the streamed answer's peak resident
    memory (the kernel's VmHWM, reset before the request) grows by little, the whole JSON
    answer's by several times as much (a fresh process each; generous bounds). Measured:
    streamed +17 MiB, whole +58 MiB."""
    streamed, whole = _peak("application/x-ndjson"), _peak("application/json")
    assert streamed["bytes"] > 10_000_000
    assert streamed["grown_kib"] < 30 * 1024, streamed
    assert streamed["grown_kib"] < whole["grown_kib"] / 2, (streamed, whole)


def test_a_streamed_answer_past_its_deadline_ends_with_the_deadline_problem(make_app, monkeypatch):
    from uvdose.service import request_deadline

    app = make_app(UVDOSE_CHUNK_SAMPLE_SPECTRA=300, UVDOSE_CACHE="off")
    calls = _counting_engine(monkeypatch)
    clock = {"now": 0.0}
    monkeypatch.setattr(request_deadline.time, "monotonic", lambda: clock["now"] + (1000.0 if len(calls) > 2 else 0.0))
    response = app.test_client().post("/v1/doses/windows", data=json.dumps(WINDOWS), content_type="application/json",
                                      headers={"Accept": "application/x-ndjson"})
    last = json.loads(response.get_data(as_text=True).splitlines()[-1])
    assert response.status_code == 200
    assert last["error"]["type"] == "urn:uvdose:problem:deadline-exceeded" and last["error"]["status"] == 503
    assert "incomplete" in last["error"]["detail"]


def test_the_dose_csv_neutralises_formula_ids(chunked):
    """The streamed CSV writes every cell through the one CSV cell writer, so an id a
    spreadsheet would run as a formula comes back with the leading quote (README, CSV rule)."""
    records = [dict(WINDOWS["records"][0], id="=cmd|' /C calc'!A0"), dict(WINDOWS["records"][1], id="+1")]
    table = list(csv.reader(io.StringIO(_post(chunked, "/v1/doses/windows", {"records": records}, "text/csv")
                                        .get_data(as_text=True))))
    assert [row[0] for row in table[1:]] == ["'=cmd|' /C calc'!A0", "'+1"]
