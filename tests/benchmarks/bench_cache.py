"""Benchmark of the grid-cell cache (a script; pytest does not collect it).

    python tests/benchmarks/bench_cache.py [--records 10000] [--cells 500] [--repeats 3]

Scenario (invented, our own): a cooperative's spraying planner asks for 10 000 records at
once, its orchards spread over 500 distinct cells of 0.05° × 2 min. Printed:

1. Key building alone (quantise, pack, dedupe, split into keys) for 10 000 records,
   against a baseline of one ``hashlib.blake2b`` per record in a Python loop.
2. The stores against the libraries they could be (the figures quoted beside
   ``service/cache/memory_store.py`` and ``redis_store.py``): the in-process store's
   ``get_many``/``set_many`` of 10 000 keys against ``cachetools`` (``LRUCache`` holding
   (expiry, value) pairs, ``TTLCache``, ``TLRUCache``) behind the same lock; the Redis
   store's hand-packed pipelines (500 and 10 000 ``SET … PX``; MGET of them) against
   redis-py's ``pipeline(transaction=False)`` and ``Redis.mget``.
3. ``compute_through`` with the real engine, cold and warm, for the Redis and the
   in-process backends, against the uncached engine call on the same records.
4. The same through HTTP: ``POST /v1/irradiance`` on one gunicorn worker on loopback
   (one worker so that the in-process cache is the one asked twice), cold and warm.
   Target: warm/cold ≥ 5× for both backends. Run twice: with the default aerosol (the
   engine's precomputed-table path, a few microseconds a cell, so HTTP parsing and
   serialisation dominate both runs) and with a client-supplied aerosol that sends each
   cell through the full solve. "cold" already benefits from the cache's
   dedupe (500 engine rows for 10 000 records), so the uncached (UVDOSE_CACHE=off) run is
   printed too, with the uncached/warm ratio.

Redis is the server at $REDIS_URL or 127.0.0.1:6379. The benchmark claims a database of
its own there the way the test suite does (``tests/redis_claim.py``: one of 1–15, empty,
never database 0), flushes only that one and gives it back empty at the end.
"""
from __future__ import annotations

import argparse
import hashlib
import json
import os
import socket
import statistics
import subprocess
import sys
import threading
import time
import urllib.request
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))

from uvdose.service.cache import GridCellCache  # noqa: E402
from uvdose.service.cache.byte_rows import distinct_rows, split_rows  # noqa: E402
from uvdose.service.cache.memory_store import MemoryStore  # noqa: E402
from uvdose.service.cache.redis_store import RedisStore  # noqa: E402
from tests.redis_claim import RedisDatabase, claim_database  # noqa: E402
from timing import best_of  # noqa: E402  (this folder; see timing.py)

REDIS_SERVER_URL = os.environ.get("REDIS_URL", "redis://127.0.0.1:6379")
CONTEXT = "bench:spectra=erythema,actinic_icnirp,plant_damage"


def scenario(records: int, cells: int, seed: int = 2026) -> dict[str, np.ndarray]:
    """Records over ``cells`` distinct cells: orchards between 35° and 50° N on a
    spring morning, several rows per cell, every cell used at least once."""
    rng = np.random.default_rng(seed)
    flat = rng.choice(300 * 600, cells, replace=False)
    cell_lat = 35.0 + 0.05 * (flat // 600)
    cell_lon = -10.0 + 0.05 * (flat % 600)
    start = datetime(2026, 5, 20, 9, 0, tzinfo=timezone.utc).timestamp()
    pick = rng.integers(0, cells, records)
    pick[:cells] = np.arange(cells)
    return {
        "time_unix_s": start + 120.0 * (pick % 4) + rng.uniform(5, 115, records),
        "latitude_deg": cell_lat[pick] + rng.uniform(0.002, 0.048, records),
        "longitude_deg": cell_lon[pick] + rng.uniform(0.002, 0.048, records),
    }


def bench_keys(columns: dict[str, np.ndarray], repeats: int) -> None:
    cache = GridCellCache("memory")

    def ours():
        indices, _ = cache.grid.quantise(columns)
        matrix = cache.key_rows(indices, CONTEXT)
        first, _ = distinct_rows(matrix)
        split_rows(matrix[first])

    def loop_baseline():
        stacked = np.column_stack([columns[k] for k in sorted(columns)])
        {hashlib.blake2b(row.tobytes(), digest_size=16).digest() for row in stacked}

    baseline = best_of(repeats, loop_baseline)
    measured = best_of(repeats, ours)
    n = len(columns["time_unix_s"])
    print(f"keys for {n} records: {measured * 1e3:.2f} ms (per-record blake2b loop {baseline * 1e3:.2f} ms,"
          f" ratio {baseline / measured:.1f}x)")


class _LibraryStore:
    """``get_many``/``set_many`` over a ``cachetools`` cache, behind a lock as ours is."""

    def __init__(self, cache, ttl_s: float | None = None, clock=time.monotonic):
        self.cache, self.ttl_s, self.clock = cache, ttl_s, clock
        self.lock = threading.Lock()

    def get_many(self, keys):
        with self.lock:
            get = self.cache.get
            if self.ttl_s is None:  # the cache expires entries itself
                return [get(key) for key in keys]
            now, found = self.clock(), []
            for key in keys:
                entry = get(key)
                found.append(None if entry is None or entry[0] <= now else entry[1])
            return found

    def set_many(self, keys, values, layout_key, layout):
        with self.lock:
            if self.ttl_s is None:
                for key, value in zip(keys, values):
                    self.cache[key] = value
                return
            expires = self.clock() + self.ttl_s
            for key, value in zip(keys, values):
                self.cache[key] = (expires, value)


def bench_memory_store(repeats: int, count: int = 10_000) -> None:
    try:
        import cachetools
    except ImportError:
        print("cachetools not installed: in-process store comparison skipped")
        return
    rng = np.random.default_rng(7)
    keys = [rng.bytes(90) for _ in range(count)]
    values = [rng.bytes(80) for _ in range(count)]
    ttl_s = 86_400.0
    candidates = {
        "ours (OrderedDict)": lambda bound: MemoryStore(bound, ttl_s),
        "cachetools.LRUCache": lambda bound: _LibraryStore(cachetools.LRUCache(bound), ttl_s),
        "cachetools.TTLCache": lambda bound: _LibraryStore(cachetools.TTLCache(bound, ttl_s, timer=time.monotonic)),
        "cachetools.TLRUCache": lambda bound: _LibraryStore(
            cachetools.TLRUCache(bound, lambda key, value, now: now + ttl_s, timer=time.monotonic)),
    }
    print(f"in-process store, {count} keys of 90 bytes (best of {repeats}):")
    baseline = None
    for name, make in candidates.items():
        store = make(5 * count)
        written = best_of(repeats, lambda: store.set_many(keys, values, b"l", b"[]"))
        read = best_of(repeats, lambda: store.get_many(keys))
        evicting_store = make(count // 2)
        evicting = best_of(repeats, lambda: evicting_store.set_many(keys, values, b"l", b"[]"))
        figures = (written, read, evicting)
        baseline = baseline or figures
        ratios = "/".join(f"{f / b:.1f}" for f, b in zip(figures, baseline))
        print(f"  {name:22s} set_many {written * 1e3:6.2f} ms, get_many {read * 1e3:6.2f} ms,"
              f" set_many evicting {evicting * 1e3:6.2f} ms; against ours {ratios}x")


def bench_redis_store(database: RedisDatabase, repeats: int) -> None:
    store = RedisStore(database.url, 86_400.0, 0.25, 5.0)
    client = store.client
    client.ping()
    rng = np.random.default_rng(8)
    print(f"Redis store against redis-py on the claimed database {database.db} (best of {repeats}):")
    for count in (500, 10_000):
        keys = [b"uvdose:c:" + rng.bytes(80) for _ in range(count)]
        values = [rng.bytes(80) for _ in range(count)]

        def pipeline_sets():
            pipeline = client.pipeline(transaction=False)
            pipeline.set(b"uvdose:l:bench", b"[]", px=store.ttl_ms)
            for key, value in zip(keys, values):
                pipeline.set(key, value, px=store.ttl_ms)
            pipeline.execute()

        ours_set = best_of(repeats, lambda: store.set_many(keys, values, b"uvdose:l:bench", b"[]"))
        theirs_set = best_of(repeats, pipeline_sets)
        ours_get = best_of(repeats, lambda: store.get_many(keys))
        theirs_get = best_of(repeats, lambda: client.mget(keys))
        print(f"  {count:6d} SET … PX: packed here {ours_set * 1e3:7.2f} ms, redis-py pipeline"
              f" {theirs_set * 1e3:7.2f} ms ({theirs_set / ours_set:.1f}x);"
              f" MGET: here {ours_get * 1e3:6.2f} ms, Redis.mget {theirs_get * 1e3:6.2f} ms"
              f" ({theirs_get / ours_get:.1f}x)")
        database.flush()


def bench_direct(columns: dict[str, np.ndarray], repeats: int, database: RedisDatabase) -> None:
    from uvdose.models import engine

    def compute(cols):
        return engine.compute(engine.Conditions.from_columns(cols)).as_columns()

    compute({k: v[:50] for k, v in columns.items()})  # load tables once
    # A first compute_through warms numpy's and the engine's lazy set-up.
    GridCellCache("memory").compute_through(scenario(20, 5, seed=3), compute, "bench:warm-up")
    uncached = best_of(1, lambda: compute(columns))
    print(f"engine, uncached, {len(columns['time_unix_s'])} records: {uncached * 1e3:.1f} ms")
    for backend in ("redis", "memory"):
        cache = GridCellCache(backend, redis_url=database.url)
        if backend == "redis":
            database.flush()
        cold = best_of(1, lambda: cache.compute_through(columns, compute, CONTEXT))
        warm = best_of(repeats, lambda: cache.compute_through(columns, compute, CONTEXT))
        print(f"compute_through {backend:6s}: cold {cold * 1e3:7.1f} ms, warm {warm * 1e3:6.1f} ms,"
              f" warm/cold {cold / warm:5.1f}x, uncached/warm {uncached / warm:5.1f}x")
        if backend == "redis":
            client = cache.store.client
            sizes = [client.memory_usage(k) for k in client.scan_iter(b"uvdose:c:*", count=1000)][:200]
            print(f"  Redis MEMORY USAGE per cell (engine defaults, no spectrum): median {statistics.median(sizes):.0f} B")
            database.flush()


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _post(url: str, body: bytes) -> tuple[int, float]:
    request = urllib.request.Request(url, data=body, headers={"Content-Type": "application/json"})
    started = time.perf_counter()
    with urllib.request.urlopen(request, timeout=600) as reply:
        reply.read()
        return reply.status, time.perf_counter() - started


CLIENT_AEROSOL = {"angstrom_exponent": 1.0, "single_scattering_albedo": 0.85}
"""A client-measured aerosol (an invented sun-photometer reading) outside the precomputed
table's default aerosol type, so that the engine takes the full solve."""


def _body(columns: dict[str, np.ndarray], aerosol: dict[str, float] | None = None) -> bytes:
    times = [datetime.fromtimestamp(t, timezone.utc).isoformat() for t in columns["time_unix_s"]]
    body = {"time": times, "lat": columns["latitude_deg"].tolist(), "lon": columns["longitude_deg"].tolist()}
    for name, value in (aerosol or {}).items():
        body[name] = [value] * len(times)
    return json.dumps({"columns": body}).encode()


def bench_http(columns: dict[str, np.ndarray], repeats: int, database: RedisDatabase,
               aerosol: dict[str, float] | None = None) -> None:
    body = _body(columns, aerosol)
    warmup = _body(scenario(200, 50, seed=1), aerosol)
    print("HTTP, " + ("client aerosol (full solve per cell)" if aerosol
                      else "default aerosol (precomputed-table engine path)"))
    uncached_s = None
    for backend in ("off", "redis", "memory"):
        port = _free_port()
        # The uncached client-aerosol run sends all 10 000 records to the full solve, past the
        # service's default bound on such records per request: lift it for the measurement.
        env = {**os.environ, "UVDOSE_CACHE": backend, "REDIS_URL": database.url,
               "UVDOSE_MAX_FULL_SOLVE_RECORDS": "100000"}
        env.pop("PROMETHEUS_MULTIPROC_DIR", None)
        process = subprocess.Popen(
            [sys.executable, "-m", "gunicorn", "--workers", "1", "--bind", f"127.0.0.1:{port}",
             "--timeout", "600", "uvdose.service.app:create_app()"],
            cwd=REPO, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
        )
        base = f"http://127.0.0.1:{port}"
        try:
            deadline = time.monotonic() + 60
            while True:
                try:
                    urllib.request.urlopen(base + "/livez", timeout=1).read()
                    break
                except OSError:
                    if time.monotonic() > deadline or process.poll() is not None:
                        raise RuntimeError("gunicorn did not start")
                    time.sleep(0.2)
            if backend == "redis":
                database.flush()
            _post(base + "/v1/irradiance", warmup)  # loads the engine's tables in the worker
            status, cold = _post(base + "/v1/irradiance", body)
            warm = min(_post(base + "/v1/irradiance", body)[1] for _ in range(repeats))
            if backend == "off":
                uncached_s = warm
                note = "  (no cache: every run computes all records)"
            else:
                note = f", uncached/warm {uncached_s / warm:5.1f}x"
            print(f"HTTP {backend:6s}: status {status}, cold {cold * 1e3:7.1f} ms, warm {warm * 1e3:7.1f} ms,"
                  f" warm/cold {cold / warm:5.1f}x{note}")
        finally:
            process.terminate()
            process.wait(timeout=30)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--records", type=int, default=10_000)
    parser.add_argument("--cells", type=int, default=500)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--skip-http", action="store_true")
    parser.add_argument("--stores-only", action="store_true", help="only the store comparisons (part 2)")
    args = parser.parse_args()
    columns = scenario(args.records, args.cells)
    database = claim_database(REDIS_SERVER_URL)
    try:
        if not args.stores_only:
            bench_keys(columns, args.repeats)
        bench_memory_store(max(args.repeats, 7))
        bench_redis_store(database, max(args.repeats, 7))
        if args.stores_only:
            return
        bench_direct(columns, args.repeats, database)
        if not args.skip_http:
            bench_http(columns, args.repeats, database)
            bench_http(columns, args.repeats, database, CLIENT_AEROSOL)
    finally:
        database.release()


if __name__ == "__main__":
    main()
