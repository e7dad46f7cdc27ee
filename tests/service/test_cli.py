"""The uvdose command: batches as jobs on a Dask cluster through the same endpoints, and `serve`.

The batches run on one embedded cluster for the module (two worker processes), named to the
command by ``UVDOSE_DASK_SCHEDULER`` as an operator would (``--scheduler`` is tested too).
"""
import csv
import io
import json
import os
import signal
import subprocess
import sys
import urllib.request

import pytest

from uvdose.service.cli import EXIT_INVALID, main, run_batch
from tests.service.conftest import REPO, free_loopback_port, stop, wait_until_answers

@pytest.fixture(scope="module", autouse=True)
def dask_scheduler():
    from uvdose.service import job_cluster

    with pytest.MonkeyPatch.context() as environment:
        environment.setenv("UVDOSE_CACHE", "off")  # exact inputs, as the HTTP comparisons below
        process, address = job_cluster.start_embedded(2)
        environment.setenv("UVDOSE_DASK_SCHEDULER", address)
        yield address
        job_cluster.stop_embedded(process)


# Demo scenario of our own: hourly checks on the invented "Combe Basse" orchard, 20 June.
HOURS = [f"2026-06-20T{h:02d}:00:00+02:00" for h in range(5, 22)]


def _write_csv(path, rows):
    with open(path, "w", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=list(rows[0]))
        writer.writeheader()
        writer.writerows(rows)


def _records():
    return [{"id": f"h{index}", "time": time, "lat": 44.05, "lon": 4.92, "elevation_m": 120}
            for index, time in enumerate(HOURS)]


def test_batch_csv_to_csv_in_chunks_equals_one_http_request(tmp_path, make_app, contract_client_for):
    client = contract_client_for(make_app(UVDOSE_CACHE="off"))  # exact inputs, as offline
    source, target = tmp_path / "hours.csv", tmp_path / "out.csv"
    _write_csv(source, _records())
    assert run_batch(str(source), str(target), chunk_size=4, spectra=["erythema"], progress=False) == 0
    rows = list(csv.DictReader(io.StringIO(target.read_text())))
    assert [row["id"] for row in rows] == [f"h{i}" for i in range(len(HOURS))]
    http = client.post("/v1/irradiance", json={"records": _records(), "spectra": ["erythema"]}).get_json()
    for row, result in zip(rows, http["results"]):
        assert float(row["uv_index"]) == pytest.approx(result["uv_index"], rel=1e-9, abs=1e-12)


def test_batch_json_to_json_keeps_the_response_shape(tmp_path):
    source, target = tmp_path / "hours.json", tmp_path / "out.json"
    source.write_text(json.dumps({"records": _records(), "spectra": ["plant_growth"]}))
    assert main(["batch", str(source), str(target), "--chunk-size", "5", "--no-progress"]) == 0
    body = json.loads(target.read_text())
    assert body["spectra"] == ["plant_growth"]
    overridden = tmp_path / "overridden.json"
    assert main(["batch", str(source), str(overridden), "--spectra", "uva", "dna_damage", "--no-progress"]) == 0
    assert json.loads(overridden.read_text())["spectra"] == ["uva", "dna_damage"]  # the command line wins
    assert "not medical or occupational-health advice" in body["caution"]
    assert len(body["results"]) == len(HOURS)
    by_id = {r["id"]: r for r in body["results"]}
    assert by_id["h0"]["uv_index"] == 0  # 05:00 local, before sunrise
    assert by_id["h8"]["uv_index"] > 5  # 13:00 local on the solstice at 44° N


def test_chunking_does_not_change_the_numbers(tmp_path):
    source = tmp_path / "hours.csv"
    _write_csv(source, _records())
    whole, chunked = tmp_path / "whole.csv", tmp_path / "chunked.csv"
    run_batch(str(source), str(whole), chunk_size=1000, progress=False)
    run_batch(str(source), str(chunked), chunk_size=3, progress=False)
    # Vectorised arithmetic may differ in the last bits between batch sizes, no more.
    whole_rows = list(csv.DictReader(io.StringIO(whole.read_text())))
    chunked_rows = list(csv.DictReader(io.StringIO(chunked.read_text())))
    assert len(whole_rows) == len(chunked_rows) == len(HOURS)
    for a, b in zip(whole_rows, chunked_rows):
        assert a["id"] == b["id"] and a["exposure_category"] == b["exposure_category"]
        for name in ("solar_zenith_deg", "uv_index", "effective_w_m2.erythema", "uva_w_m2"):
            assert float(a[name]) == pytest.approx(float(b[name]), rel=1e-9, abs=1e-12)


def test_a_bad_file_is_rejected_whole_with_the_problem_on_stderr(tmp_path, capsys):
    records = _records()
    records[5]["lat"] = "95"
    source, target = tmp_path / "bad.csv", tmp_path / "out.csv"
    _write_csv(source, records)
    assert run_batch(str(source), str(target), progress=False) == EXIT_INVALID
    problem = json.loads(capsys.readouterr().err)
    assert problem["errors"] == [{"index": 5, "id": "h5", "field": "lat", "reason": "must be between -90 and 90"}]
    assert not target.exists()


def test_a_json_file_is_read_as_strictly_as_a_request_body(tmp_path, capsys):
    source, target = tmp_path / "twice.json", tmp_path / "out.json"
    source.write_text('{"records": [{"time": "2026-07-14T09:10:00Z", "lat": 45.7, "lat": 45.8, "lon": 4.8}]}')
    assert run_batch(str(source), str(target), spectra=["erythema"], progress=False) == EXIT_INVALID
    problem = json.loads(capsys.readouterr().err)
    assert problem["type"] == "urn:uvdose:problem:malformed-body" and "'lat' twice" in problem["detail"]
    assert not target.exists()


def test_every_operation_reads_and_writes_csv_json_and_parquet(tmp_path, make_app, contract_client_for,
                                                               dask_scheduler):
    import pyarrow as pa
    import pyarrow.parquet as pq

    client = contract_client_for(make_app(UVDOSE_CACHE="off"))
    fields = [{"id": f"block-{i}", "lat": 44.0 + i / 10, "lon": 4.9} for i in range(3)]
    season = {"first_day": "2026-04-01", "last_day": "2026-04-10", "spectra": ["erythema"]}
    expected = client.post("/v1/doses/fields", json={"records": fields, **season}).get_json()["results"]
    source = tmp_path / "fields.parquet"
    pq.write_table(pa.Table.from_pylist(fields), source)
    options = [item for key, value in season.items()
               for item in ("--option", f"{key}={value if isinstance(value, str) else ','.join(value)}")]
    target = tmp_path / "fields.parquet.out"
    assert main(["batch", str(source), str(target), "--operation", "fields", "--output-format", "parquet",
                 "--chunk-size", "10", "--scheduler", dask_scheduler, "--no-progress", *options]) == 0
    table = pq.read_table(target).to_pydict()
    assert list(zip(table["id"], table["day"])) == [(f["id"], d["day"]) for f in expected for d in f["days"]]
    assert table["dose_j_m2.erythema"] == pytest.approx([d["dose_j_m2"]["erythema"] for f in expected for d in f["days"]],
                                                        rel=1e-12)

    routes = {"routes": [{"id": "van-1", "points": [{"time": "2026-06-21T08:00:00Z", "lat": 45.75, "lon": 4.85},
                                                    {"time": "2026-06-21T09:00:00Z", "lat": 45.80, "lon": 4.90}]},
                         {"id": "van-2", "points": [{"time": "2026-06-21T10:00:00Z", "lat": 45.75, "lon": 4.85},
                                                    {"time": "2026-06-21T11:30:00Z", "lat": 45.70, "lon": 4.80}]}]}
    (tmp_path / "routes.json").write_text(json.dumps(routes))
    assert main(["batch", str(tmp_path / "routes.json"), str(tmp_path / "routes.ndjson"), "--operation", "routes",
                 "--chunk-size", "2", "--no-progress"]) == 0
    rows = [json.loads(line) for line in (tmp_path / "routes.ndjson").read_text().splitlines()]
    synchronous = client.post("/v1/doses/routes", json=routes).get_json()["results"]
    assert [r["id"] for r in rows] == ["van-1", "van-2"]
    assert [r["dose_j_m2"]["erythema"] for r in rows] == pytest.approx(
        [r["dose_j_m2"]["erythema"] for r in synchronous], rel=1e-12)


def test_progress_bar_goes_to_stderr_for_multi_chunk_files(tmp_path):
    source = tmp_path / "hours.csv"
    _write_csv(source, _records())
    done = subprocess.run([sys.executable, "-m", "uvdose.service.cli", "batch", str(source), "-", "--chunk-size", "5",
                           "--progress"], cwd=REPO, capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert f"{len(HOURS)}/{len(HOURS)}" in done.stderr
    assert json.loads(done.stdout)["results"][0]["id"] == "h0"


@pytest.mark.gunicorn
@pytest.mark.parametrize("command", [
    ["-m", "uvdose.service.cli", "serve", "--bind", "{bind}", "--config", str(REPO / "deploy" / "gunicorn.conf.py")],
    ["-c", "from uvdose.service.cli import serve; serve('{bind}', 1, None)"],  # the built-in settings
], ids=["deploy-config", "built-in-settings"])
def test_serve_runs_gunicorn_and_stops_cleanly_on_sigterm(tmp_path, command):
    port = free_loopback_port()
    env = {**os.environ, "UVDOSE_WORKERS": "1"}
    env.pop("PROMETHEUS_MULTIPROC_DIR", None)
    argv = [part.replace("{bind}", f"127.0.0.1:{port}") for part in command]
    process = subprocess.Popen([sys.executable, *argv],
                               cwd=tmp_path, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        wait_until_answers(f"http://127.0.0.1:{port}/livez", process, timeout_s=60)
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/readyz", timeout=30) as reply:
            assert json.load(reply)["status"] in ("ready", "degraded")
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/metrics", timeout=30) as reply:
            assert b"uvdose_http_requests_total" in reply.read()
        process.send_signal(signal.SIGTERM)
        assert process.wait(timeout=40) == 0
    finally:
        stop(process)
