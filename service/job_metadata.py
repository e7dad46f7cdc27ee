"""Job metadata: what was submitted when, how many records and parts, when it finished.

In Redis when ``REDIS_URL`` is set (one JSON value per job under
``<UVDOSE_CACHE_PREFIX>job:<id>``, given a Redis expiry once the job has finished), else
one JSON file per job in a local directory (``UVDOSE_JOBS_METADATA_DIR``). Either way every
API instance that shares it sees every job. What a job has done is not kept here: it is
read from the results store (:mod:`service.job_store`), which the workers write.
"""
from __future__ import annotations

import os
import tempfile
import uuid
from pathlib import Path
from typing import Any, Iterator, Protocol

import orjson

DEFAULT_FOLDER = "uvdose-jobs-metadata"


class JobMetadata(Protocol):
    def get(self, job_id: str) -> dict[str, Any] | None: ...

    def put(self, job_id: str, value: dict[str, Any], expire_s: float | None = None) -> None: ...

    def delete(self, job_id: str) -> None: ...

    def job_ids(self) -> Iterator[str]: ...


class RedisMetadata:
    """Metadata in Redis (``client`` a ``redis.Redis``)."""

    def __init__(self, client, prefix: str):
        self.client, self.key_prefix = client, f"{prefix}job:"

    def get(self, job_id: str) -> dict[str, Any] | None:
        raw = self.client.get(self.key_prefix + job_id)
        return None if raw is None else orjson.loads(raw)

    def put(self, job_id: str, value: dict[str, Any], expire_s: float | None = None) -> None:
        self.client.set(self.key_prefix + job_id, orjson.dumps(value),
                        px=None if expire_s is None else max(1, int(expire_s * 1000)))

    def delete(self, job_id: str) -> None:
        self.client.delete(self.key_prefix + job_id)

    def job_ids(self) -> Iterator[str]:
        for key in self.client.scan_iter(match=self.key_prefix + "*", count=500):
            yield key.decode()[len(self.key_prefix):]


class FileMetadata:
    """Metadata as files ``<folder>/<job id>.json`` (replaced whole, by rename)."""

    def __init__(self, folder: str | None):
        self.folder = Path(folder or Path(tempfile.gettempdir()) / DEFAULT_FOLDER)

    def _file(self, job_id: str) -> Path:
        return self.folder / f"{job_id}.json"

    def get(self, job_id: str) -> dict[str, Any] | None:
        try:
            return orjson.loads(self._file(job_id).read_bytes())
        except FileNotFoundError:
            return None

    def put(self, job_id: str, value: dict[str, Any], expire_s: float | None = None) -> None:
        # The expiry is the caller's (it reads finished_unix_s); files have none of their own.
        self.folder.mkdir(parents=True, exist_ok=True)
        temporary = self.folder / f".{job_id}.{uuid.uuid4().hex}.tmp"
        temporary.write_bytes(orjson.dumps(value))
        os.replace(temporary, self._file(job_id))

    def delete(self, job_id: str) -> None:
        self._file(job_id).unlink(missing_ok=True)

    def job_ids(self) -> Iterator[str]:
        if not self.folder.is_dir():
            return iter(())
        return (path.stem for path in self.folder.glob("*.json"))


def metadata_for(config: dict[str, Any]) -> JobMetadata:
    """The metadata backend the app's settings choose."""
    if config.get("REDIS_URL"):
        import redis

        client = redis.Redis.from_url(config["REDIS_URL"], socket_timeout=5, socket_connect_timeout=2)
        return RedisMetadata(client, config["UVDOSE_CACHE_PREFIX"])
    return FileMetadata(config.get("UVDOSE_JOBS_METADATA_DIR"))
