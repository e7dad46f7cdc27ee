"""One part of a job, run where Dask puts it: the synchronous endpoint on the part's body.

:func:`run_part` is the Dask task. It reads the part's body from the results store, has the
operation's own endpoint answer it (an app of the service in the worker process, without the
per-request limits, which bound a synchronous request and not a part of a job; the part's
size is bounded by ``UVDOSE_JOB_PART_WORK``) and writes the answer's rows as NDJSON, whole,
to ``parts/<part>.ndjson``: the dose endpoints' streamed NDJSON lines as they come (measured:
their whole JSON answer parsed and written again cost a part 1.32x the time), the
irradiance and ozone answers' rows written as lines. A part whose rows are already there is not run again, so a rerun
(a worker lost mid-part, two API instances resuming one job) cannot duplicate a record. A
part the endpoint refuses leaves its problem in ``failed/<part>.json`` (records and table
entries named as the whole submission names them) and no rows.
"""
from __future__ import annotations

import threading
from typing import Any, Callable, Mapping

import orjson
from flask import Flask

from uvdose.service.answer_streams import ndjson_lines
from uvdose.service.job_operations import OPERATIONS, batch_wide
from uvdose.service.job_store import JobStore
from uvdose.service.negotiation import JSON_MEDIA_TYPE, NDJSON_MEDIA_TYPE
from uvdose.service.wire_formats import INPUTS_ONLY_ENVIRON

_APPS: dict[Callable[..., Flask], Flask] = {}
_APP_LOCK = threading.Lock()

NO_LIMIT = 10 ** 12


def endpoint_app(factory: Callable[..., Flask]) -> Flask:
    """The service's app as the parts use it, built by ``factory`` (the app factory, handed
    over by ``create_app`` itself) once per process: the per-request limits lifted, no
    request log, no API keys."""
    with _APP_LOCK:
        if factory not in _APPS:
            from uvdose.service.config import SETTINGS

            lifted = {setting.key: NO_LIMIT for setting in SETTINGS
                      if setting.env.startswith("UVDOSE_MAX_") and setting.env != "UVDOSE_MAX_ERRORS_LISTED"}
            lifted["UVDOSE_REQUEST_DEADLINE_S"] = float(NO_LIMIT)  # a part is bounded by its work instead
            # The API instance that accepted the job has checked its key already.
            _APPS[factory] = factory({**lifted, "UVDOSE_REQUEST_LOG": False, "UVDOSE_API_KEYS": None,
                                      "UVDOSE_API_KEYS_FILE": None})
        return _APPS[factory]


def answer(factory: Callable[..., Flask], path: str, media_type: str, query: Mapping[str, str], body: bytes,
           inputs_only: bool = False, accept: str = JSON_MEDIA_TYPE):
    """The endpoint's answer to ``body`` (a Flask test response) in ``accept``; with
    ``inputs_only``, the endpoint only reads and checks the body (204, or its problem)."""
    client = endpoint_app(factory).test_client()
    return client.post(path, data=body, content_type=media_type, query_string=dict(query),
                       headers={"Accept": accept, "Accept-Encoding": "identity"},
                       environ_overrides={INPUTS_ONLY_ENVIRON: True} if inputs_only else None)


def answer_rows(answer_body: dict[str, Any]) -> list[dict[str, Any]]:
    """The rows of a synchronous answer (its ``results``, or its ``columns`` as rows)."""
    from uvdose.service.wire_formats import rows_from_columns

    if "results" in answer_body:
        return answer_body.pop("results")
    return rows_from_columns(answer_body.pop("columns"))


def streamed_rows(ndjson: bytes) -> tuple[dict[str, Any], bytes, int]:
    """(envelope, the result lines as they came, how many) of a complete streamed NDJSON
    answer of a dose endpoint (service/dose_answers.py: an envelope line, one line per
    result, a complete line); a cut answer (an error line last) raises RuntimeError, for
    Dask to run the part again. The lines are kept as written: no second serialisation."""
    head_end = ndjson.index(b"\n") + 1
    tail_start = ndjson.rindex(b"\n", 0, len(ndjson) - 1) + 1
    last = orjson.loads(ndjson[tail_start:])
    if "complete" not in last:
        raise RuntimeError(f"the streamed answer was cut: {last}")
    lines = ndjson[head_end:tail_start]
    return orjson.loads(ndjson[:head_end])["envelope"], lines, lines.count(b"\n")


def run_part(factory: Callable[..., Flask], store_url: str, job_id: str, part: int) -> int:
    """Run part ``part`` of job ``job_id`` on the app ``factory`` builds (pickled by name, so the
    worker imports it); the records it wrote (0 when there was nothing to do)."""
    store = JobStore(store_url)
    if store.exists(job_id, "cancelled") or store.has_part(job_id, part):
        return 0
    plan = store.read_json(job_id, "plan.json")
    first, end = plan["bounds"][part]
    streamed = OPERATIONS[plan["operation"]].streams_rows
    response = answer(factory, plan["path"], plan["media_type"], plan["query"], store.read_input(job_id, part),
                      accept=NDJSON_MEDIA_TYPE if streamed else JSON_MEDIA_TYPE)
    if response.status_code >= 500:  # the service's fault, not the records': Dask retries the part
        raise RuntimeError(f"part {part} of job {job_id}: the endpoint answered {response.status_code}: "
                           f"{response.get_data(as_text=True)[:2000]}")
    if response.status_code != 200:
        store.write_failure(job_id, part, batch_wide(response.get_json(), first, store.read_table_positions(job_id, part)))
        return 0
    if streamed:
        envelope, lines, n_rows = streamed_rows(response.get_data())
    else:
        envelope = response.get_json()
        rows = answer_rows(envelope)
        lines, n_rows = ndjson_lines(rows), len(rows)
    if n_rows != end - first:
        raise RuntimeError(f"part {part} of job {job_id}: {n_rows} rows for {end - first} records")
    if part == 0 or not store.exists(job_id, "envelope.json"):  # the cautions, for every download
        store.write_json(job_id, "envelope.json", envelope)
    store.write_part(job_id, part, lines)
    return n_rows
