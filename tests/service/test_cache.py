"""The grid-cell cache against a real Redis and in process: quantisation, hits, misses,
expiry, model-version and context changes, dedupe, LRU bound and round trips.

The engine here is a recording stand-in (``RecordingEngine``): a smooth, deterministic
function of every input, so a value served for the wrong cell, the wrong record or a stale
context shows up as a wrong number. Accuracy against the real engine is in
``test_cache_accuracy.py``; faults in ``test_cache_faults.py``.
"""
from __future__ import annotations

import threading
import time

import numpy as np
import pytest
import redis

from uvdose import models
from uvdose.service.cache import INPUT_RESOLUTIONS, CellGrid, GridCellCache, breaker, build_cache, byte_rows, grid_cell_cache
from uvdose.service.config import ConfigurationError, settings_from_environment

CONTEXT = "spectra=erythema,plant_damage;filter=none;spectrum=no"
SPECTRAL_COLUMNS = 5


class RecordingEngine:
    """A stand-in engine that remembers how many rows each call got."""

    def __init__(self):
        self.calls: list[int] = []

    def __call__(self, columns: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        n = len(columns["time_unix_s"])
        self.calls.append(n)
        ozone = np.where(np.isnan(columns["ozone_du"]), 300.0, columns["ozone_du"])
        mu = np.cos(np.radians(columns["latitude_deg"])) * np.cos(2 * np.pi * columns["time_unix_s"] / 86_400.0)
        uvi = 12.5 * np.clip(mu, 0, None) ** 2.42 * (ozone / 300.0) ** -1.23 + 1e-3 * columns["longitude_deg"]
        result = {
            "uv_index": uvi,
            "effective_w_m2.erythema": uvi / 40.0,
            "ozone_du": ozone,
            "ozone_source": np.where(np.isnan(columns["ozone_du"]), "climatology", "client"),
            "exposure_category": np.where(uvi < 3, "low", "moderate").astype(object),
        }
        for index in range(SPECTRAL_COLUMNS):
            result[f"spectrum_w_m2_nm.{index}"] = uvi * (index + 1) * 1e-3
        return result

    @property
    def rows_computed(self) -> int:
        return sum(self.calls)


def batch(n: int, cells: int, seed: int = 0) -> dict[str, np.ndarray]:
    """``n`` records scattered inside ``cells`` distinct grid cells (0.05°, 2 min)."""
    rng = np.random.default_rng(seed)
    cell_lat = -60 + 0.05 * rng.choice(2400, cells, replace=False)
    cell_lon = -180 + 0.05 * rng.choice(7200, cells, replace=False)
    pick = rng.integers(0, cells, n)
    pick[:cells] = np.arange(cells)  # every cell is used at least once
    # Offsets stay well inside a cell so no record sits on a cell boundary.
    return {
        "time_unix_s": 1_795_999_920.0 + 120.0 * (pick % 5) + rng.uniform(10, 110, n),
        "latitude_deg": cell_lat[pick] + rng.uniform(0.005, 0.045, n),
        "longitude_deg": cell_lon[pick] + rng.uniform(0.005, 0.045, n),
        "ozone_du": np.where(pick % 3 == 0, np.nan, 280.0 + (pick % 4) * 10 + rng.uniform(-0.3, 0.3, n)),
        "surface_type": np.where(pick % 2 == 0, "grass", "").astype(object),
    }


def expected(cache: GridCellCache, columns: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """What the cache must return: the engine run, uncached, on the cell-centre inputs."""
    return RecordingEngine()(cache.cell_centres(columns))


def assert_same(result: dict[str, np.ndarray], reference: dict[str, np.ndarray], spectral_rtol: float = 1e-6) -> None:
    assert set(result) == set(reference)
    for name, values in reference.items():
        if values.dtype.kind in "OU":
            assert list(result[name]) == list(values), name
        elif name.startswith("spectrum_w_m2_nm."):
            # stored as float32 by design
            np.testing.assert_allclose(result[name], values, rtol=spectral_rtol, atol=0, err_msg=name)
        else:
            np.testing.assert_array_equal(result[name], values, err_msg=name)


class FakeClock:
    def __init__(self, now: float = 1000.0):
        self.now = now

    def __call__(self) -> float:
        return self.now


@pytest.fixture(params=["memory", "redis"])
def any_cache(request):
    """A cache of each backend; the Redis one on the test database, flushed around the test."""
    if request.param == "memory":
        yield GridCellCache("memory")
        return
    client = request.getfixturevalue("redis_client")
    url = client.connection_pool.connection_kwargs
    cache = GridCellCache("redis", redis_url=_url_of(client))
    yield cache
    del url


def _url_of(client: redis.Redis) -> str:
    kwargs = client.connection_pool.connection_kwargs
    if "path" in kwargs:
        return f"unix://{kwargs['path']}?db={kwargs.get('db', 0)}"
    return f"redis://{kwargs['host']}:{kwargs['port']}/{kwargs.get('db', 0)}"


# -- quantisation ----------------------------------------------------------------------

def test_cell_centres_of_place_and_time():
    grid = CellGrid(cell_deg=0.05, cell_minutes=2.0)
    centres = grid.cell_centres({
        "time_unix_s": np.array([0.0, 119.9, 120.0, 1_796_000_061.0]),
        "latitude_deg": np.array([0.01, -0.01, 90.0, -90.0]),
        "longitude_deg": np.array([0.01, 179.99, 180.0, -180.0]),
    })
    # Hand-worked: 2-min cells from the epoch, 0.05° cells from (-90°, -180°).
    np.testing.assert_allclose(centres["time_unix_s"], [60.0, 60.0, 180.0, 1_796_000_100.0])
    np.testing.assert_allclose(centres["latitude_deg"], [0.025, -0.025, 89.975, -89.975], atol=1e-9)
    # 180° E is the same meridian as 180° W: it falls in the first cell east of -180°.
    np.testing.assert_allclose(centres["longitude_deg"], [0.025, 179.975, -179.975, -179.975], atol=1e-9)


def test_other_inputs_round_to_their_resolution_and_keep_not_given():
    grid = CellGrid()
    raw = {
        "time_unix_s": np.zeros(3),
        "ozone_du": np.array([301.4, 301.6, np.nan]),
        "elevation_m": np.array([1234.0, 1236.0, np.nan]),
        "receiver_azimuth_deg": np.array([359.6, 0.4, 180.2]),
        "cloud_modification_factor": np.array([0.3124, 0.3132, 1.4999]),
        "surface_type": np.array(["snow_fresh", "", "grass"], dtype=object),
    }
    centres = grid.cell_centres(raw)
    np.testing.assert_allclose(centres["ozone_du"][:2], [301.0, 302.0])
    np.testing.assert_allclose(centres["elevation_m"][:2], [1230.0, 1240.0])
    np.testing.assert_allclose(centres["receiver_azimuth_deg"], [0.0, 0.0, 180.0])
    np.testing.assert_array_equal(centres["cloud_modification_factor"], [0.312, 0.314, 1.5])
    assert np.isnan(centres["ozone_du"][2]) and np.isnan(centres["elevation_m"][2])
    assert list(centres["surface_type"]) == ["snow_fresh", "", "grass"]
    assert set(INPUT_RESOLUTIONS) <= {
        "elevation_m", "pressure_hpa", "ozone_du", "aod_550", "angstrom_exponent",
        "single_scattering_albedo", "asymmetry_factor", "surface_albedo",
        "cloud_modification_factor", "tilt_deg", "receiver_azimuth_deg", "sky_view_factor",
    }


def test_grid_refuses_a_cell_that_does_not_tile_the_globe():
    with pytest.raises(ConfigurationError, match="UVDOSE_CELL_DEG"):
        CellGrid(cell_deg=0.07)
    with pytest.raises(ConfigurationError, match="UVDOSE_CELL_MINUTES"):
        CellGrid(cell_minutes=0)


# -- hits, misses, dedupe ----------------------------------------------------------------

def test_first_batch_computes_each_cell_once_second_batch_computes_nothing(any_cache):
    engine = RecordingEngine()
    columns = batch(2000, cells=50)
    first = any_cache.compute_through(columns, engine, CONTEXT)
    assert engine.calls == [50]
    second = any_cache.compute_through(columns, engine, CONTEXT)
    assert engine.calls == [50]
    reference = expected(any_cache, columns)
    assert_same(first, reference)
    assert_same(second, reference)
    assert any_cache.stats == {"hit": 50, "miss": 50, "error": 0}


def test_hit_and_miss_return_identical_bits(any_cache):
    engine = RecordingEngine()
    columns = batch(300, cells=30, seed=4)
    first = any_cache.compute_through(columns, engine, CONTEXT)
    second = any_cache.compute_through(columns, engine, CONTEXT)
    for name in first:
        assert first[name].dtype == second[name].dtype, name
        if first[name].dtype.kind == "f":
            np.testing.assert_array_equal(first[name], second[name], err_msg=name)


def test_partial_overlap_computes_only_new_cells(any_cache):
    engine = RecordingEngine()
    columns = batch(400, cells=40, seed=1)
    half = {name: value[:20] for name, value in columns.items()}  # the first 20 cells
    any_cache.compute_through(half, engine, CONTEXT)
    result = any_cache.compute_through(columns, engine, CONTEXT)
    assert engine.calls == [20, 20]
    assert_same(result, expected(any_cache, columns))


def test_context_and_model_version_change_every_key(any_cache, monkeypatch):
    engine = RecordingEngine()
    columns = batch(100, cells=10, seed=2)
    any_cache.compute_through(columns, engine, CONTEXT)
    any_cache.compute_through(columns, engine, CONTEXT + ";include_spectrum=yes")
    assert engine.calls == [10, 10]
    monkeypatch.setattr(models, "MODEL_VERSION", models.MODEL_VERSION + "+changed")
    any_cache.compute_through(columns, engine, CONTEXT)
    assert engine.calls == [10, 10, 10]


def test_cell_size_is_part_of_the_key(redis_client):
    engine = RecordingEngine()
    columns = batch(100, cells=10, seed=3)
    url = _url_of(redis_client)
    GridCellCache("redis", redis_url=url).compute_through(columns, engine, CONTEXT)
    coarse = GridCellCache("redis", redis_url=url, grid=CellGrid(cell_deg=0.1))
    result = coarse.compute_through(columns, engine, CONTEXT)
    assert len(engine.calls) == 2
    assert_same(result, expected(coarse, columns))


def test_cache_off_runs_the_engine_on_exact_inputs():
    engine = RecordingEngine()
    columns = batch(50, cells=5)
    result = GridCellCache("off").compute_through(columns, engine, CONTEXT)
    assert engine.calls == [50]
    assert_same(result, RecordingEngine()(columns), spectral_rtol=0)


def test_infinite_input_bypasses_the_cache_so_the_engine_can_name_it():
    seen = []
    columns = batch(10, cells=2)
    columns["ozone_du"][3] = np.inf
    GridCellCache("memory").compute_through(columns, lambda c: seen.append(c) or RecordingEngine()(c), CONTEXT)
    assert np.isinf(seen[0]["ozone_du"][3]) and len(seen[0]["ozone_du"]) == 10


def test_an_empty_batch_goes_to_the_engine_without_a_fault(any_cache):
    empty = {name: value[:0] for name, value in batch(10, cells=2).items()}
    result = any_cache.compute_through(empty, RecordingEngine(), CONTEXT)
    assert len(result["uv_index"]) == 0 and any_cache.stats["error"] == 0


def test_distinct_rows_survive_a_check_collision(monkeypatch):
    matrix = np.array([[1, 2], [3, 4], [1, 2], [5, 6]], dtype=np.uint8)
    monkeypatch.setattr(byte_rows, "row_checks", lambda rows: np.zeros(len(rows), dtype=np.uint64))
    first, inverse = byte_rows.distinct_rows(matrix)
    np.testing.assert_array_equal(matrix[first][inverse], matrix)
    assert len(first) == 3


def test_threads_sharing_one_cache_each_get_their_own_records(any_cache):
    # gunicorn's threaded workers share one cache object per process.
    batches = [batch(300, cells=30, seed=seed % 3) for seed in range(6)]
    references = [expected(any_cache, columns) for columns in batches]
    failures = []

    def work(number: int) -> None:
        try:
            for _ in range(5):
                assert_same(any_cache.compute_through(batches[number], RecordingEngine(), CONTEXT), references[number])
        except AssertionError as error:  # reported from the main thread below
            failures.append(error)

    threads = [threading.Thread(target=work, args=(n,)) for n in range(len(batches))]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert not failures
    assert any_cache.stats["hit"] > 0


# -- expiry and bounds -------------------------------------------------------------------

def test_redis_entries_expire_after_the_ttl(redis_client):
    engine = RecordingEngine()
    columns = batch(40, cells=4)
    cache = GridCellCache("redis", redis_url=_url_of(redis_client), ttl_s=0.3)
    cache.compute_through(columns, engine, CONTEXT)
    ttls_ms = [redis_client.pttl(key) for key in redis_client.keys(b"uvdose:c:*")]
    assert len(ttls_ms) == 4 and all(0 < ttl <= 300 for ttl in ttls_ms)
    cache.compute_through(columns, engine, CONTEXT)
    assert engine.calls == [4]
    time.sleep(0.45)
    cache.compute_through(columns, engine, CONTEXT)
    assert engine.calls == [4, 4]


def test_memory_entries_expire_and_the_lru_stays_bounded():
    clock = FakeClock()
    engine = RecordingEngine()
    cache = GridCellCache("memory", ttl_s=60, max_entries=30, clock=clock)
    columns = batch(40, cells=40, seed=5)  # record i lies in cell i
    older = {k: v[:10] for k, v in columns.items()}
    newer = {k: v[10:] for k, v in columns.items()}
    cache.compute_through(older, engine, CONTEXT)
    cache.compute_through(newer, engine, CONTEXT)
    assert len(cache.store) == 30
    # The 30 most recently written cells are kept; the 10 older ones were evicted.
    cache.compute_through(newer, engine, CONTEXT)
    assert engine.calls == [10, 30]
    cache.compute_through(older, engine, CONTEXT)
    assert engine.calls == [10, 30, 10]
    clock.now += 61
    cache.compute_through(older, engine, CONTEXT)
    assert engine.calls == [10, 30, 10, 10]


# -- round trips and stored values -------------------------------------------------------

@pytest.fixture
def round_trips(monkeypatch):
    """Counts writes of commands to any Redis socket (one per round trip)."""
    counter = {"n": 0}
    original = redis.connection.AbstractConnection.send_packed_command

    def counting(self, command, check_health=True):
        counter["n"] += 1
        return original(self, command, check_health)

    monkeypatch.setattr(redis.connection.AbstractConnection, "send_packed_command", counting)
    return counter


def test_a_batch_costs_one_read_and_one_write_round_trip(redis_client, round_trips):
    engine = RecordingEngine()
    columns = batch(10_000, cells=500, seed=6)
    url = _url_of(redis_client)
    cache = GridCellCache("redis", redis_url=url)
    cache.status()  # opens the pooled connection (its SELECT is one more round trip, once)
    before_calls = _commandstats(redis_client)
    round_trips["n"] = 0
    cache.compute_through(columns, engine, CONTEXT)
    assert round_trips["n"] == 2  # MGET pipeline, then SET pipeline
    round_trips["n"] = 0
    cache.compute_through(columns, engine, CONTEXT)
    assert round_trips["n"] == 1
    # A fresh process knows no value layout yet: one more read for it.
    fresh = GridCellCache("redis", redis_url=url)
    fresh.status()
    round_trips["n"] = 0
    fresh.compute_through(columns, engine, CONTEXT)
    assert round_trips["n"] == 2
    after_calls = _commandstats(redis_client)
    assert after_calls.get("set", 0) - before_calls.get("set", 0) == 501  # 500 cells + 1 layout
    assert engine.calls == [500]


def _commandstats(client: redis.Redis) -> dict[str, int]:
    stats = client.info("commandstats")
    return {name.removeprefix("cmdstat_"): value["calls"] for name, value in stats.items()}


def test_values_are_compact(redis_client):
    columns = batch(20, cells=2)
    GridCellCache("redis", redis_url=_url_of(redis_client)).compute_through(columns, RecordingEngine(), CONTEXT)
    keys = redis_client.keys(b"uvdose:c:*")
    value = redis_client.get(keys[0])
    # header 16 + 3 float64 + 5 float32 (spectral) + strings padded to 8 bytes:
    # ozone_source 16 ("climatology" in the batch), exposure_category 8 ("moderate")
    assert len(value) == 16 + 3 * 8 + 5 * 4 + 16 + 8
    assert len(keys[0]) < 100


def test_a_corrupt_or_misplaced_value_is_recomputed_not_served(redis_client):
    engine = RecordingEngine()
    columns = batch(60, cells=3, seed=7)
    cache = GridCellCache("redis", redis_url=_url_of(redis_client))
    cache.compute_through(columns, engine, CONTEXT)
    keys = sorted(redis_client.keys(b"uvdose:c:*"))
    values = [redis_client.get(k) for k in keys]
    # Swap two cells' values (a desynchronised reply would look like this) and cut a third.
    redis_client.set(keys[0], values[1])
    redis_client.set(keys[1], values[0])
    redis_client.set(keys[2], values[2][:-3])
    result = cache.compute_through(columns, engine, CONTEXT)
    assert engine.calls == [3, 3]
    assert_same(result, expected(cache, columns))


def test_a_value_corrupted_in_the_store_is_recomputed_not_served(redis_client):
    engine = RecordingEngine()
    columns = batch(60, cells=3, seed=8)
    cache = GridCellCache("redis", redis_url=_url_of(redis_client))
    cache.compute_through(columns, engine, CONTEXT)
    key = sorted(redis_client.keys(b"uvdose:c:*"))[0]
    value = bytearray(redis_client.get(key))
    value[-1] ^= 0x01  # one flipped bit in the last number; header and size intact
    redis_client.set(key, bytes(value))
    result = cache.compute_through(columns, engine, CONTEXT)
    assert engine.calls == [3, 1] and cache.stats["error"] == 1
    assert_same(result, expected(cache, columns))


# -- settings ----------------------------------------------------------------------------

def built(**environ: str) -> GridCellCache:
    """The cache ``create_app`` would build for this environment."""
    return build_cache(settings_from_environment(environ))


def test_settings_choose_the_backend(monkeypatch, redis_url):
    monkeypatch.delenv("REDIS_URL", raising=False)
    monkeypatch.delenv("UVDOSE_CACHE", raising=False)
    assert built().backend == "memory"
    assert built(REDIS_URL=redis_url).backend == "redis"
    assert built(REDIS_URL=redis_url, UVDOSE_CACHE="memory").backend == "memory"
    assert built(UVDOSE_CACHE="off").backend == "off"
    assert built(UVDOSE_CACHE="none").backend == "off"
    monkeypatch.setenv("UVDOSE_CELL_MINUTES", "5")
    monkeypatch.setenv("UVDOSE_CACHE_MAX_ENTRIES", "7")
    from_environment = build_cache(settings_from_environment())
    assert from_environment.grid.cell_minutes == 5.0 and from_environment.store.max_entries == 7


@pytest.mark.parametrize("name, value", [
    ("UVDOSE_CACHE", "sometimes"),
    ("UVDOSE_CACHE_TTL_S", "soon"),
    ("UVDOSE_CACHE_TTL_S", "0"),
    ("UVDOSE_CELL_DEG", "0.07"),
    ("UVDOSE_CACHE_MAX_ENTRIES", "0"),
])
def test_a_bad_setting_is_refused_by_name(name, value):
    with pytest.raises(ConfigurationError, match=name):
        built(**{name: value})


def test_redis_mode_without_url_is_refused(monkeypatch):
    monkeypatch.delenv("REDIS_URL", raising=False)
    with pytest.raises(ConfigurationError, match="REDIS_URL"):
        built(UVDOSE_CACHE="redis")


def test_status_reports_backend_and_whether_it_answers(redis_client):
    cache = GridCellCache("redis", redis_url=_url_of(redis_client))
    assert cache.status()["answers"] is True
    assert cache.status()["backend"] == "redis"
    assert GridCellCache("memory").status()["answers"] is True
    assert GridCellCache("off").status() == {"backend": "off", "hit": 0, "miss": 0, "error": 0,
                                             "answers": False, "breaker": "closed"}


def test_counts_and_latency_reach_the_prometheus_metrics(redis_client):
    from prometheus_client import REGISTRY

    from uvdose.service import metrics

    def observed() -> float:
        return REGISTRY.get_sample_value("uvdose_cache_operation_duration_seconds_count") or 0.0

    before = metrics.CACHE_EVENTS.labels(event="miss")._value.get()
    built(UVDOSE_CACHE="memory").compute_through(batch(30, cells=3), RecordingEngine(), CONTEXT)
    assert metrics.CACHE_EVENTS.labels(event="miss")._value.get() - before == 3
    cache = built(UVDOSE_CACHE="redis", REDIS_URL=_url_of(redis_client))
    cache.status()
    latencies_before = observed()
    cache.compute_through(batch(30, cells=3), RecordingEngine(), CONTEXT)
    assert observed() - latencies_before == 2  # one read, one write
    assert grid_cell_cache.log.name == breaker.log.name == "uvdose.cache"


def test_observers_hear_every_outcome_and_backend_call():
    heard, latencies = [], []
    cache = GridCellCache("memory", count=lambda event, amount: heard.append((event, amount)),
                          observe_latency=latencies.append)
    columns = batch(30, cells=3)
    cache.compute_through(columns, RecordingEngine(), CONTEXT)
    cache.compute_through(columns, RecordingEngine(), CONTEXT)
    assert heard == [("miss", 3), ("hit", 3)]
    assert len(latencies) == 3 and all(seconds >= 0 for seconds in latencies)  # read, write, read
