"""The cache when Redis fails: stopped, restarted, paused (CLIENT PAUSE) or full.

Each test runs a throwaway ``redis-server`` on a free loopback port, so it can be stopped
and started without touching the shared test server. Whatever Redis does, every batch must
be answered with exactly what the uncached engine gives for the cell-centre inputs.
"""
from __future__ import annotations

import shutil
import socket
import subprocess
import time

import numpy as np
import pytest
import redis
from flask import Blueprint, jsonify, request

from service.app import create_app
from service.cache import GridCellCache, _Breaker
from tests.service.test_cache import CONTEXT, RecordingEngine, assert_same, batch, expected

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


def _answered_correctly(cache: GridCellCache, columns, engine) -> float:
    started = time.perf_counter()
    result = cache.compute_through(columns, engine, CONTEXT)
    elapsed = time.perf_counter() - started
    assert_same(result, expected(cache, columns))
    return elapsed


def test_stopped_then_restarted_server(throwaway_redis):
    engine = RecordingEngine()
    cache = GridCellCache("redis", redis_url=throwaway_redis.url, **FAST)
    columns = batch(1000, cells=40, seed=11)

    _answered_correctly(cache, columns, engine)
    _answered_correctly(cache, columns, engine)
    assert engine.calls == [40] and cache.stats["error"] == 0

    throwaway_redis.stop()
    # Down: answered from the engine, the fault counted once, then the breaker skips Redis.
    for _ in range(5):
        assert _answered_correctly(cache, columns, engine) < 1.0
    assert engine.calls == [40] * 6
    assert cache.stats["error"] == 1
    status = cache.status()
    assert status["answers"] is False and status["breaker"] == "open"

    throwaway_redis.start()
    time.sleep(FAST["retry_initial_s"] + 0.05)
    # Back: the first batch after the backoff reconnects by itself and refills the cells.
    _answered_correctly(cache, columns, engine)
    _answered_correctly(cache, columns, engine)
    assert engine.calls == [40] * 7
    assert cache.stats["error"] == 1
    assert cache.status()["answers"] is True


def test_restarts_during_a_load_of_many_batches(throwaway_redis):
    engine = RecordingEngine()
    cache = GridCellCache("redis", redis_url=throwaway_redis.url, **FAST)
    batches = [batch(300, cells=15, seed=seed % 4) for seed in range(24)]
    for number, columns in enumerate(batches):
        if number in (6, 14):
            throwaway_redis.stop()
        if number in (10, 18):
            throwaway_redis.start()
            time.sleep(FAST["retry_initial_s"] + 0.05)
        _answered_correctly(cache, columns, engine)
    assert cache.stats["error"] == 2
    assert cache.stats["hit"] > 0


def test_paused_server_costs_one_timeout_then_is_skipped(throwaway_redis):
    engine = RecordingEngine()
    cache = GridCellCache("redis", redis_url=throwaway_redis.url, **FAST)
    columns = batch(500, cells=20, seed=12)
    _answered_correctly(cache, columns, engine)

    throwaway_redis.client().execute_command("CLIENT", "PAUSE", "3000", "ALL")
    first = _answered_correctly(cache, columns, engine)
    assert first < 1.0  # bounded by the 0.2 s read timeout, not by the 3 s pause
    later = _answered_correctly(cache, columns, engine)
    assert later < 0.2
    assert cache.stats["error"] == 1
    assert cache.status()["breaker"] == "open"


def test_full_server_refusing_writes_still_answers(throwaway_redis):
    admin = throwaway_redis.client()
    admin.config_set("maxmemory-policy", "noeviction")
    admin.config_set("maxmemory", "1")  # every write is refused with OOM
    engine = RecordingEngine()
    cache = GridCellCache("redis", redis_url=throwaway_redis.url, **FAST)
    columns = batch(500, cells=20, seed=13)
    _answered_correctly(cache, columns, engine)
    assert cache.stats["error"] == 1
    assert admin.dbsize() == 0


def test_nothing_listening_is_a_fast_fault():
    engine = RecordingEngine()
    cache = GridCellCache("redis", redis_url=f"redis://127.0.0.1:{_free_port()}/0", **FAST)
    assert _answered_correctly(cache, batch(200, cells=10), engine) < 1.0
    assert cache.stats == {"hit": 0, "miss": 10, "error": 1}


def test_breaker_backoff_doubles_and_resets():
    now = [100.0]
    breaker = _Breaker(initial_s=1.0, max_s=3.0, clock=lambda: now[0])
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


# -- through the Flask app ---------------------------------------------------------------

def _app_with_cached_route(redis_url: str):
    """The app factory's app plus a small route that sends a batch through the cache."""
    app = create_app({"TESTING": True, "UVDOSE_CACHE": "redis", "REDIS_URL": redis_url,
                      "UVDOSE_REDIS_TIMEOUT_S": "0.2", "UVDOSE_REDIS_CONNECT_TIMEOUT_S": "0.2",
                      "UVDOSE_CACHE_RETRY_S": "0.3"})
    probe = Blueprint("cache_probe", __name__)

    @probe.post("/cache-probe")
    def cache_probe():
        body = request.get_json()
        columns = {name: np.asarray(values, dtype=float) for name, values in body.items()}
        result = app.extensions["uvdose_cache"].compute_through(columns, RecordingEngine(), CONTEXT)
        return jsonify({"uv_index": result["uv_index"].tolist()})

    app.register_blueprint(probe)
    return app


def test_app_answers_through_redis_faults(throwaway_redis):
    app = _app_with_cached_route(throwaway_redis.url)
    cache = app.extensions["uvdose_cache"]
    client = app.test_client()
    columns = batch(400, cells=20, seed=14)
    numeric = {k: v for k, v in columns.items() if k != "surface_type"}
    body = {k: v.tolist() for k, v in numeric.items()}
    reference = expected(cache, numeric)["uv_index"]

    def ask():
        reply = client.post("/cache-probe", json=body)
        assert reply.status_code == 200
        np.testing.assert_array_equal(reply.get_json()["uv_index"], reference)

    ask()
    throwaway_redis.client().execute_command("CLIENT", "PAUSE", "1500", "ALL")
    ask()
    ask()
    throwaway_redis.stop()
    time.sleep(0.35)
    ask()
    ask()
    throwaway_redis.start()
    time.sleep(0.65)  # the second fault doubled the backoff to 0.6 s
    ask()
    ask()
    assert cache.stats["error"] >= 2 and cache.stats["hit"] > 0
    assert cache.status()["answers"] is True
