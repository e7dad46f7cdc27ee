"""The results store of the jobs: a directory or any fsspec URL shared by every API instance
and every Dask worker.

One folder per job::

    <store>/<job id>/plan.json            the job's parts: operation, media type, query, records
    <store>/<job id>/inputs/<part>.bin    the request body of each part (written at submission)
    <store>/<job id>/tables/<part>.json   where the part's daily or weather table entries
                                          stand in the submitted tables (parts cut from one)
    <store>/<job id>/parts/<part>.ndjson  the result rows of each part (written by a worker)
    <store>/<job id>/failed/<part>.json   the problem of a part its endpoint refused
    <store>/<job id>/envelope.json        the answer's members other than its rows (from part 0)
    <store>/<job id>/cancelled            present once the job is cancelled

Every file is written whole under a temporary name and then renamed (on object stores, one
PUT, which is atomic by itself), so a reader never sees half a part, and a part written
twice (a rerun after a lost worker, or two API instances resuming the same job) holds the
same rows once. The folder is all a job needs to run: any instance can resume it.
"""
from __future__ import annotations

import tempfile
import uuid
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterator

import fsspec
import orjson

DEFAULT_FOLDER = "uvdose-jobs"


def default_url() -> str:
    """The store when ``UVDOSE_JOBS_STORE`` is unset: a folder in the temporary directory."""
    return str(Path(tempfile.gettempdir()) / DEFAULT_FOLDER)


def _part_name(part: int) -> str:
    return f"{part:06d}"


@dataclass(frozen=True)
class JobStore:
    """The store at ``url`` (made on first write)."""

    url: str

    @property
    def fs(self) -> fsspec.AbstractFileSystem:
        fs, _ = fsspec.core.url_to_fs(self.url)
        return fs

    @property
    def root(self) -> str:
        _, root = fsspec.core.url_to_fs(self.url)
        return root.rstrip("/")

    def path(self, job_id: str, *names: str) -> str:
        return "/".join((self.root, job_id) + names)

    # -- writing ---------------------------------------------------------------------------

    def write(self, job_id: str, name: str, data: bytes) -> None:
        """``data`` as ``<job>/<name>``, whole or not at all (temporary name, then renamed)."""
        fs, final = self.fs, self.path(job_id, name)
        folder = final.rsplit("/", 1)[0]
        fs.makedirs(folder, exist_ok=True)
        temporary = f"{folder}/.{final.rsplit('/', 1)[1]}.{uuid.uuid4().hex}.tmp"
        with fs.open(temporary, "wb") as out:
            out.write(data)
        fs.mv(temporary, final)

    def write_json(self, job_id: str, name: str, value: Any) -> None:
        self.write(job_id, name, orjson.dumps(value))

    def write_input(self, job_id: str, part: int, data: bytes) -> None:
        self.write(job_id, f"inputs/{_part_name(part)}.bin", data)

    def write_table_positions(self, job_id: str, part: int, positions: dict[str, list[int]]) -> None:
        self.write_json(job_id, f"tables/{_part_name(part)}.json", positions)

    def write_part(self, job_id: str, part: int, ndjson: bytes) -> None:
        self.write(job_id, f"parts/{_part_name(part)}.ndjson", ndjson)

    def write_failure(self, job_id: str, part: int, problem: dict[str, Any]) -> None:
        self.write_json(job_id, f"failed/{_part_name(part)}.json", problem)

    def mark_cancelled(self, job_id: str) -> None:
        self.write(job_id, "cancelled", b"")

    def delete(self, job_id: str) -> None:
        if self.fs.exists(self.path(job_id)):
            self.fs.rm(self.path(job_id), recursive=True)

    # -- reading ---------------------------------------------------------------------------

    def exists(self, job_id: str, name: str) -> bool:
        return self.fs.exists(self.path(job_id, name))

    def read(self, job_id: str, name: str) -> bytes:
        return self.fs.cat_file(self.path(job_id, name))

    def read_json(self, job_id: str, name: str) -> Any:
        return orjson.loads(self.read(job_id, name))

    def read_input(self, job_id: str, part: int) -> bytes:
        return self.read(job_id, f"inputs/{_part_name(part)}.bin")

    def read_table_positions(self, job_id: str, part: int) -> dict[str, list[int]]:
        """Where the part's table entries stand in the submitted tables ({} for a part with none)."""
        name = f"tables/{_part_name(part)}.json"
        return self.read_json(job_id, name) if self.exists(job_id, name) else {}

    def part_path(self, job_id: str, part: int) -> str:
        return self.path(job_id, "parts", f"{_part_name(part)}.ndjson")

    def has_part(self, job_id: str, part: int) -> bool:
        return self.fs.exists(self.part_path(job_id, part))

    def read_part(self, job_id: str, part: int) -> bytes:
        return self.fs.cat_file(self.part_path(job_id, part))

    def _listed(self, job_id: str, folder: str, suffix: str) -> set[int]:
        fs, path = self.fs, self.path(job_id, folder)
        if not fs.exists(path):
            return set()
        names = (entry.rsplit("/", 1)[-1] for entry in fs.ls(path, detail=False))
        return {int(name[:-len(suffix)]) for name in names if name.endswith(suffix) and not name.startswith(".")}

    def done_parts(self, job_id: str) -> set[int]:
        return self._listed(job_id, "parts", ".ndjson")

    def failed_parts(self, job_id: str) -> set[int]:
        return self._listed(job_id, "failed", ".json")

    def job_ids(self) -> Iterator[str]:
        fs = self.fs
        if not fs.exists(self.root):
            return iter(())
        return (entry.rsplit("/", 1)[-1] for entry in fs.ls(self.root, detail=False)
                if not entry.rsplit("/", 1)[-1].startswith("."))
