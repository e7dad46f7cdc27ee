"""The streamed fields answer against the whole one, under gunicorn (a script, not a test).

One season request (100 fields, 1 April 2026 to 31 March 2027, 366 days, the three default
spectra: 36 600 field-days) is sent to ``POST /v1/doses/fields`` three times, each to a
fresh one-worker gunicorn with the cache off: answered whole (``application/json``; the
whole-answer limit raised for the comparison, since this answer is over its default) and
streamed (``application/x-ndjson``, ``text/csv``). For each it prints the time to the first
byte of the body, the time to the last, the bytes, and the worker's peak resident memory
(``VmHWM``) above what it held after a small warm-up request. Ratios are against the whole
JSON answer of the same run.

Run: ``python tests/benchmarks/bench_streams.py`` (2 shared cores:
take the lock so that two benchmarks do not overlap).
"""
from __future__ import annotations

import http.client
import json
import time
from pathlib import Path

import live_server

FIELDS, FIRST_DAY, LAST_DAY = 100, "2026-04-01", "2027-03-31"
SETTINGS = {"UVDOSE_CACHE": "off", "UVDOSE_REQUEST_LOG": "off", "UVDOSE_MAX_ANSWER_BYTES": str(2 ** 30)}


def _body(n_fields: int, last_day: str = LAST_DAY) -> bytes:
    records = [{"id": f"bench-field-{i:04d}", "lat": round(38.0 + 0.1 * i, 2), "lon": round(-4.0 + 0.07 * i, 2)}
               for i in range(n_fields)]
    return json.dumps({"records": records, "first_day": FIRST_DAY, "last_day": last_day}).encode()


def _worker_pid(master: int) -> int:
    children = Path(f"/proc/{master}/task/{master}/children").read_text().split()
    return int(children[0])


def _peak_kib(pid: int) -> int:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1])
    raise RuntimeError("no VmHWM")


def _post(port: int, body: bytes, accept: str) -> tuple[float, float, int]:
    """(seconds to the first body byte, seconds to the last, body bytes)."""
    connection = http.client.HTTPConnection("127.0.0.1", port, timeout=600)
    started = time.perf_counter()
    connection.request("POST", "/v1/doses/fields", body=body,
                       headers={"Content-Type": "application/json", "Accept": accept})
    response = connection.getresponse()
    if response.status != 200:
        raise SystemExit(f"{accept}: {response.status} {response.read()[:300]!r}")
    first = response.read1(65536)
    first_s = time.perf_counter() - started
    size = len(first)
    while chunk := response.read1(1 << 20):
        size += len(chunk)
    total_s = time.perf_counter() - started
    connection.close()
    return first_s, total_s, size


def measure(accept: str) -> dict:
    port = live_server.free_port()
    server = live_server.start_server(port, workers=1, **SETTINGS)
    try:
        _post(port, _body(2, "2026-04-03"), accept)  # loads the engine's tables in the worker
        worker = _worker_pid(server.pid)
        before = _peak_kib(worker)
        first_s, total_s, size = _post(port, _body(FIELDS), accept)
        return {"accept": accept, "first_byte_s": first_s, "total_s": total_s, "bytes": size,
                "peak_growth_mib": (_peak_kib(worker) - before) / 1024, "peak_mib": _peak_kib(worker) / 1024}
    finally:
        server.terminate()
        server.wait(timeout=30)


def main() -> None:
    whole = measure("application/json")
    runs = [whole, measure("application/x-ndjson"), measure("text/csv")]
    print(f"POST /v1/doses/fields, {FIELDS} fields x 366 days ({FIELDS * 366} field-days), 3 spectra, "
          "one gunicorn worker, cache off")
    print(f"{'answer':22} {'first byte':>11} {'last byte':>10} {'MB':>7} {'peak +MiB':>10} {'peak MiB':>9}"
          f" {'first/whole':>12} {'peak/whole':>11}")
    for run in runs:
        print(f"{run['accept']:22} {run['first_byte_s']:10.2f}s {run['total_s']:9.2f}s {run['bytes'] / 1e6:7.1f}"
              f" {run['peak_growth_mib']:10.0f} {run['peak_mib']:9.0f} {run['first_byte_s'] / whole['total_s']:12.3f}"
              f" {run['peak_growth_mib'] / whole['peak_growth_mib']:11.3f}")


if __name__ == "__main__":
    main()
