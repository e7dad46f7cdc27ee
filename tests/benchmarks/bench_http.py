"""HTTP overhead of POST /v1/irradiance against the engine alone (a script; pytest does not collect it).

    python tests/benchmarks/bench_http.py [--sizes 1 100 1000 10000] [--repeats 7]

Scenario (invented, our own): the "Vaubrise" parcel depot's planner posts the day's van
stops (mid-latitude positions, times over one summer month, ids, a cloud factor) and asks
for the default spectra. The grid-cell cache is off, so every request computes.

Printed, all in one run:

1. Baseline in this process: ``models.engine.compute`` on the same records (already
   validated columns), median seconds.
2. One gunicorn worker on a loopback port: median and p95 latency per request and
   records/s, for the row layout (``records``) and the column layout (``columns``), and
   the ratio HTTP median / engine median. Target: at most 1.5 at 10 000 records.
3. The parts of the overhead in this process at the largest size: JSON parsing,
   validation by the vectorised column checks against per-record marshmallow (the
   choice service.column_checks makes), and response serialisation with orjson against json.

The machine is shared: read the ratios; the absolute figures move with the load.
"""
from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import urllib.request
from datetime import datetime, timedelta, timezone
from pathlib import Path

import numpy as np
import live_server  # noqa: E402  (this folder)
from live_server import free_port  # noqa: E402
from timing import timings  # noqa: E402  (this folder; see timing.py)

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))


def van_stops(n: int, seed: int = 7) -> list[dict]:
    rng = np.random.default_rng(seed)
    start = datetime(2026, 7, 1, 6, tzinfo=timezone(timedelta(hours=2)))
    offsets = rng.uniform(0, 30 * 86400, n)
    return [
        {"id": f"van-{i % 40}/stop-{i}", "time": (start + timedelta(seconds=float(s))).isoformat(),
         "lat": round(float(lat), 5), "lon": round(float(lon), 5), "cloud_factor": round(float(cf), 2)}
        for i, (s, lat, lon, cf) in enumerate(zip(offsets, rng.uniform(35, 60, n), rng.uniform(-10, 30, n),
                                                  rng.uniform(0.3, 1.1, n)))
    ]


def as_columns(records: list[dict]) -> dict:
    return {name: [r[name] for r in records] for name in records[0]}


def timed(call, repeats: int) -> list[float]:
    return timings(repeats, call)


def p95(times: list[float]) -> float:
    return float(np.percentile(times, 95))


def start_server(port: int) -> subprocess.Popen:
    return live_server.start_server(port, workers=1, UVDOSE_CACHE="off", UVDOSE_MAX_RECORDS="100000",
                                    UVDOSE_MAX_BODY_BYTES=str(256 * 1024 * 1024))


def post(url: str, body: bytes) -> bytes:
    request = urllib.request.Request(url, data=body, headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(request, timeout=300) as reply:
        return reply.read()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1, 100, 1000, 10000])
    parser.add_argument("--repeats", type=int, default=7)
    args = parser.parse_args()

    import orjson

    from uvdose.models import engine
    from uvdose.service import wire_formats
    from uvdose.service.engine_gateway import default_spectra
    from uvdose.service.irradiance_batch import IrradianceOptionsSchema, IrradianceRecordSchema

    schema, options = IrradianceRecordSchema(), IrradianceOptionsSchema()
    port = free_port()
    server = start_server(port)
    url = f"http://127.0.0.1:{port}/v1/irradiance"
    print(f"{'records':>8} {'layout':>8} {'engine med s':>13} {'http med s':>11} {'http p95 s':>11} "
          f"{'records/s':>10} {'http/engine':>12}")
    try:
        for n in args.sizes:
            records = van_stops(n)
            rows_body = orjson.dumps({"records": records})
            columns_body = orjson.dumps({"columns": as_columns(records)})
            batch = wire_formats.read_batch_bytes(rows_body, "application/json", {}, record_schema=schema,
                                              options_schema=options, max_records=10**9).batch
            conditions = engine.Conditions.from_columns(batch.columns)
            engine.compute(conditions, spectra=default_spectra())  # warm tables
            engine_median = statistics.median(timed(lambda: engine.compute(conditions, spectra=default_spectra()),
                                                    args.repeats))
            for layout, body in (("records", rows_body), ("columns", columns_body)):
                post(url, body)  # warm the worker
                times = timed(lambda: post(url, body), args.repeats)
                median = statistics.median(times)
                print(f"{n:>8} {layout:>8} {engine_median:>13.4f} {median:>11.4f} {p95(times):>11.4f} "
                      f"{n / median:>10.0f} {median / engine_median:>12.2f}")
    finally:
        server.terminate()
        server.wait(timeout=30)

    n = max(args.sizes)
    records = van_stops(n)
    body = orjson.dumps({"records": records})
    print(f"\nparts of the overhead at {n} records (this process, median of {args.repeats}):")
    parse_s = statistics.median(timed(lambda: orjson.loads(body), args.repeats))
    parse_json_s = statistics.median(timed(lambda: json.loads(body), args.repeats))
    vector_s = statistics.median(timed(lambda: wire_formats.read_batch_bytes(
        body, "application/json", {}, record_schema=schema, options_schema=options, max_records=10**9),
        args.repeats))
    per_record_s = statistics.median(timed(lambda: schema.load(records, many=True), max(1, args.repeats // 3)))
    print(f"  parse JSON: orjson {parse_s:.4f} s, json {parse_json_s:.4f} s (json/orjson {parse_json_s / parse_s:.1f}x)")
    print(f"  validate: vectorised column checks (incl. parse) {vector_s:.4f} s, per-record marshmallow "
          f"{per_record_s:.4f} s (marshmallow/vectorised {per_record_s / vector_s:.1f}x)")
    from uvdose.service.engine_gateway import offline
    from uvdose.service.irradiance_batch import compute, envelope, result_rows

    batch = wire_formats.read_batch_bytes(body, "application/json", {}, record_schema=schema, options_schema=options,
                                      max_records=10**9).batch
    spectra = default_spectra()
    columns, _, _ = compute(offline(), batch.columns, batch.ids, spectra, False)

    def rows_payload():
        return {**envelope(spectra, None), "results": result_rows(dict(columns), None)}

    payload = rows_payload()
    build_s = statistics.median(timed(rows_payload, args.repeats))
    orjson_s = statistics.median(timed(lambda: orjson.dumps(payload), args.repeats))
    json_s = statistics.median(timed(lambda: json.dumps(payload), args.repeats))
    print(f"  respond: build rows {build_s:.4f} s; serialise orjson {orjson_s:.4f} s, json {json_s:.4f} s "
          f"(json/orjson {json_s / orjson_s:.1f}x)")


if __name__ == "__main__":
    main()
