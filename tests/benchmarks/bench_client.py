"""The Python client's cost over hand-written calls, and what compression saves on the wire
(a script; pytest does not collect it).

    python tests/benchmarks/bench_client.py [--records 25000] [--repeats 5]

Scenario (invented, our own): the "Quai Nord" parcel depot's planner posts a month of van
stops (positions around Lyon, times over July, ids) for the default spectra. One gunicorn
with two workers on a loopback port, the grid-cell cache off, so every request computes.

Printed, all in one run:

1. Baseline in this process: the records hand-split into three parts under the default
   limit of 10 000, each posted in the column layout with a plain ``httpx.Client``, one
   after the other; median seconds.
2. ``uvdose.client.Client.irradiance`` on the whole batch (it fetches the limits, splits,
   sends, checks and joins) over the same connection: median seconds and the ratio to the
   baseline (target: at most 1.1); also with ``parallel=2`` (two connections, parts sent
   two at a time), which only gains where two workers have two free cores.
3. Bytes on the wire for one 10 000-record answer in the column layout, identity against
   gzip and zstd (``Accept-Encoding``), with the time of each request.

The machine is shared: read the ratios; the absolute figures move with the load.
"""
from __future__ import annotations

import argparse
import random
import statistics
import sys
from datetime import datetime, timedelta, timezone
from pathlib import Path

import httpx
import orjson
from live_server import free_port, start_server  # noqa: E402  (this folder)
from timing import timings  # noqa: E402  (this folder; see timing.py)

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))

from uvdose.client import Client  # noqa: E402
from uvdose.service.config import settings_from_environment  # noqa: E402


def van_stops(n: int, seed: int = 21) -> dict[str, list]:
    rng = random.Random(seed)
    start = datetime(2026, 7, 1, 6, tzinfo=timezone(timedelta(hours=2)))
    return {"id": [f"van-{i % 40}/stop-{i:05d}" for i in range(n)],
            "time": [(start + timedelta(seconds=rng.uniform(0, 30 * 86400))).isoformat() for _ in range(n)],
            "lat": [round(rng.uniform(45.5, 46.0), 4) for _ in range(n)],
            "lon": [round(rng.uniform(4.6, 5.1), 4) for _ in range(n)]}


def hand_split(http: httpx.Client, columns: dict[str, list], max_records: int) -> list:
    n = len(columns["id"])
    parts = -(-n // max_records)
    size = -(-n // parts)
    out = []
    for start in range(0, n, size):
        body = orjson.dumps({"columns": {k: v[start:start + size] for k, v in columns.items()}})
        response = http.post("/v1/irradiance", content=body, headers={"Content-Type": "application/json"})
        response.raise_for_status()
        out.append(orjson.loads(response.content))
    return out


def median(values: list[float]) -> float:
    return statistics.median(values)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--records", type=int, default=25_000)
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    max_records = settings_from_environment({})["UVDOSE_MAX_RECORDS"]
    columns = van_stops(args.records)
    port = free_port()
    server = start_server(port, workers=2, UVDOSE_CACHE="off", UVDOSE_REQUEST_LOG="off")
    base = f"http://127.0.0.1:{port}"
    try:
        # The client rides on the baseline's own httpx.Client (the same keep-alive connection,
        # so the same worker answers both); runs alternate, so drifts in the machine's load
        # fall on both alike.
        with httpx.Client(base_url=base, timeout=600) as http, Client(base, parallel=2) as uv2:
            uv = Client(http=http)
            hand_split(http, {k: v[:200] for k, v in columns.items()}, max_records)  # warm the workers
            uv.irradiance({k: v[:200] for k, v in columns.items()})
            uv2.irradiance({k: v[:200] for k, v in columns.items()})
            raw, client, parallel = [], [], []
            for _ in range(args.repeats):
                raw += timings(1, lambda: hand_split(http, columns, max_records))
                client += timings(1, lambda: uv.irradiance(columns))
                parallel += timings(1, lambda: uv2.irradiance(columns))
            print(f"{args.records} records, default limit {max_records} per request, median of {args.repeats}:")
            print(f"  baseline, three hand-split raw httpx calls: {median(raw):.3f} s")
            print(f"  uvdose.client Client.irradiance:            {median(client):.3f} s   "
                  f"ratio {median(client) / median(raw):.3f} (target <= 1.1)")
            print(f"  uvdose.client, parallel=2:                  {median(parallel):.3f} s   "
                  f"ratio {median(parallel) / median(raw):.3f}")

            part = orjson.dumps({"columns": {k: v[:max_records] for k, v in columns.items()}})
            print(f"\nOne {max_records}-record request in columns: body {len(part) / 1e6:.2f} MB sent; answer:")
            sizes = {}
            for coding in ("identity", "gzip", "zstd"):
                def once(coding=coding):
                    response = http.post("/v1/irradiance", content=part, headers={
                        "Content-Type": "application/json", "Accept-Encoding": coding})
                    response.raise_for_status()
                    sizes[coding] = response.num_bytes_downloaded
                    assert response.headers.get("Content-Encoding", "identity") == coding
                    return response.content
                took = median(timings(args.repeats, once))
                print(f"  {coding:8s} {sizes[coding] / 1e6:7.3f} MB on the wire "
                      f"({sizes['identity'] / sizes[coding]:.2f}x smaller)   request {took:.3f} s")
    finally:
        server.terminate()
        server.wait(timeout=30)


if __name__ == "__main__":
    main()
