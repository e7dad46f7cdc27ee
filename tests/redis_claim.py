"""Claiming a Redis database of one's own, for the test suite and the benchmarks.

A claim takes one of the databases 1–15 of a server (database 0 is left to whatever else
uses the server) by setting a claim key there with SET NX, and only in a database that
held nothing else, so parallel test sessions and benchmarks take different databases. A
:class:`RedisDatabase` flushes its database only while the claim key still holds its own
token, and :meth:`RedisDatabase.release` gives the database back empty.
"""
from __future__ import annotations

import uuid
from urllib.parse import urlsplit, urlunsplit

CLAIMABLE_DATABASES = range(1, 16)
CLAIM_KEY = b"uvdose-test-suite:claim"
CLAIM_TTL_S = 3 * 3600  # a crashed session's claim lapses by itself


class RedisDatabase:
    """One claimed database: its URL and the token that proves the claim is ours."""

    def __init__(self, server_url: str, db: int, token: str):
        self.server_url, self.db, self.token = server_url, db, token
        self.url = with_database(server_url, db)

    def client(self, **options):
        import redis

        return redis.Redis.from_url(self.url, socket_timeout=2, **options)

    def flush(self) -> None:
        """Empty the database, refusing unless our claim still stands there."""
        client = self.client()
        if client.get(CLAIM_KEY) != self.token.encode():
            raise RuntimeError(f"refusing to flush {self.url}: the claim on it is gone")
        client.flushdb()
        client.set(CLAIM_KEY, self.token, ex=CLAIM_TTL_S)

    def release(self) -> None:
        client = self.client()
        if client.get(CLAIM_KEY) == self.token.encode():
            client.flushdb()


def with_database(url: str, db: int) -> str:
    """``url`` (``redis://``, ``rediss://`` or ``unix://``) pointed at database ``db``."""
    parts = urlsplit(url)
    if parts.scheme == "unix":
        query = "&".join([q for q in parts.query.split("&") if q and not q.startswith("db=")] + [f"db={db}"])
        return urlunsplit(parts._replace(query=query))
    return urlunsplit(parts._replace(path=f"/{db}"))


def answers(url: str) -> bool:
    """Whether a Redis server answers PING at ``url`` within a second."""
    import redis

    try:
        client = redis.Redis.from_url(url, socket_timeout=1, socket_connect_timeout=1)
        return bool(client.ping())
    except Exception:
        return False


def claim_database(server_url: str) -> RedisDatabase:
    """Claim an empty database of the server at ``server_url``."""
    import redis

    token = uuid.uuid4().hex
    for db in CLAIMABLE_DATABASES:
        client = redis.Redis.from_url(with_database(server_url, db), socket_timeout=2)
        if not client.set(CLAIM_KEY, token, nx=True, ex=CLAIM_TTL_S):
            continue  # another session's
        if client.dbsize() == 1:
            return RedisDatabase(server_url, db, token)
        client.delete(CLAIM_KEY)  # the database holds someone else's keys: leave it alone
    raise RuntimeError(f"no empty database among {CLAIMABLE_DATABASES.start}–{CLAIMABLE_DATABASES.stop - 1} "
                       f"of {server_url} to claim")
