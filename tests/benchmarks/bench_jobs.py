"""Jobs on Dask: a season of field doses as one job, on 1 and on 2 worker processes, against
the synchronous endpoint on the same records.

Scenario (invented): 2 740 fields spread over 55 S-65 N for the whole of 2026 (2 740 x 365
= 1 000 100 field-days), the default field spectra, the Gauss-Legendre day.

* The job: submitted through ``service.jobs.Jobs`` (the whole-batch check, the probe, the
  parts written to a results store in a temporary directory) and timed from submission to
  the last part written, on the embedded local cluster of 1 and then 2 single-threaded
  worker processes. Peak resident memory of each worker process is read at the end
  (``ru_maxrss``).
* The baseline, in this process: ``POST /v1/doses/fields`` through the Flask test client,
  in pieces of the job's part size (the size one request may carry under the synchronous
  limits), one after the other, on one core, each answer streamed as NDJSON: the same
  records, the same work, the same rows serialised.

Targets: 2 workers >= 1.7x one worker; peak RSS per worker < 1 GiB; job throughput >= 0.8x
the synchronous endpoint's. The machine has 2 shared cores: run it with nothing else running,
``python tests/benchmarks/bench_jobs.py [--fields N] [--days N]``.
"""
from __future__ import annotations

import argparse
import datetime as dt
import resource
import tempfile
import time

import numpy as np
import orjson


def season_body(n_fields: int, n_days: int) -> dict:
    rng = np.random.default_rng(20261202)
    latitude = rng.uniform(-55, 65, n_fields).round(3)
    longitude = rng.uniform(-180, 180, n_fields).round(3)
    first = dt.date(2026, 1, 1)
    return {"records": [{"id": f"field-{i:05d}", "lat": float(latitude[i]), "lon": float(longitude[i])}
                        for i in range(n_fields)],
            "first_day": first.isoformat(), "last_day": (first + dt.timedelta(days=n_days - 1)).isoformat()}


def peak_rss_mib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def synchronous(body: dict, fields_per_request: int) -> float:
    """Seconds for the whole batch through POST /v1/doses/fields, in pieces."""
    from uvdose.service.app import create_app

    client = create_app({"UVDOSE_REQUEST_LOG": False, "UVDOSE_CACHE": "memory"}).test_client()
    records = body["records"]
    started = time.perf_counter()
    for first in range(0, len(records), fields_per_request):
        piece = {**body, "records": records[first:first + fields_per_request]}
        # Streamed NDJSON, the job's own row format (a piece's whole JSON answer, ~46 MB,
        # is over UVDOSE_MAX_ANSWER_BYTES).
        answer = client.post("/v1/doses/fields", data=orjson.dumps(piece), content_type="application/json",
                             headers={"Accept": "application/x-ndjson"})
        assert answer.status_code == 200, answer.get_data(as_text=True)[:500]
        answer.get_data()
    return time.perf_counter() - started


def job(body: dict, workers: int, part_work: int) -> tuple[float, list[float]]:
    """(seconds from submission to the last part, peak RSS MiB of each worker)."""
    from distributed import Client

    from uvdose.service import job_cluster, jobs
    from uvdose.service.app import create_app
    from uvdose.service.config import settings_from_environment
    from uvdose.service.job_operations import OPERATIONS

    process, address = job_cluster.start_embedded(workers)
    try:
        with tempfile.TemporaryDirectory(prefix="bench-jobs-") as store:
            config = settings_from_environment(overrides={
                "UVDOSE_DASK_SCHEDULER": address, "UVDOSE_JOBS_STORE": store, "REDIS_URL": None,
                "UVDOSE_JOBS_METADATA_DIR": f"{store}/.metadata", "UVDOSE_JOB_PART_WORK": part_work})
            runner = jobs.Jobs(config, create_app)
            data = orjson.dumps(body)
            with Client(address, set_as_default=False) as observer:
                started = time.perf_counter()
                status = runner.submit(OPERATIONS["fields"], data, "application/json", {})
                while status["state"] not in jobs.FINISHED:
                    time.sleep(0.5)
                    status = runner.status(status["id"])
                elapsed = time.perf_counter() - started
                assert status["state"] == "succeeded", status
                rss = observer.run(peak_rss_mib)
            runner.close()
    finally:
        job_cluster.stop_embedded(process)
    return elapsed, sorted(rss.values())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--fields", type=int, default=2740)
    parser.add_argument("--days", type=int, default=365)
    parser.add_argument("--part-work", type=int, default=20_000, help="field-days per part (UVDOSE_JOB_PART_WORK)")
    args = parser.parse_args()
    body = season_body(args.fields, args.days)
    field_days = args.fields * args.days
    per_part = max(1, args.part_work // args.days)
    print(f"{args.fields} fields x {args.days} days = {field_days} field-days, {per_part} fields a part")

    one_s, one_rss = job(body, 1, args.part_work)
    print(f"job, 1 worker:   {one_s:8.1f} s  {field_days / one_s:8.0f} field-days/s  peak RSS {one_rss} MiB")
    two_s, two_rss = job(body, 2, args.part_work)
    print(f"job, 2 workers:  {two_s:8.1f} s  {field_days / two_s:8.0f} field-days/s  peak RSS {two_rss} MiB")
    sync_s = synchronous(body, per_part)
    print(f"synchronous:     {sync_s:8.1f} s  {field_days / sync_s:8.0f} field-days/s  "
          f"({-(-args.fields // per_part)} requests of {per_part} fields, one process)")
    print(f"2 workers / 1 worker: {one_s / two_s:.2f}x (target >= 1.7x)")
    print(f"peak RSS per worker:  {max(one_rss + two_rss):.0f} MiB (target < 1024 MiB)")
    print(f"job (1 worker) / synchronous: {sync_s / one_s:.2f}x; job (2 workers) / synchronous: "
          f"{sync_s / two_s:.2f}x (target >= 0.8x)")


if __name__ == "__main__":
    main()
