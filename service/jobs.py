"""Jobs: batches of any size run in parts on Dask, their state read back from the store.

:class:`Jobs` is the app's jobs resource (``init_app``; the blueprint is
:mod:`service.routes_jobs`). A submission is checked whole (:mod:`service.job_operations`),
cut into parts whose bodies go to the results store with the job's plan, and its metadata
is recorded (:mod:`service.job_metadata`); then the parts go to the Dask scheduler as tasks
with fixed keys (``uvdose-part-<job>-<part>``) that write their rows to the store
themselves (:mod:`service.job_parts`).

A job's state is read from the store, so it needs no particular API process: Dask drops
the tasks of a client that is gone (an API instance restarted or lost), and whichever
instance next looks at an unfinished job with no tasks of its own in flight submits the
parts not yet written. Two instances doing so at once ask the scheduler for the same keys,
and a part written twice holds the same rows.

States: ``queued`` (no part written yet), ``running``, ``succeeded`` (every part written),
``failed`` (a part refused by its endpoint, its problem given), ``cancelled``. A finished
job expires ``UVDOSE_JOB_TTL_S`` seconds after it finished: its store folder and metadata
are removed, and it is unknown from then on.
"""
from __future__ import annotations

import logging
import threading
import time
import uuid
from typing import Any, Callable, Mapping

from flask import Flask, current_app

from uvdose.service import job_cluster, job_operations, job_parts
from uvdose.service.job_metadata import metadata_for
from uvdose.service.job_store import JobStore, default_url
from uvdose.service.problems import TYPE_PREFIX, FieldError, Problem

EXTENSION = "uvdose_jobs"
FINISHED = ("succeeded", "failed", "cancelled")
SWEEP_EVERY_S = 60.0
METADATA_GRACE_S = 86_400.0

log = logging.getLogger(__name__)


def init_app(app: Flask, factory: Callable[..., Flask]) -> None:
    """The app's jobs; its parts run on apps ``factory`` (the app factory) builds."""
    app.extensions[EXTENSION] = Jobs(app.config, factory)


def current() -> "Jobs":
    return current_app.extensions[EXTENSION]


def part_key(job_id: str, part: int) -> str:
    return f"uvdose-part-{job_id}-{part}"


class Jobs:
    """Submit, follow, cancel and expire jobs (one per app; thread-safe)."""

    def __init__(self, config: Mapping[str, Any], factory: Callable[..., Flask]):
        self.config, self.factory = config, factory
        self.store = JobStore(config.get("UVDOSE_JOBS_STORE") or default_url())
        self.metadata = metadata_for(dict(config))
        self.ttl_s = float(config["UVDOSE_JOB_TTL_S"])
        self.part_work = int(config["UVDOSE_JOB_PART_WORK"])
        self._client = None
        self._futures: dict[str, list] = {}
        self._lock = threading.RLock()
        self._client_lock = threading.Lock()  # held while the cluster starts; status reads go on
        self._last_sweep = 0.0

    # -- Dask ------------------------------------------------------------------------------

    def client(self):
        with self._client_lock:
            if self._client is None:
                from distributed import Client

                self._client = Client(job_cluster.scheduler_address(self.config), set_as_default=False,
                                      timeout="30s")
            return self._client

    def close(self) -> None:
        """Drop this instance's Dask client (its tasks go with it; the jobs can be resumed)."""
        with self._client_lock, self._lock:
            client, self._client, self._futures = self._client, None, {}
        if client is not None:
            client.close()

    def _dispatch(self, job_id: str, plan: dict[str, Any]) -> None:
        done = self.store.done_parts(job_id) | self.store.failed_parts(job_id)
        missing = [part for part in range(len(plan["bounds"])) if part not in done]
        if not missing:
            return
        client = self.client()
        futures = [client.submit(job_parts.run_part, self.factory, self.store.url, job_id, part, key=part_key(job_id, part),
                                 pure=False, retries=3) for part in missing]
        with self._lock:
            self._futures[job_id] = futures

    def _dispatch_in_background(self, job_id: str, plan: dict[str, Any]) -> None:
        def run() -> None:
            try:
                self._dispatch(job_id, plan)
            except Exception:  # the next look at the job tries again
                log.exception("could not hand job %s to Dask", job_id)

        threading.Thread(target=run, name=f"uvdose-job-{job_id}", daemon=True).start()

    def _in_flight(self, job_id: str) -> bool:
        with self._lock:
            futures = self._futures.get(job_id)
            if futures and any(f.status in ("error", "cancelled", "lost") for f in futures):
                self._futures.pop(job_id)
                return False
            return bool(futures) and not all(f.done() for f in futures)

    # -- submission ------------------------------------------------------------------------

    def submit(self, operation: job_operations.Operation, data: bytes, media_type: str,
               query: Mapping[str, str]) -> dict[str, Any]:
        """Check, store and start a job; its status document."""
        self.sweep_expired()
        submission = job_operations.read_submission(operation, data, media_type, query, self._probe)
        job_id = uuid.uuid4().hex
        bounds = submission.bounds(self.part_work)
        for part, (first, end) in enumerate(bounds):
            cut = submission.part(first, end)
            self.store.write_input(job_id, part, cut.body)
            if cut.table_positions:
                self.store.write_table_positions(job_id, part, cut.table_positions)
        plan = {"operation": operation.name, "path": operation.path, "media_type": submission.media_type,
                "query": submission.query, "bounds": bounds, "records": submission.records}
        self.store.write_json(job_id, "plan.json", plan)
        self.metadata.put(job_id, {"id": job_id, "operation": operation.name, "records": submission.records,
                                   "parts": len(bounds), "created_unix_s": time.time()})
        self._dispatch_in_background(job_id, plan)
        return self.status(job_id, resume=False)

    def _probe(self, operation: job_operations.Operation, media_type: str, query: Mapping[str, str],
               part: job_operations.PartBody, inputs_only: bool = False) -> None:
        """Raise the endpoint's problem, named as the whole submission, if it refuses ``part``."""
        response = job_parts.answer(self.factory, operation.path, media_type, query, part.body, inputs_only)
        if response.status_code not in (200, 204):
            problem = job_operations.batch_wide(response.get_json(), 0, part.table_positions)
            if not problem["type"].startswith(TYPE_PREFIX):
                raise RuntimeError(f"the {operation.name} endpoint answered the probe with {response.status_code}")
            raise Problem(response.status_code, problem["type"][len(TYPE_PREFIX):], problem["title"],
                          problem.get("detail"), [_field_error(e) for e in problem.get("errors") or []],
                          {k: v for k, v in problem.items() if k not in ("type", "title", "status", "detail",
                                                                         "errors", "error_count", "instance")})

    # -- reading ---------------------------------------------------------------------------

    def _meta_or_none(self, job_id: str) -> dict[str, Any] | None:
        if not job_id.isalnum():
            return None
        return self.metadata.get(job_id)

    def status(self, job_id: str, resume: bool = True) -> dict[str, Any] | None:
        """The job's status document; None for a job unknown or expired."""
        meta = self._meta_or_none(job_id)
        if meta is None:
            return None
        now = time.time()
        if meta.get("finished_unix_s") is not None and now > meta["finished_unix_s"] + self.ttl_s:
            self.expire(job_id)
            return None
        plan = self.store.read_json(job_id, "plan.json")
        done, failed = self.store.done_parts(job_id), self.store.failed_parts(job_id)
        records_done = sum(end - first for part, (first, end) in enumerate(plan["bounds"]) if part in done)
        n_parts = len(plan["bounds"])
        problem = None
        if meta.get("cancelled_unix_s") is not None or self.store.exists(job_id, "cancelled"):
            state = "cancelled"
        elif failed:
            state = "failed"
            problem = self.store.read_json(job_id, f"failed/{min(failed):06d}.json")
        elif len(done) == n_parts:
            state = "succeeded"
        else:
            state = "running" if done else "queued"
        if state in FINISHED and meta.get("finished_unix_s") is None:
            meta["finished_unix_s"] = now
            # Redis drops the entry itself a day after the job expires, should no instance
            # look at the job again (the sweep removes its store folder then).
            self.metadata.put(job_id, meta, expire_s=self.ttl_s + METADATA_GRACE_S)
            self._cancel_futures(job_id, cancel=state != "succeeded")
        elif state not in FINISHED and resume and not self._in_flight(job_id):
            self._dispatch_in_background(job_id, plan)
        elapsed = now - meta["created_unix_s"]
        left = None
        if state in ("queued", "running") and records_done:
            left = round(elapsed / records_done * (plan["records"] - records_done), 1)
        document: dict[str, Any] = {
            "id": job_id, "operation": meta["operation"], "state": state,
            "records": plan["records"], "records_done": records_done,
            "parts": n_parts, "parts_done": sorted(done),
            "seconds_left_estimate": left if state not in FINISHED else 0.0,
            "created": _iso(meta["created_unix_s"]),
            "finished": _iso(meta.get("finished_unix_s")),
            "expires": _iso(None if meta.get("finished_unix_s") is None else meta["finished_unix_s"] + self.ttl_s),
        }
        if problem is not None:
            document["problem"] = problem
        return document

    def envelope(self, job_id: str) -> dict[str, Any] | None:
        return self.store.read_json(job_id, "envelope.json") if self.store.exists(job_id, "envelope.json") else None

    def part_rows(self, job_id: str, part: int) -> bytes:
        """The NDJSON rows of one written part."""
        return self.store.read_part(job_id, part)

    # -- cancel and expiry -----------------------------------------------------------------

    def _cancel_futures(self, job_id: str, cancel: bool = True) -> None:
        with self._lock:
            futures = self._futures.pop(job_id, [])
        if cancel and futures and self._client is not None:
            self._client.cancel(futures)

    def cancel(self, job_id: str) -> dict[str, Any] | None:
        """Cancel an unfinished job (a finished one stays as it is); its status document."""
        meta = self._meta_or_none(job_id)
        if meta is None:
            return None
        document = self.status(job_id, resume=False)
        if document is None or document["state"] in FINISHED:
            return document
        self.store.mark_cancelled(job_id)
        meta["cancelled_unix_s"] = time.time()
        self.metadata.put(job_id, meta)
        self._cancel_futures(job_id)
        return self.status(job_id, resume=False)

    def expire(self, job_id: str) -> None:
        self._cancel_futures(job_id)
        self.store.delete(job_id)
        self.metadata.delete(job_id)

    def sweep_expired(self, force: bool = False) -> None:
        """Remove every finished job past its time (at most once a minute unless ``force``),
        and store folders whose metadata is gone (Redis expired it)."""
        now = time.time()
        if not force and now - self._last_sweep < SWEEP_EVERY_S:
            return
        self._last_sweep = now
        known = set()
        for job_id in list(self.metadata.job_ids()):
            meta = self.metadata.get(job_id)
            if meta is None:
                continue
            known.add(job_id)
            if meta.get("finished_unix_s") is not None and now > meta["finished_unix_s"] + self.ttl_s:
                self.expire(job_id)
        for job_id in list(self.store.job_ids()):
            if job_id not in known and self.metadata.get(job_id) is None and _older_than(self.store, job_id, 3600):
                self.store.delete(job_id)


def _older_than(store: JobStore, job_id: str, age_s: float) -> bool:
    """Whether a job folder's plan is older than ``age_s`` (a folder just being written is not)."""
    try:
        modified = store.fs.modified(store.path(job_id, "plan.json")).timestamp()
    except (FileNotFoundError, NotImplementedError, OSError):
        return False
    return time.time() - modified > age_s


def _field_error(error: dict[str, Any]) -> FieldError:
    return FieldError(field=error["field"], reason=error["reason"], index=error.get("index"), id=error.get("id"))


def _iso(unix_s: float | None) -> str | None:
    if unix_s is None:
        return None
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime(unix_s))
