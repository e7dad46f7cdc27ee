"""The cache when Redis fails: stopped, restarted, paused (CLIENT PAUSE) or full.

Each test runs a throwaway ``redis-server`` on a free loopback port, so it can be stopped
and started without touching the shared test server. Whatever Redis does, every batch must
be answered with exactly what the uncached transfer gives for the rounded states.
"""
from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import sys
import time
import urllib.request
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import pytest
import redis

from uvdose.service.app import create_app
from uvdose.service.cache import PhysicsKeying, StateCache
from uvdose.service.cache.breaker import Breaker
from tests.service.test_cache import CONTEXT, RecordingTransfer, assert_same, batch, expected

pytestmark = pytest.mark.skipif(shutil.which("redis-server") is None, reason="needs the redis-server binary")

FAST = dict(connect_timeout_s=0.2, timeout_s=0.2, retry_initial_s=0.3, retry_max_s=2.0)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class ThrowawayRedis:
    """A redis-server subprocess on 127.0.0.1 that a test may stop and start again."""

    def __init__(self, port: int):
        self.port = port
        self.url = f"redis://127.0.0.1:{port}/0"
        self.process: subprocess.Popen | None = None

    def start(self) -> "ThrowawayRedis":
        self.process = subprocess.Popen(
            ["redis-server", "--port", str(self.port), "--bind", "127.0.0.1", "--save", "",
             "--appendonly", "no"],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
        )
        deadline = time.monotonic() + 10
        while time.monotonic() < deadline:
            try:
                if self.client().ping():
                    return self
            except redis.ConnectionError:
                time.sleep(0.05)
        raise RuntimeError(f"redis-server did not start on port {self.port}")

    def stop(self) -> None:
        if self.process is not None and self.process.poll() is None:
            self.process.terminate()
            self.process.wait(timeout=10)

    def client(self) -> redis.Redis:
        return redis.Redis.from_url(self.url, socket_timeout=2, socket_connect_timeout=1)


@pytest.fixture
def throwaway_redis():
    server = ThrowawayRedis(_free_port()).start()
    yield server
    server.stop()


def _answered_correctly(cache: StateCache, columns, transfer) -> float:
    started = time.perf_counter()
    result = cache.compute_through(columns, transfer, CONTEXT)
    elapsed = time.perf_counter() - started
    assert_same(result, expected(cache, columns))
    return elapsed


def test_stopped_then_restarted_server(throwaway_redis):
    transfer = RecordingTransfer()
    cache = StateCache("redis", redis_url=throwaway_redis.url, **FAST)
    columns = batch(1000, states=40, seed=11)

    _answered_correctly(cache, columns, transfer)
    _answered_correctly(cache, columns, transfer)
    assert transfer.calls == [40] and cache.stats["error"] == 0

    throwaway_redis.stop()
    # Down: answered from the transfer, the fault counted once, then the breaker skips Redis.
    for _ in range(5):
        assert _answered_correctly(cache, columns, transfer) < 1.0
    assert transfer.calls == [40] * 6
    assert cache.stats["error"] == 1
    status = cache.status()
    assert status["answers"] is False and status["breaker"] == "open"

    throwaway_redis.start()
    time.sleep(FAST["retry_initial_s"] + 0.05)
    # Back: the first batch after the backoff reconnects by itself and refills the entries.
    _answered_correctly(cache, columns, transfer)
    _answered_correctly(cache, columns, transfer)
    assert transfer.calls == [40] * 7
    assert cache.stats["error"] == 1
    assert cache.status()["answers"] is True


def test_readiness_probe_sees_the_outage_and_the_recovery_without_traffic(throwaway_redis):
    cache = StateCache("redis", redis_url=throwaway_redis.url, **FAST)
    assert cache.status()["answers"] is True
    throwaway_redis.stop()
    down = cache.status()
    assert down["answers"] is False and down["breaker"] == "open" and down["error"] == 1
    assert cache.status()["error"] == 1  # within the backoff Redis is not asked again
    throwaway_redis.start()
    time.sleep(FAST["retry_initial_s"] + 0.05)
    up = cache.status()
    assert up["answers"] is True and up["breaker"] == "closed"


def test_restarts_during_a_load_of_many_batches(throwaway_redis):
    transfer = RecordingTransfer()
    cache = StateCache("redis", redis_url=throwaway_redis.url, **FAST)
    batches = [batch(300, states=15, seed=seed % 4) for seed in range(24)]
    for number, columns in enumerate(batches):
        if number in (6, 14):
            throwaway_redis.stop()
        if number in (10, 18):
            throwaway_redis.start()
            time.sleep(FAST["retry_initial_s"] + 0.05)
        _answered_correctly(cache, columns, transfer)
    assert cache.stats["error"] == 2
    assert cache.stats["hit"] > 0


def test_paused_server_costs_one_timeout_then_is_skipped(throwaway_redis):
    transfer = RecordingTransfer()
    cache = StateCache("redis", redis_url=throwaway_redis.url, **FAST)
    columns = batch(500, states=20, seed=12)
    _answered_correctly(cache, columns, transfer)

    throwaway_redis.client().execute_command("CLIENT", "PAUSE", "3000", "ALL")
    first = _answered_correctly(cache, columns, transfer)
    assert first < 1.0  # bounded by the 0.2 s read timeout, not by the 3 s pause
    later = _answered_correctly(cache, columns, transfer)
    assert later < 0.2
    assert cache.stats["error"] == 1
    assert cache.status()["breaker"] == "open"


def test_full_server_refusing_writes_still_answers(throwaway_redis):
    admin = throwaway_redis.client()
    admin.config_set("maxmemory-policy", "noeviction")
    admin.config_set("maxmemory", "1")  # every write is refused with OOM
    transfer = RecordingTransfer()
    cache = StateCache("redis", redis_url=throwaway_redis.url, **FAST)
    columns = batch(500, states=20, seed=13)
    _answered_correctly(cache, columns, transfer)
    assert cache.stats["error"] == 1
    assert admin.dbsize() == 0


def test_nothing_listening_is_a_fast_fault():
    transfer = RecordingTransfer()
    cache = StateCache("redis", redis_url=f"redis://127.0.0.1:{_free_port()}/0", **FAST)
    assert _answered_correctly(cache, batch(200, states=10), transfer) < 1.0
    assert cache.stats == {"hit": 0, "miss": 10, "error": 1, "unstored": 0}


def test_breaker_backoff_doubles_and_resets():
    now = [100.0]
    breaker = Breaker(initial_s=1.0, max_s=3.0, clock=lambda: now[0])
    assert breaker.allow()
    breaker.failure(OSError("refused"))
    assert not breaker.allow()
    now[0] += 1.0
    assert breaker.allow()          # one trial after the backoff
    assert not breaker.allow()      # others keep skipping while it runs
    breaker.failure(OSError("refused"))
    now[0] += 1.5
    assert not breaker.allow()      # the backoff is 2 s now
    now[0] += 0.5
    assert breaker.allow()
    breaker.failure(OSError("refused"))
    now[0] += 3.0                   # capped at max_s
    assert breaker.allow()
    breaker.success()
    assert breaker.allow() and not breaker.is_open


# -- through the app: POST /v1/irradiance ---------------------------------------------

def _irradiance_body(n: int, seed: int) -> dict:
    """Whole-second times (so ISO 8601 text round-trips exactly), one farm region, a summer week."""
    rng = np.random.default_rng(seed)
    times = np.round(1_781_000_000 + rng.uniform(0, 7 * 86_400, n))
    return {"columns": {
        "time": [datetime.fromtimestamp(t, timezone.utc).isoformat() for t in times],
        "lat": (44.0 + rng.uniform(0, 0.2, n)).tolist(),
        "lon": (4.8 + rng.uniform(0, 0.2, n)).tolist(),
        "ozone_du": [None if i % 3 == 0 else float(280 + i % 4 * 10) for i in range(n)],
    }, "spectra": ["erythema", "plant_damage"]}


def _uncached_rounded_state_uvi(body: dict) -> np.ndarray:
    """The engine without a cache, its transfer run on the rounded states."""
    from uvdose.models import engine

    given = body["columns"]
    columns = {
        "time_unix_s": np.array([datetime.fromisoformat(t).timestamp() for t in given["time"]]),
        "latitude_deg": np.array(given["lat"]),
        "longitude_deg": np.array(given["lon"]),
        "ozone_du": np.array([np.nan if v is None else v for v in given["ozone_du"]]),
    }

    def rounded(description, state, transfer):
        return transfer(PhysicsKeying().quantise(state)[1])

    return engine.compute(engine.Conditions.from_columns(columns), spectra=body["spectra"],
                          transfer_memo=rounded).uv_index


FAULT_SETTINGS = {"UVDOSE_REDIS_TIMEOUT_S": "0.2", "UVDOSE_REDIS_CONNECT_TIMEOUT_S": "0.2",
                  "UVDOSE_CACHE_RETRY_S": "0.3", "UVDOSE_CACHE_RETRY_MAX_S": "0.3"}


def test_irradiance_route_answers_through_redis_faults(throwaway_redis):
    app = create_app({"TESTING": True, "UVDOSE_CACHE": "redis", "REDIS_URL": throwaway_redis.url,
                      **FAULT_SETTINGS})
    cache = app.extensions["uvdose_cache"]
    client = app.test_client()
    body = _irradiance_body(200, seed=14)
    reference = _uncached_rounded_state_uvi(body)

    def ask():
        reply = client.post("/v1/irradiance", json=body)
        assert reply.status_code == 200, reply.get_data(as_text=True)[:500]
        np.testing.assert_allclose(reply.get_json()["columns"]["uv_index"], reference, rtol=1e-12, atol=1e-14)

    ask()
    throwaway_redis.client().execute_command("CLIENT", "PAUSE", "1500", "ALL")
    ask()
    ask()
    throwaway_redis.stop()
    time.sleep(0.35)
    ask()
    ask()
    throwaway_redis.start()
    time.sleep(0.35)
    ask()
    ask()
    assert cache.stats["error"] >= 2 and cache.stats["hit"] > 0
    assert cache.status()["answers"] is True


@pytest.mark.gunicorn
def test_gunicorn_serves_through_a_stopped_and_restarted_redis(throwaway_redis, tmp_path):
    from tests.service.conftest import free_loopback_port, stop, wait_until_answers

    port = free_loopback_port()
    env = {**os.environ, "UVDOSE_CACHE": "redis", "REDIS_URL": throwaway_redis.url, **FAULT_SETTINGS}
    env.pop("PROMETHEUS_MULTIPROC_DIR", None)
    log = (tmp_path / "gunicorn.log").open("wb")
    server = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "--workers", "1", "--bind", f"127.0.0.1:{port}",
         "--timeout", "120", "uvdose.service.app:create_app()"],
        cwd=Path(__file__).resolve().parents[2], env=env, stdout=subprocess.DEVNULL, stderr=log,
    )
    base = f"http://127.0.0.1:{port}"
    body = json.dumps(_irradiance_body(100, seed=15)).encode()

    def ask() -> list[float]:
        request = urllib.request.Request(base + "/v1/irradiance", data=body,
                                         headers={"Content-Type": "application/json"})
        with urllib.request.urlopen(request, timeout=60) as reply:
            assert reply.status == 200
            return json.loads(reply.read())["columns"]["uv_index"]

    try:
        wait_until_answers(base + "/livez", server)
        first = ask()
        assert ask() == first  # a hit
        entries = len(throwaway_redis.client().keys(b"uvdose:s:*"))
        assert entries > 10
        throwaway_redis.stop()
        assert ask() == first and ask() == first
        throwaway_redis.start()
        time.sleep(0.35)
        assert ask() == first and ask() == first
        # The worker reconnected by itself and refilled the entries.
        assert len(throwaway_redis.client().keys(b"uvdose:s:*")) == entries
    finally:
        stop(server)
        log.close()
