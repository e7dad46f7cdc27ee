"""The buffering worker against gunicorn's gthread: what buffering costs, what slow clients do.

    python tests/benchmarks/bench_worker.py

Both servers run deploy/gunicorn.conf.py (2 workers x 4 threads, cache off); the gthread
one only overrides the worker class on the command line. Per server: the median of 200
sequential ``GET /livez`` and of 20 sequential 1 000-record ``POST /v1/irradiance``
(the buffering worker's cost is the extra hop through its event loop), then 16 clients
that send headers and half a body and stop, and 7 ``/livez`` probes (3 s timeout each)
while they hang. Ratios are buffering / gthread in the same run.
"""
from __future__ import annotations

import json
import os
import socket
import statistics
import subprocess
import sys
import tempfile
import time
import urllib.request

from live_server import REPO, answering, free_port
from timing import timings

CONFIG = REPO / "deploy" / "gunicorn.conf.py"
STALLED = 16  # twice the threads of the server: every one held if they stall them
PLOTS = json.dumps({"records": [{"id": f"plot-{i}", "time": "2026-06-21T11:00:00Z",
                                 "lat": round(36.0 + (i // 100) * 0.25, 3),
                                 "lon": round(-5.0 + (i % 100) * 0.25, 3)} for i in range(1000)]}).encode()


def start(port: int, worker_class: str | None) -> subprocess.Popen:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("UVDOSE_", "PROMETHEUS_")) and k != "REDIS_URL"}
    env.update({"UVDOSE_BIND": f"127.0.0.1:{port}", "UVDOSE_CACHE": "off", "UVDOSE_REQUEST_LOG": "off",
                "UVDOSE_HEADER_TIMEOUT_S": "120", "UVDOSE_BODY_TIMEOUT_S": "120",
                "TMPDIR": tempfile.mkdtemp(prefix="uvdose-bench-"), "PYTHONPATH": str(REPO)})
    extra = ["--worker-class", worker_class] if worker_class else []
    process = subprocess.Popen([sys.executable, "-m", "gunicorn", "--config", str(CONFIG), *extra,
                                "uvdose.service.app:create_app()"], cwd=REPO, env=env,
                               stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return answering(process, port)


def measure(worker_class: str | None) -> dict:
    port = free_port()
    process = start(port, worker_class)
    base = f"http://127.0.0.1:{port}"

    def livez():
        with urllib.request.urlopen(base + "/livez", timeout=10) as reply:
            reply.read()

    def batch():
        request = urllib.request.Request(base + "/v1/irradiance", data=PLOTS, method="POST",
                                         headers={"Content-Type": "application/json"})
        with urllib.request.urlopen(request, timeout=60) as reply:
            reply.read()

    try:
        livez_s = statistics.median(timings(200, livez, warmup=True))
        batch_s = statistics.median(timings(20, batch, warmup=True))
        stalled = []
        for _ in range(STALLED):
            sock = socket.create_connection(("127.0.0.1", port))
            sock.sendall(b"POST /v1/irradiance HTTP/1.1\r\nHost: b\r\nContent-Type: application/json\r\n"
                         b"Content-Length: 100000\r\n\r\n" + PLOTS[:50000])
            stalled.append(sock)
        time.sleep(1.0)
        answered = 0
        for _ in range(7):
            try:
                with urllib.request.urlopen(base + "/livez", timeout=3):
                    answered += 1
            except OSError:
                pass
        for sock in stalled:
            sock.close()
    finally:
        process.terminate()
        try:
            process.wait(timeout=40)
        except subprocess.TimeoutExpired:
            process.kill()
    return {"livez_ms": livez_s * 1e3, "batch_ms": batch_s * 1e3, "probes_answered": answered}


def main() -> None:
    gthread = measure("gthread")
    buffering = measure(None)
    for name, figures in (("gthread", gthread), ("buffering (shipped)", buffering)):
        print(f"{name:20s} /livez median {figures['livez_ms']:.2f} ms, 1000-record POST median "
              f"{figures['batch_ms']:.1f} ms, /livez probes answered with {STALLED} stalled clients: "
              f"{figures['probes_answered']} of 7")
    print(f"ratio buffering/gthread: /livez {buffering['livez_ms'] / gthread['livez_ms']:.2f}x, "
          f"1000-record POST {buffering['batch_ms'] / gthread['batch_ms']:.2f}x")


if __name__ == "__main__":
    main()
