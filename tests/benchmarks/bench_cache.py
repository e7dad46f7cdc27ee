"""Benchmark of the physics-state cache (a script; pytest does not collect it).

    python tests/benchmarks/bench_cache.py [--repeats 3] [--skip-http] [--stores-only]

Scenarios (invented, our own):

- *fleet*: the Quai Nord depot's 20 vans over Lyon (45.70–45.80° N, 4.78–4.92° E, streets
  at 160–320 m) for a month (July 2026), a fix every 2 minutes from 08:00 to 18:00 local
  time, asphalt ground, ozone from the climatology; one request per van and day
  (300 records), 600 requests.
- *district*: 150 fields of a 20 × 20 km farm district near Valence (44.85–45.03° N,
  4.85–5.10° E, 120–260 m), each asking for its season (1 April – 30 September 2026,
  8 Gauss–Legendre samples a day, grass ground); one request per field (1 464 samples),
  150 requests.

Printed:

1. Key building alone (round, pack, dedupe, split into keys) for 10 000 records, against
   a baseline of one ``hashlib.blake2b`` per record in a Python loop.
2. The stores against the libraries they could be (the figures quoted beside
   ``service/cache/memory_store.py`` and ``redis_store.py``): the in-process store's
   ``get_many``/``set_many`` of 10 000 keys against ``cachetools`` (``LRUCache`` holding
   (expiry, value) pairs, ``TTLCache``, ``TLRUCache``) behind the same lock; the Redis
   store's hand-packed pipelines (500 and 10 000 ``SET … PX``; MGET of them) against
   redis-py's ``pipeline(transaction=False)`` and ``Redis.mget``.
3. Each stream through the engine with the in-process cache, keyed two ways: the
   *physics key* of the service (the transfer of each rounded state, solar geometry exact)
   and, for comparison, the *cell key* it replaced (place in 0.05° cells, time in 2-minute
   cells, the other inputs rounded; the whole engine run at the cell centre, as up to
   model version 0.3.0). For each: the hit rate over the stream (entries found / entries
   asked for; every request has its own write bound, as in the service), entries stored,
   engine rows computed, the time of the stream's first (cold) and second (warm) pass,
   warm/cold, and the time without a cache.
4. HTTP: ``POST /v1/irradiance`` of one fleet day (all 20 vans, 6 000 records) on one
   gunicorn worker on loopback, cold and warm, for Redis, in-process and no cache, with
   the default aerosol and with a client-measured aerosol.

Redis is the server at $REDIS_URL or 127.0.0.1:6379. The benchmark claims a database of
its own there the way the test suite does (``tests/redis_claim.py``: one of 1–15, empty,
never database 0), flushes only that one and gives it back empty at the end.
"""
from __future__ import annotations

import os

for _variable in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_variable] = "1"  # one core, as a server worker runs (service.server.pin_numeric_threads)

import argparse  # noqa: E402
import hashlib  # noqa: E402
import json  # noqa: E402
import socket  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import threading  # noqa: E402
import time  # noqa: E402
import urllib.request  # noqa: E402
from dataclasses import dataclass  # noqa: E402
from datetime import datetime, timezone  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))

from uvdose.models import dose, engine  # noqa: E402
from uvdose.service.cache import StateCache  # noqa: E402
from uvdose.service.cache.byte_rows import distinct_rows, split_rows  # noqa: E402
from uvdose.service.cache.memory_store import MemoryStore  # noqa: E402
from uvdose.service.cache.physics_keys import PhysicsKeying  # noqa: E402
from uvdose.service.cache.redis_store import RedisStore  # noqa: E402
from tests.redis_claim import RedisDatabase, claim_database  # noqa: E402
from timing import best_of  # noqa: E402  (this folder; see timing.py)

REDIS_SERVER_URL = os.environ.get("REDIS_URL", "redis://127.0.0.1:6379")
SPECTRA = ("erythema", "actinic_icnirp", "plant_damage")
LARGE_LRU = 2_000_000  # the comparison of keys should not be one of eviction


# -- the streams ------------------------------------------------------------------------

def _terrain_m(lat, lon, low, high):
    """A smooth invented terrain between ``low`` and ``high`` metres."""
    wave = np.sin(37.0 * lat) * np.cos(29.0 * lon) + 0.5 * np.sin(71.0 * (lat + lon))
    return low + (high - low) * (wave + 1.5) / 3.0


def fleet_requests(vans: int = 20, days: int = 31, step_min: float = 2.0) -> list[dict[str, np.ndarray]]:
    """One request per van and day: its fixes from 08:00 to 18:00 local time (UTC+2)."""
    rng = np.random.default_rng(7)
    first_day = datetime(2026, 7, 1, 6, 0, tzinfo=timezone.utc).timestamp()
    fixes = int(10 * 60 / step_min)
    requests = []
    for day in range(days):
        for van in range(vans):
            # A van wanders around the city: a random walk of 0–300 m per fix.
            lat = 45.75 + np.cumsum(rng.normal(0, 0.0015, fixes)).clip(-0.05, 0.05)
            lon = 4.85 + np.cumsum(rng.normal(0, 0.002, fixes)).clip(-0.07, 0.07)
            times = first_day + day * 86_400 + np.arange(fixes) * step_min * 60 + rng.uniform(0, 30, fixes)
            requests.append({"time_unix_s": times, "latitude_deg": lat, "longitude_deg": lon,
                             "elevation_m": np.round(_terrain_m(lat, lon, 160, 320)),
                             "surface_type": np.full(fixes, "asphalt", dtype=object)})
    return requests


def district_fields(fields: int = 150) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(8)
    lat = 44.85 + rng.uniform(0, 0.18, fields)
    lon = 4.85 + rng.uniform(0, 0.25, fields)
    return {"latitude_deg": lat, "longitude_deg": lon,
            "elevation_m": np.round(_terrain_m(lat, lon, 120, 260)),
            "surface_type": np.full(fields, "grass", dtype=object)}


SEASON_DAYS = np.arange(np.datetime64("2026-04-01"), np.datetime64("2026-10-01")).astype(
    "datetime64[s]").astype(np.int64).astype(float)


# -- the two keyings --------------------------------------------------------------------

CELL_STEPS = {"elevation_m": 10.0, "pressure_hpa": 1.0, "ozone_du": 1.0, "aod_550": 0.01,
              "angstrom_exponent": 0.05, "single_scattering_albedo": 0.002, "asymmetry_factor": 0.005,
              "surface_albedo": 0.01, "cloud_modification_factor": 0.002, "tilt_deg": 1.0,
              "receiver_azimuth_deg": 1.0, "sky_view_factor": 0.01}


@dataclass(frozen=True)
class CellKeying:
    """The place-and-time keying the physics key replaced (its definition, for comparison):
    0.05° cells from (−90°, −180°), 2-minute cells from the epoch, the other inputs
    rounded to ``CELL_STEPS``; the engine runs on the cell centres."""

    cell_deg: float = 0.05
    cell_s: float = 120.0

    def describe(self) -> str:
        return f"cells;{self.cell_deg};{self.cell_s}"

    def quantise(self, columns):
        indices, centres = {}, {}
        for name, raw in columns.items():
            values = np.asarray(raw)
            if values.dtype.kind in "OUS":
                codes = np.unique(values.astype(str), return_inverse=True)[1].reshape(-1)
                indices[name], centres[name] = codes.astype(np.int64), values
                continue
            values = values.astype(float)
            nan = np.isnan(values)
            given = np.where(nan, 0.0, values)
            if name == "time_unix_s":
                index = np.floor(given / self.cell_s)
                centre = (index + 0.5) * self.cell_s
            elif name == "latitude_deg":
                index = np.floor((given + 90.0) / self.cell_deg)
                centre = -90.0 + (index + 0.5) * self.cell_deg
            elif name == "longitude_deg":
                index = np.floor((given + 180.0) / self.cell_deg)
                centre = -180.0 + (index + 0.5) * self.cell_deg
            else:
                step = CELL_STEPS[name]
                index = np.floor(given / step + 0.5)
                centre = index * step
            indices[name] = np.where(nan, -(2**40), index).astype(np.int64)
            centres[name] = np.where(nan, np.nan, centre)
        return indices, centres


def cell_keyed_evaluator(cache: StateCache, writes) -> dose.Evaluator:
    """The whole engine through the cache, keyed on place-and-time cells."""
    def whole_engine(columns):
        return engine.compute(engine.Conditions.from_columns(columns), spectra=SPECTRA).as_columns()

    return lambda columns: cache.compute_through(columns, whole_engine, "cells:" + ",".join(SPECTRA), writes)


def physics_keyed_evaluator(cache: StateCache | None, writes) -> dose.Evaluator:
    """The engine with its transfer through the cache (the service's way); None: no cache."""
    memo = None
    if cache is not None:
        def memo(description, state, transfer):
            return cache.compute_through(state, transfer, description, writes)

    return dose.engine_evaluator(SPECTRA, transfer_memo=memo)


def run_stream(stream: str, keying: str | None, cache: StateCache | None) -> float:
    """One pass of ``stream`` (one request at a time); seconds."""
    started = time.perf_counter()
    if stream == "fleet":
        for request in FLEET:
            writes = cache.allowance() if cache is not None else None
            evaluate = (cell_keyed_evaluator(cache, writes) if keying == "cell"
                        else physics_keyed_evaluator(cache, writes))
            evaluate(request)
    else:
        for field in range(len(DISTRICT["latitude_deg"])):
            writes = cache.allowance() if cache is not None else None
            evaluate = (cell_keyed_evaluator(cache, writes) if keying == "cell"
                        else physics_keyed_evaluator(cache, writes))
            one = {name: value[field:field + 1] for name, value in DISTRICT.items()}
            dose.field_season(one, SEASON_DAYS, evaluate, spectra=list(SPECTRA))
    return time.perf_counter() - started


FLEET: list = []
DISTRICT: dict = {}


def bench_streams() -> None:
    global FLEET, DISTRICT
    FLEET = fleet_requests()
    DISTRICT = district_fields()
    records = {"fleet": sum(len(r["time_unix_s"]) for r in FLEET),
               "district": len(DISTRICT["latitude_deg"]) * len(SEASON_DAYS) * 8}
    print("streams through the engine, in-process cache, one request at a time:")
    for stream in ("fleet", "district"):
        uncached = run_stream(stream, None, None)
        print(f"  {stream}: {records[stream]} records, no cache {uncached:.2f} s")
        for keying in ("cell", "physics"):
            cache = StateCache("memory", keying=CellKeying() if keying == "cell" else PhysicsKeying(),
                               max_entries=LARGE_LRU)
            cold = run_stream(stream, keying, cache)
            hits, misses, unstored = cache.stats["hit"], cache.stats["miss"], cache.stats["unstored"]
            warm = run_stream(stream, keying, cache)
            print(f"    {keying:7s} key: hit rate {hits / (hits + misses):6.1%} ({hits} of {hits + misses} entries"
                  f" asked; {misses} computed, {unstored} not stored), {len(cache.store)} entries stored;"
                  f" cold {cold:6.2f} s, warm {warm:6.2f} s, warm/cold {cold / warm:4.1f}x,"
                  f" no cache/cold {uncached / cold:4.1f}x")


def bench_keys(repeats: int) -> None:
    columns = fleet_requests(vans=34, days=1)
    columns = {k: np.concatenate([r[k] for r in columns])[:10_000] for k in columns[0]}
    _, state, _, _ = engine.transfer_state(engine.Conditions.from_columns(columns))
    cache = StateCache("memory")

    def ours():
        indices, _ = cache.keying.quantise(state)
        matrix = cache.key_rows(indices, "bench")
        first, _ = distinct_rows(matrix)
        split_rows(matrix[first])

    def loop_baseline():
        stacked = np.column_stack([state[k] for k in sorted(state)])
        {hashlib.blake2b(row.tobytes(), digest_size=16).digest() for row in stacked}

    baseline = best_of(repeats, loop_baseline)
    measured = best_of(repeats, ours)
    print(f"keys for {len(state['ozone_du'])} records: {measured * 1e3:.2f} ms (per-record blake2b loop"
          f" {baseline * 1e3:.2f} ms, ratio {baseline / measured:.1f}x)")


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
        keys = [b"uvdose:s:" + rng.bytes(42) for _ in range(count)]
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


CLIENT_AEROSOL = {"aod_550": 0.32, "angstrom_exponent": 1.05, "single_scattering_albedo": 0.86,
                  "asymmetry_factor": 0.68}
"""A client-measured aerosol (an invented sun-photometer reading), not the engine's default."""


def _body(columns: dict[str, np.ndarray], aerosol: dict[str, float] | None = None) -> bytes:
    times = [datetime.fromtimestamp(t, timezone.utc).isoformat() for t in columns["time_unix_s"]]
    body = {"time": times, "lat": columns["latitude_deg"].tolist(), "lon": columns["longitude_deg"].tolist(),
            "elevation_m": columns["elevation_m"].tolist(), "surface_type": list(columns["surface_type"])}
    for name, value in (aerosol or {}).items():
        body[name] = [value] * len(times)
    return json.dumps({"columns": body, "spectra": list(SPECTRA)}).encode()


def bench_http(repeats: int, database: RedisDatabase, aerosol: dict[str, float] | None = None) -> None:
    day = fleet_requests(days=1)
    columns = {k: np.concatenate([r[k] for r in day]) for k in day[0]}
    body = _body(columns, aerosol)
    warmup = _body({k: v[:200] for k, v in fleet_requests(vans=1, days=1)[0].items()}, aerosol)
    print(f"HTTP, one fleet day ({len(columns['time_unix_s'])} records), "
          + ("client aerosol" if aerosol else "default aerosol"))
    uncached_s = None
    for backend in ("off", "redis", "memory"):
        port = _free_port()
        # A client-aerosol run may need the full solve for every record, past the service's
        # default bound on such records per request: lift it for the measurement.
        env = {**os.environ, "UVDOSE_CACHE": backend, "REDIS_URL": database.url,
               "UVDOSE_MAX_FULL_SOLVE_RECORDS": "1000000"}
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
            if backend == "redis":
                database.flush()
            status, cold = _post(base + "/v1/irradiance", body)
            warm = min(_post(base + "/v1/irradiance", body)[1] for _ in range(repeats))
            if backend == "off":
                uncached_s = warm
                note = "  (no cache: every run computes all records)"
            else:
                note = f", uncached/warm {uncached_s / warm:5.1f}x"
            if backend == "redis":
                client = database.client()
                sizes = [client.memory_usage(k) for k in client.scan_iter(b"uvdose:s:*", count=1000)][:300]
                note += f"; Redis MEMORY USAGE per entry: median {statistics.median(sizes):.0f} B"
            print(f"HTTP {backend:6s}: status {status}, cold {cold * 1e3:7.1f} ms, warm {warm * 1e3:7.1f} ms,"
                  f" warm/cold {cold / warm:5.1f}x{note}")
        finally:
            process.terminate()
            process.wait(timeout=30)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--skip-http", action="store_true")
    parser.add_argument("--skip-streams", action="store_true")
    parser.add_argument("--stores-only", action="store_true", help="only the store comparisons (part 2)")
    args = parser.parse_args()
    database = claim_database(REDIS_SERVER_URL)
    try:
        if not args.stores_only:
            bench_keys(args.repeats)
        bench_memory_store(max(args.repeats, 7))
        bench_redis_store(database, max(args.repeats, 7))
        if args.stores_only:
            return
        if not args.skip_streams:
            bench_streams()
        if not args.skip_http:
            bench_http(args.repeats, database)
            bench_http(args.repeats, database, CLIENT_AEROSOL)
    finally:
        database.release()


if __name__ == "__main__":
    main()
