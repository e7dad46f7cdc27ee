"""Jobs on a real Dask cluster (the embedded local cluster: a scheduler and two worker
processes) with job metadata in a real Redis and the results store in a directory.

Every answer goes through the contract client (openapi.yaml). The rows of a job are
compared with the synchronous endpoint's for the same body: the job runs that endpoint
part by part, so they must be equal, member for member: text exactly, numbers to 1e-12
relative (the endpoint's own numbers move in the last bit with the batch's length, the
engine's matrix products being blocked by it: 6.954097741680513 for a record in a batch of
8 records against 6.954097741680517 in a batch of 3).
"""
from __future__ import annotations

import csv
import io
import os
import signal
import time
from pathlib import Path

import orjson
import pytest

from uvdose.service import jobs
from uvdose.service.app import create_app
from tests.service.contract_examples import examples
from tests.service.conftest import load_spec, running_gunicorn

SPEC = load_spec()
SYNC_PATHS = {"irradiance": "/v1/irradiance", "ozone": "/v1/ozone", "windows": "/v1/doses/windows",
              "fields": "/v1/doses/fields", "routes": "/v1/doses/routes"}
JOB_EXAMPLES = [e for e in examples(SPEC) if e.path.startswith("/v1/jobs/") and e.content_type == "application/json"]


@pytest.fixture
def make_jobs_app(dask_scheduler, tmp_path, redis_client, redis_url, contract_client_for):
    """(app, contract client) sharing one results store and one Redis database."""
    made = []

    def build(**config):
        settings = {"TESTING": True, "UVDOSE_DASK_SCHEDULER": dask_scheduler, "UVDOSE_JOBS_STORE": str(tmp_path / "store"),
                    "REDIS_URL": redis_url, "UVDOSE_CACHE": "off", "UVDOSE_REQUEST_LOG": False,
                    "UVDOSE_JOB_PART_WORK": 3, **config}
        app = create_app(settings)
        made.append(app)
        return app, contract_client_for(app)

    yield build
    for app in made:
        app.extensions[jobs.EXTENSION].close()


def wait_for(client, job_id: str, states=("succeeded", "failed", "cancelled"), timeout_s: float = 90.0) -> dict:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        status = client.get(f"/v1/jobs/{job_id}").get_json()
        if status["state"] in states:
            return status
        time.sleep(0.2)
    raise AssertionError(f"job {job_id} still {status['state']} after {timeout_s} s: {status}")


def same_rows(got, expected) -> bool:
    """Equal in structure and text, numbers to 1e-12 relative (see the module docstring)."""
    if isinstance(expected, dict):
        return isinstance(got, dict) and got.keys() == expected.keys() and all(
            same_rows(got[k], expected[k]) for k in expected)
    if isinstance(expected, list):
        return isinstance(got, list) and len(got) == len(expected) and all(map(same_rows, got, expected))
    if isinstance(expected, float) and isinstance(got, (int, float)) and not isinstance(got, bool):
        return got == pytest.approx(expected, rel=1e-12, abs=1e-300)
    return got == expected and type(got) is type(expected)


def ndjson_rows(response) -> list[dict]:
    assert response.status_code == 200, response.get_data(as_text=True)[:500]
    return [orjson.loads(line) for line in response.get_data().splitlines() if line]


def irradiance_records(n: int, start: int = 0) -> list[dict]:
    return [{"id": f"orchard-row-{i}", "lat": 44.0 + 0.01 * i, "lon": 4.9, "time": "2026-06-21T10:00:00Z"}
            for i in range(start, start + n)]


def test_every_operation_as_a_job_gives_the_synchronous_rows(make_jobs_app):
    # The contract's own example of each job operation (the body of its synchronous endpoint).
    app, client = make_jobs_app(UVDOSE_JOB_PART_WORK=30)
    assert {e.path.rsplit("/", 1)[1] for e in JOB_EXAMPLES} == set(SYNC_PATHS)
    submitted = {}
    for example in JOB_EXAMPLES:
        response = client.post(example.path, data=example.body, content_type=example.content_type)
        assert response.status_code == 202, response.get_data(as_text=True)[:800]
        assert response.headers["Location"] == f"/v1/jobs/{response.get_json()['id']}"
        submitted[example.path.rsplit("/", 1)[1]] = (example, response.get_json()["id"])
    fields_job = submitted["fields"][1]
    assert client.get(f"/v1/jobs/{fields_job}").get_json()["parts"] == 2  # 2 fields x 30 days, 30 a part
    for name, (example, job_id) in submitted.items():
        status = wait_for(client, job_id)
        assert status["state"] == "succeeded", status
        assert status["records_done"] == status["records"] and status["seconds_left_estimate"] == 0
        expected = client.post(SYNC_PATHS[name], data=example.body, content_type=example.content_type).get_json()
        assert same_rows(ndjson_rows(client.get(f"/v1/jobs/{job_id}/results")), expected["results"]), name


def test_a_job_takes_more_records_than_one_request_may(make_jobs_app):
    # 10 001 records: one more than a synchronous request may have (a 413), and valid under
    # the job's own request schema where the synchronous schema's maxItems refuses it.
    from openapi_schema_validator import OAS31Validator

    body = {"records": [{"id": f"orchard-tree-{i}", "lat": 44.0 + 1e-4 * i, "lon": 4.9, "time": "2026-06-21T10:00:00Z"}
                        for i in range(10_001)]}

    def valid(name: str) -> bool:
        return OAS31Validator({"$ref": f"#/components/schemas/{name}", "components": SPEC["components"]}).is_valid(body)

    assert valid("IrradianceRequestForJobs") and not valid("IrradianceRequest")
    app, client = make_jobs_app(UVDOSE_JOB_PART_WORK=5000)
    assert client.post(SYNC_PATHS["irradiance"], json=body).status_code == 413
    submitted = client.post("/v1/jobs/irradiance", json=body)
    assert submitted.status_code == 202
    status = wait_for(client, submitted.get_json()["id"], timeout_s=180)
    assert (status["state"], status["records_done"], status["parts"]) == ("succeeded", 10_001, 3)


def test_submit_poll_and_download_in_each_format(make_jobs_app):
    app, client = make_jobs_app()
    body = {"records": irradiance_records(8), "spectra": ["erythema", "plant_damage"]}
    job_id = client.post("/v1/jobs/irradiance", json=body).get_json()["id"]
    status = wait_for(client, job_id)
    assert status["state"] == "succeeded" and status["parts"] == 3 and status["parts_done"] == [0, 1, 2]
    assert status["finished"] and status["expires"]
    expected = client.post("/v1/irradiance", json=body).get_json()["results"]
    assert same_rows(ndjson_rows(client.get(f"/v1/jobs/{job_id}/results?format=ndjson")), expected)
    # Parts one by one, in order, make the whole.
    parts = [ndjson_rows(client.get(f"/v1/jobs/{job_id}/results/{p}")) for p in range(3)]
    assert same_rows([row for part in parts for row in part], expected) and [len(p) for p in parts] == [3, 3, 2]

    csv_answer = client.get(f"/v1/jobs/{job_id}/results", headers={"Accept": "text/csv"})
    assert csv_answer.mimetype == "text/csv"
    table = list(csv.DictReader(io.StringIO(csv_answer.get_data(as_text=True))))
    assert [row["id"] for row in table] == [row["id"] for row in expected]
    assert list(table[0])[-1] == "caution" and "not a measurement" in table[0]["caution"]
    assert same_rows([float(row["effective_w_m2.erythema"]) for row in table],
                     [r["effective_w_m2"]["erythema"] for r in expected])

    import pyarrow.parquet as pq

    parquet_answer = client.get(f"/v1/jobs/{job_id}/results?format=parquet")
    assert parquet_answer.mimetype == "application/vnd.apache.parquet"
    frame = pq.read_table(io.BytesIO(parquet_answer.get_data())).to_pydict()
    assert frame["id"] == [row["id"] for row in expected] and "not a measurement" in frame["caution"][0]
    assert same_rows(frame["uv_index"], [row["uv_index"] for row in expected])
    assert same_rows(frame["effective_w_m2.plant_damage"], [row["effective_w_m2"]["plant_damage"] for row in expected])


def test_field_days_come_one_row_each_in_csv(make_jobs_app):
    app, client = make_jobs_app(UVDOSE_JOB_PART_WORK=5)
    body = {"records": [{"id": f"block-{i}", "lat": 44.05, "lon": 4.92} for i in range(3)],
            "first_day": "2026-04-01", "last_day": "2026-04-03"}
    job_id = client.post("/v1/jobs/fields", json=body).get_json()["id"]
    assert wait_for(client, job_id)["parts"] == 3  # 3 field-days a field, 5 a part: one field each
    expected = client.post("/v1/doses/fields", json=body).get_json()["results"]
    table = list(csv.DictReader(io.StringIO(client.get(f"/v1/jobs/{job_id}/results?format=csv").get_data(as_text=True))))
    assert [(row["id"], row["day"]) for row in table] == [(f["id"], d["day"]) for f in expected for d in f["days"]]
    assert same_rows([float(row["dose_j_m2.erythema"]) for row in table],
                     [d["dose_j_m2"]["erythema"] for f in expected for d in f["days"]])


def test_csv_and_parquet_uploads_run_as_the_csv_body_does(make_jobs_app):
    import pyarrow as pa
    import pyarrow.parquet as pq

    app, client = make_jobs_app()
    text = "id,lat,lon,time\n" + "".join(f"p{i},{40 + i},5.5,2026-05-01T11:00:00Z\n" for i in range(5))
    expected = client.post("/v1/irradiance?spectra=erythema", data=text, content_type="text/csv",
                           headers={"Accept": "application/json"}).get_json()["results"]
    by_csv = client.post("/v1/jobs/irradiance?spectra=erythema", data=text, content_type="text/csv").get_json()["id"]
    table = pa.table({"id": [f"p{i}" for i in range(5)], "lat": [40.0 + i for i in range(5)], "lon": [5.5] * 5,
                      "time": pa.array([1777633200] * 5, pa.timestamp("s", tz="UTC"))})
    data = io.BytesIO()
    pq.write_table(table, data)
    by_parquet = client.post("/v1/jobs/irradiance?spectra=erythema", data=data.getvalue(),
                             content_type="application/vnd.apache.parquet").get_json()["id"]
    for job_id in (by_csv, by_parquet):
        assert wait_for(client, job_id)["state"] == "succeeded"
        assert same_rows(ndjson_rows(client.get(f"/v1/jobs/{job_id}/results")), expected)


def test_a_bad_upload_is_refused_with_every_record_named_and_nothing_written(make_jobs_app, tmp_path, redis_client):
    app, client = make_jobs_app()
    text = ("id,lat,lon,time\na,44,4.9,2026-06-21T10:00:00Z\nb,95,4.9,2026-06-21T10:00:00Z\n"
            "c,44,4.9,2026-06-21T10:00:00Z\nd,44,4.9,not-a-time\n")
    refused = client.post("/v1/jobs/irradiance", data=text, content_type="text/csv")
    synchronous = client.post("/v1/irradiance", data=text, content_type="text/csv")
    assert refused.status_code == 422 and refused.get_json() == synchronous.get_json()
    named = {(e["index"], e["id"], e["field"]) for e in refused.get_json()["errors"]}
    assert named == {(1, "b", "lat"), (3, "d", "time")}
    # An option only the endpoint itself checks (the season's length), through the probe.
    season = client.post("/v1/jobs/fields", json={"records": [{"id": "x", "lat": 1, "lon": 2}],
                                                   "first_day": "2026-05-01", "last_day": "2026-04-01"})
    assert season.status_code == 422 and season.get_json()["errors"][0]["field"] == "last_day"
    assert not (tmp_path / "store").exists() or not any((tmp_path / "store").iterdir())
    assert not list(redis_client.scan_iter(match="*job:*"))


def _daily_body(bad_field: int) -> dict:
    # Six fields over three days; the daily table lists its entries out of field order, and
    # its sixth entry (position 5), for field ``bad_field``, gives an impossible ozone column.
    fields_of = [3, 0, 5, 1, 4, 0, 2]
    fields_of[5] = bad_field
    return {"records": [{"id": f"plot-{i}", "lat": 43.6 + 0.1 * i, "lon": 1.4} for i in range(6)],
            "first_day": "2026-06-01", "last_day": "2026-06-03", "spectra": ["erythema"],
            "daily": {"field": fields_of, "day": ["2026-06-02"] * 5 + ["2026-06-03", "2026-06-01"],
                      "ozone_du": [310, 305, 298, 320, 315, 9000, 300]}}


@pytest.mark.parametrize("bad_field", [0, 4])
def test_a_bad_daily_entry_is_named_at_submission_by_its_place_in_the_submitted_table(make_jobs_app, tmp_path,
                                                                                       bad_field):
    # Each part would hold one field and its entries, re-indexed; the submission's check
    # reads the tables whole, so the error names entry 5 of the table as sent, as the
    # synchronous endpoint does, whether the entry is the first part's (field 0) or a later
    # one's (field 4), and nothing is stored.
    app, client = make_jobs_app(UVDOSE_JOB_PART_WORK=3)
    body = _daily_body(bad_field)
    synchronous = client.post(SYNC_PATHS["fields"], json=body).get_json()
    assert [e["field"] for e in synchronous["errors"]] == ["daily.ozone_du[5]"]
    submitted = client.post("/v1/jobs/fields", json=body)
    assert submitted.status_code == 422 and submitted.get_json()["errors"] == synchronous["errors"]
    assert not (tmp_path / "store").exists() or not any((tmp_path / "store").iterdir())


def test_a_bad_window_of_a_later_part_is_named_at_submission(make_jobs_app, tmp_path):
    # Window 3 lasts 40 days (at most 31): a check of the endpoint beyond the schemas, which
    # the one-record probe (window 0) cannot see; the whole-body check names it at once.
    app, client = make_jobs_app(UVDOSE_JOB_PART_WORK=1)
    windows = [{"id": f"crew-{i}", "start": "2026-06-01T06:00:00Z", "end": "2026-06-01T12:00:00Z",
                "lat": 44.05, "lon": 4.92} for i in range(4)]
    windows[3]["end"] = "2026-07-11T06:00:00Z"
    body = {"records": windows}
    synchronous = client.post(SYNC_PATHS["windows"], json=body).get_json()
    assert [(e["index"], e["field"]) for e in synchronous["errors"]] == [(3, "end")]
    submitted = client.post("/v1/jobs/windows", json=body)
    assert submitted.status_code == 422 and submitted.get_json()["errors"] == synchronous["errors"]
    assert not (tmp_path / "store").exists() or not any((tmp_path / "store").iterdir())


def test_an_implausible_measurement_of_a_later_part_is_named_at_submission(make_jobs_app):
    # Record 4 gives a measured global irradiance of 1 400 W m-2 at 08:00 local time in June
    # (well over 1.5 times the clear sky): the irradiance endpoint's own check, beyond the
    # schemas, reached by the whole-body check rather than by the one-record probe.
    app, client = make_jobs_app(UVDOSE_JOB_PART_WORK=2)
    records = irradiance_records(6)
    records[4] = {**records[4], "time": "2026-06-21T06:00:00Z", "measured_ghi_w_m2": 1400.0}
    body = {"records": records}
    synchronous = client.post(SYNC_PATHS["irradiance"], json=body).get_json()
    assert [(e["index"], e["field"]) for e in synchronous["errors"]] == [(4, "measured_ghi_w_m2")]
    submitted = client.post("/v1/jobs/irradiance", json=body)
    assert submitted.status_code == 422 and submitted.get_json()["errors"] == synchronous["errors"]


def test_a_parts_table_entries_are_renamed_by_their_place_in_the_submitted_table():
    # A part's problem (an error found only when the part runs) is renamed as the whole
    # submission: records from the part's first, table entries by their kept positions.
    from uvdose.service.job_operations import batch_wide

    problem = {"errors": [{"index": 1, "id": "plot-4", "field": "weather.ghi_w_m2[2]", "reason": "r"},
                          {"index": None, "id": None, "field": "daily.ozone_du[0]", "reason": "r"},
                          {"index": 0, "id": "plot-3", "field": "lat", "reason": "r"}]}
    named = batch_wide(problem, 3, {"daily": [5, 9], "weather": [40, 41, 57]})
    assert [(e["index"], e["field"]) for e in named["errors"]] == [
        (4, "weather.ghi_w_m2[57]"), (None, "daily.ozone_du[5]"), (3, "lat")]


def test_a_second_app_instance_reads_the_job(make_jobs_app):
    first_app, first = make_jobs_app()
    second_app, second = make_jobs_app()
    body = {"records": irradiance_records(7)}
    job_id = first.post("/v1/jobs/irradiance", json=body).get_json()["id"]
    status = wait_for(second, job_id)
    assert status["state"] == "succeeded" and status["id"] == job_id
    assert ndjson_rows(second.get(f"/v1/jobs/{job_id}/results")) == ndjson_rows(first.get(f"/v1/jobs/{job_id}/results"))


def _season_body(n_fields: int) -> dict:
    return {"records": [{"id": f"field-{i:03d}", "lat": 40 + i * 0.1, "lon": 3.0} for i in range(n_fields)],
            "first_day": "2026-01-01", "last_day": "2026-12-31", "spectra": ["erythema"]}


def _ids_once(client, job_id: str, n: int) -> None:
    rows = ndjson_rows(client.get(f"/v1/jobs/{job_id}/results"))
    assert [row["id"] for row in rows] == [f"field-{i:03d}" for i in range(n)]  # each once, in order


def test_the_job_survives_the_api_instance_that_accepted_it(make_jobs_app):
    # The accepting instance goes away mid-job (its Dask client closes, so the scheduler
    # drops the tasks it held); a new instance on the same store and Redis finishes it.
    first_app, first = make_jobs_app(UVDOSE_JOB_PART_WORK=365)
    job_id = first.post("/v1/jobs/fields", json=_season_body(16)).get_json()["id"]
    wait_for(first, job_id, states=("running",))
    first_app.extensions[jobs.EXTENSION].close()
    time.sleep(0.5)
    second_app, second = make_jobs_app(UVDOSE_JOB_PART_WORK=365)
    midway = second.get(f"/v1/jobs/{job_id}").get_json()  # this look resumes it
    assert 0 < len(midway["parts_done"]) < 16, midway
    assert wait_for(second, job_id)["state"] == "succeeded"
    _ids_once(second, job_id, 16)


def test_a_worker_killed_mid_job_costs_nothing_but_time(make_jobs_app, dask_scheduler):
    from distributed import Client

    app, client = make_jobs_app(UVDOSE_JOB_PART_WORK=365)
    job_id = client.post("/v1/jobs/fields", json=_season_body(14)).get_json()["id"]
    wait_for(client, job_id, states=("running",))
    with Client(dask_scheduler, set_as_default=False) as observer:
        busy = {address for address, tasks in observer.processing().items() if tasks}
        pids = observer.run(os.getpid)
        victim = next(iter(busy or pids))
        os.kill(pids[victim], signal.SIGKILL)
    status = wait_for(client, job_id, timeout_s=120)
    assert status["state"] == "succeeded" and status["records_done"] == 14
    _ids_once(client, job_id, 14)


def test_cancel_stops_the_job(make_jobs_app, tmp_path):
    app, client = make_jobs_app(UVDOSE_JOB_PART_WORK=365)
    # 60 parts of about 0.05 s each: the job is still running when the cancel arrives,
    # however loaded the machine (a part's time and the poll's scale together).
    job_id = client.post("/v1/jobs/fields", json=_season_body(60)).get_json()["id"]
    wait_for(client, job_id, states=("running",))
    cancelled = client.delete(f"/v1/jobs/{job_id}")
    assert cancelled.status_code == 200 and cancelled.get_json()["state"] == "cancelled"
    time.sleep(2.0)  # a part running when cancelled may still land; no new one starts
    settled = client.get(f"/v1/jobs/{job_id}").get_json()
    assert settled["state"] == "cancelled" and len(settled["parts_done"]) < 60 and settled["expires"]
    time.sleep(1.0)
    assert client.get(f"/v1/jobs/{job_id}").get_json()["parts_done"] == settled["parts_done"]
    assert client.get(f"/v1/jobs/{job_id}/results").status_code == 409


def test_a_finished_job_expires(make_jobs_app, tmp_path, redis_client):
    app, client = make_jobs_app(UVDOSE_JOB_TTL_S=1.0)
    job_id = client.post("/v1/jobs/irradiance", json={"records": irradiance_records(2)}).get_json()["id"]
    assert wait_for(client, job_id)["state"] == "succeeded"
    assert (tmp_path / "store" / job_id / "parts").is_dir()
    time.sleep(1.5)
    gone = client.get(f"/v1/jobs/{job_id}")
    assert gone.status_code == 404 and gone.get_json()["type"] == "urn:uvdose:problem:job-not-found"
    assert not (tmp_path / "store" / job_id).exists()
    assert not list(redis_client.scan_iter(match=f"*job:{job_id}"))


def test_metadata_on_local_disk_without_redis(dask_scheduler, tmp_path, contract_client_for):
    app = create_app({"TESTING": True, "UVDOSE_DASK_SCHEDULER": dask_scheduler, "UVDOSE_JOBS_STORE": str(tmp_path / "s"),
                      "UVDOSE_JOBS_METADATA_DIR": str(tmp_path / "m"), "UVDOSE_REQUEST_LOG": False,
                      "REDIS_URL": None})  # not the environment's Redis (CI sets REDIS_URL)
    client = contract_client_for(app)
    try:
        job_id = client.post("/v1/jobs/ozone", json={"records": [{"id": "a", "lat": 1, "lon": 2,
                                                                   "date": "2026-01-01"}]}).get_json()["id"]
        assert wait_for(client, job_id)["state"] == "succeeded"
        assert (Path(tmp_path / "m") / f"{job_id}.json").is_file()
    finally:
        app.extensions[jobs.EXTENSION].close()


def test_unknown_jobs_parts_and_formats(make_jobs_app):
    app, client = make_jobs_app()
    unknown = client.get("/v1/jobs/0f8e2c4a9b7d4e1f8a6c3b5d7e9f1a2c")
    assert unknown.status_code == 404 and unknown.get_json()["type"] == "urn:uvdose:problem:job-not-found"
    assert client.delete("/v1/jobs/0f8e2c4a9b7d4e1f8a6c3b5d7e9f1a2c").status_code == 404
    job_id = client.post("/v1/jobs/irradiance", json={"records": irradiance_records(1)}).get_json()["id"]
    wait_for(client, job_id)
    assert client.get(f"/v1/jobs/{job_id}/results/7").status_code == 404
    wrong = client.get(f"/v1/jobs/{job_id}/results?format=xlsx")
    assert wrong.status_code == 422 and wrong.get_json()["errors"][0]["field"] == "format"
    assert client.get(f"/v1/jobs/{job_id}/results", headers={"Accept": "application/xml"}).status_code == 406


# --- through gunicorn: the Python client, and an API restarted mid-job -----------------------

def _served(scheduler, tmp_path, **settings) -> dict[str, str]:
    return {"UVDOSE_DASK_SCHEDULER": scheduler, "UVDOSE_JOBS_STORE": str(tmp_path / "store"),
            "UVDOSE_JOBS_METADATA_DIR": str(tmp_path / "metadata"), "UVDOSE_CACHE": "off",
            "UVDOSE_REQUEST_LOG": "off", **settings}


def test_the_python_client_submits_waits_and_downloads(dask_scheduler, tmp_path_factory, tmp_path):
    import httpx
    import pyarrow.parquet as pq

    from uvdose.client import Client, InvalidRecords

    body = {"records": irradiance_records(7)}
    with running_gunicorn(tmp_path_factory, **_served(dask_scheduler, tmp_path, UVDOSE_JOB_PART_WORK="3")) as base_url:
        expected = httpx.post(base_url + "/v1/irradiance", json=body).json()["results"]
        with Client(base_url) as uv:
            job = uv.jobs.submit("/v1/irradiance", body)
            status = uv.jobs.wait(job, progress=False, poll_s=0.2, timeout_s=90)
            assert status["state"] == "succeeded" and status["parts"] == 3
            assert same_rows(list(uv.jobs.rows(job)), expected)
            assert same_rows(list(uv.jobs.rows(job, part=2)), expected[6:])
            table = pq.read_table(uv.jobs.download(job, tmp_path / "rows.parquet")).to_pydict()
            assert table["id"] == [row["id"] for row in expected]
            text = uv.jobs.download(job, tmp_path / "rows.csv").read_text()
            assert text.splitlines()[0].startswith("id,") and len(text.splitlines()) == 8
            with pytest.raises(InvalidRecords) as refused:
                uv.jobs.submit("irradiance", {"records": [{"id": "x", "lat": 91, "lon": 0, "time": "2026-01-01T00:00:00Z"}]})
            assert [(e.index, e.field) for e in refused.value.errors] == [(0, "lat")]


def test_a_job_finishes_after_its_api_server_is_restarted(dask_scheduler, tmp_path_factory, tmp_path):
    # The server is killed (master and workers, SIGKILL: a lost host) as soon as the job
    # runs, so the scheduler drops its tasks at once; only the parts then on a worker land.
    # A new server on the same store finishes the job from its first look at it. (A
    # graceful stop would not do here: its Dask clients stay until the workers exit, and
    # the job's 40 parts of about 0.05 s each could all be written by then.)
    import subprocess

    import httpx

    n_fields = 40
    settings = _served(dask_scheduler, tmp_path, UVDOSE_JOB_PART_WORK="365")
    with running_gunicorn(tmp_path_factory, **settings) as base_url:
        job_id = httpx.post(base_url + "/v1/jobs/fields", json=_season_body(n_fields)).json()["id"]
        deadline = time.monotonic() + 60
        while httpx.get(f"{base_url}/v1/jobs/{job_id}").json()["state"] != "running":
            assert time.monotonic() < deadline
            time.sleep(0.05)
        port = base_url.rsplit(":", 1)[1]
        # gunicorn's master and its forked workers share the command line that names the port.
        for pid in subprocess.run(["pgrep", "-f", f"127.0.0.1:{port}"], capture_output=True, text=True).stdout.split():
            os.kill(int(pid), signal.SIGKILL)
    parts = tmp_path / "store" / job_id / "parts"
    time.sleep(1.0)  # the parts on a worker when the server died land
    written_while_down = len(list(parts.glob("*.ndjson")))
    assert written_while_down < n_fields
    with running_gunicorn(tmp_path_factory, **settings) as base_url:
        first_look = httpx.get(f"{base_url}/v1/jobs/{job_id}").json()
        assert first_look["state"] in ("running", "queued") and len(first_look["parts_done"]) < n_fields, first_look
        deadline = time.monotonic() + 120
        while (status := httpx.get(f"{base_url}/v1/jobs/{job_id}").json())["state"] != "succeeded":
            assert time.monotonic() < deadline and status["state"] == "running", status
            time.sleep(0.2)
        rows = [orjson.loads(line) for line in httpx.get(f"{base_url}/v1/jobs/{job_id}/results").content.splitlines()]
    assert [row["id"] for row in rows] == [f"field-{i:03d}" for i in range(n_fields)]


def test_uvdose_serve_starts_its_own_cluster_with_no_set_up(tmp_path):
    # No scheduler named: `uvdose serve` starts the embedded cluster for its workers, and
    # stops it with itself.
    import subprocess
    import sys

    import httpx

    from tests.service.conftest import free_loopback_port, stop, wait_until_answers

    port = free_loopback_port()
    env = {key: value for key, value in os.environ.items()
           if not key.startswith(("UVDOSE_", "PROMETHEUS_", "REDIS_"))}
    env.update(UVDOSE_WORKERS="2", UVDOSE_DASK_WORKERS="1", UVDOSE_JOBS_STORE=str(tmp_path / "store"),
               UVDOSE_JOBS_METADATA_DIR=str(tmp_path / "metadata"), UVDOSE_REQUEST_LOG="off")
    process = subprocess.Popen([sys.executable, "-m", "uvdose.service.cli", "serve", "--bind", f"127.0.0.1:{port}"],
                               cwd=tmp_path, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    base = f"http://127.0.0.1:{port}"
    try:
        wait_until_answers(base + "/livez", process, timeout_s=60)
        job_id = httpx.post(base + "/v1/jobs/ozone", json={"records": [
            {"id": "depot", "lat": 45.75, "lon": 4.85, "date": "2026-04-14"}]}).json()["id"]
        deadline = time.monotonic() + 120
        while (status := httpx.get(f"{base}/v1/jobs/{job_id}").json())["state"] != "succeeded":
            assert time.monotonic() < deadline and status["state"] in ("queued", "running"), status
            time.sleep(0.3)
        rows = [orjson.loads(line) for line in httpx.get(f"{base}/v1/jobs/{job_id}/results").content.splitlines()]
        assert [row["id"] for row in rows] == ["depot"] and rows[0]["ozone_du"] > 200
        children = subprocess.run(["pgrep", "-P", str(process.pid)], capture_output=True, text=True).stdout.split()
        cluster = [pid for pid in children if b"dask_local_cluster" in Path(f"/proc/{pid}/cmdline").read_bytes()]
        assert cluster, "the embedded cluster runs beside the server"
        process.send_signal(signal.SIGTERM)
        assert process.wait(timeout=60) == 0
        time.sleep(1.0)
        assert not any(Path(f"/proc/{pid}").exists() for pid in cluster), "the cluster stops with the server"
    finally:
        stop(process)
