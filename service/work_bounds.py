"""What one synchronous request may ask for: the work it implies and the size of its answer.

Both are counted from the validated request, before any engine work, so a request beyond
them costs milliseconds, not minutes:

* **work** is counted in engine samples × action spectra (a sample is one instant at one
  place that the engine evaluates; its cost grows about linearly with the spectra weighted,
  measured in ``tests/benchmarks/bench_streams.py``). Beyond ``UVDOSE_MAX_SAMPLE_SPECTRA``
  the answer is a 413 ``too-much-work`` problem.
* **the answer** is estimated in bytes from the number of result rows and the figures per
  row (:data:`ROW_BYTES`, measured on real answers). A whole ``application/json`` answer
  is held to ``UVDOSE_MAX_ANSWER_BYTES``, a streamed one (NDJSON or CSV, written chunk by
  chunk) to ``UVDOSE_MAX_STREAMED_ANSWER_BYTES``; beyond them a 413 ``answer-too-large``.
* **one record's work** is held to ``UVDOSE_CHUNK_SAMPLE_SPECTRA``: the dose endpoints
  compute their records in chunks of about that much work (:func:`record_chunks`), so a
  worker holds one chunk's samples at a time whatever the request; a single record that
  implies more cannot be split and gets a 413 ``too-much-work`` naming it.

Every 413 states what was asked, the limit, the setting, and where to submit the same body
as a job (:func:`jobs_url`: the jobs API takes work of any size).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

from uvdose.service.problems import Problem

JOBS_PATH = "/v1/jobs"
"""The jobs API, where work too large for one synchronous request goes: ``POST
/v1/jobs/<operation>`` takes the operation's synchronous body (``windows``, ``fields``, ...)."""


def jobs_url(kind: str) -> str:
    """Where the same body is submitted as a job."""
    return f"{JOBS_PATH}/{kind}"


@dataclass(frozen=True)
class RowBytes:
    """Bytes of one result row as ``fixed + per_spectrum × spectra`` (ids not counted)."""

    fixed: int
    per_spectrum: int

    def of(self, spectra: int) -> int:
        return self.fixed + self.per_spectrum * spectra


_JSON, _NDJSON, _CSV = "application/json", "application/x-ndjson", "text/csv"

ROW_BYTES: Mapping[str, Mapping[str, RowBytes]] = {
    # Measured on answers of 20 records at 1 and at 8 spectra with the default in-process
    # cache (its share of the uncertainty is a number, not 0.0), ids left out (fields: 30
    # days; windows: 12 h; routes: three fixes with a parked leg and parked_dose), then
    # rounded up by about 15 % for other places, dates and spectra. Bytes per row at 1 and
    # 8 spectra: fields JSON 993 / 4568, NDJSON 1002 / 4577, CSV 734 / 3154; windows 829 /
    # 2748, 830 / 2749, 1008 / 3751; routes 842 / 2998, 843 / 3000, 1733 / 4635 (CSV rows
    # carry the caution on every row). tests/service/test_work_bounds.py holds the estimate
    # to real answers.
    "fields": {_JSON: RowBytes(560, 590), _NDJSON: RowBytes(570, 590), _CSV: RowBytes(450, 400)},
    "windows": {_JSON: RowBytes(640, 315), _NDJSON: RowBytes(640, 315), _CSV: RowBytes(710, 450)},
    "routes": {_JSON: RowBytes(615, 355), _NDJSON: RowBytes(615, 355), _CSV: RowBytes(1520, 480)},
}
"""Answer bytes per result row (a field-day for fields), by endpoint and media type; a
whole JSON answer in the column layout is smaller than in rows, and is estimated as rows."""


ENVELOPE_BYTES = 3072
"""The answer's members besides its rows (cautions, spectra, options; a CSV header line):
about 1 kB on a fields answer, more with the figure cautions of windows and routes."""


@dataclass(frozen=True)
class Limits:
    """The work and answer limits of the app (``app.config``, from ``service.config``)."""

    max_sample_spectra: int
    chunk_sample_spectra: int
    max_answer_bytes: int
    max_streamed_answer_bytes: int

    @classmethod
    def of(cls, config: Mapping) -> "Limits":
        return cls(config["UVDOSE_MAX_SAMPLE_SPECTRA"], config["UVDOSE_CHUNK_SAMPLE_SPECTRA"],
                   config["UVDOSE_MAX_ANSWER_BYTES"], config["UVDOSE_MAX_STREAMED_ANSWER_BYTES"])


def _too_much(kind: str, detail: str, quantity: str, asked: int, limit: int, setting: str, **more) -> Problem:
    return Problem(413, "too-much-work", "The request implies more work than one request may do",
                   f"{detail} Submit it as a job (POST {jobs_url(kind)}, the same body), or split it.",
                   extensions={"quantity": quantity, "asked": int(asked), "limit": int(limit),
                               "setting": setting, "jobs": jobs_url(kind), **more})


def check_work(per_record: np.ndarray, ids: np.ndarray, what: str, limits: Limits) -> None:
    """Hold the request's work (``per_record``: samples × spectra of each record) to the
    limits: the total to ``max_sample_spectra``, each record to ``chunk_sample_spectra``."""
    per_record = np.asarray(per_record, dtype=np.int64)
    total = int(per_record.sum())
    if total > limits.max_sample_spectra:
        raise _too_much(what, f"The {per_record.size} {what} sent imply {total} engine samples × spectra; one "
                        f"request may do at most {limits.max_sample_spectra} (UVDOSE_MAX_SAMPLE_SPECTRA).",
                        "sample_spectra", total, limits.max_sample_spectra, "UVDOSE_MAX_SAMPLE_SPECTRA")
    if per_record.size and per_record.max() > limits.chunk_sample_spectra:
        index = int(np.argmax(per_record))
        record_id = ids[index] if isinstance(ids[index], str) else None
        raise _too_much(what, f"Record {index} implies {int(per_record[index])} engine samples × spectra; one record "
                        f"may imply at most {limits.chunk_sample_spectra} (UVDOSE_CHUNK_SAMPLE_SPECTRA), the "
                        "most one chunk of a request computes at once. Shorten it or take a longer step.",
                        "record_sample_spectra", per_record[index], limits.chunk_sample_spectra,
                        "UVDOSE_CHUNK_SAMPLE_SPECTRA", index=index, id=record_id)


def answer_bytes(kind: str, media_type: str, rows: int, spectra: int, id_bytes: int = 0) -> int:
    """Estimated bytes of an answer of ``rows`` result rows weighted by ``spectra`` spectra,
    ``id_bytes`` the ids' bytes as they are written (ids repeated per row where they are)."""
    return ENVELOPE_BYTES + int(rows) * ROW_BYTES[kind][media_type].of(spectra) + int(id_bytes)


def check_answer(kind: str, estimate: int, streamed: bool, limits: Limits) -> None:
    """Hold an answer's estimated bytes to the limit of its kind (whole or streamed)."""
    limit = limits.max_streamed_answer_bytes if streamed else limits.max_answer_bytes
    if estimate <= limit:
        return
    setting = "UVDOSE_MAX_STREAMED_ANSWER_BYTES" if streamed else "UVDOSE_MAX_ANSWER_BYTES"
    hint = ("" if streamed or estimate > limits.max_streamed_answer_bytes else
            " Ask for it streamed (Accept: application/x-ndjson or text/csv), up to "
            f"{limits.max_streamed_answer_bytes} bytes,")
    raise Problem(413, "answer-too-large", "The answer would be larger than one request may give",
                  f"The answer would be about {estimate} bytes; a {'streamed' if streamed else 'whole JSON'} "
                  f"answer may be at most {limit} bytes ({setting}).{hint} {'submit' if hint else 'Submit'} it as a job "
                  f"(POST {jobs_url(kind)}, the same body), or split it.",
                  extensions={"quantity": "answer_bytes", "asked": int(estimate), "limit": int(limit),
                              "setting": setting, "jobs": jobs_url(kind)})


CHUNK_ROWS = 1024
"""Most result rows one chunk builds (a field's season gives one row per day): the rows'
objects, not the samples, are most of a fields chunk's memory (``bench_streams.py``)."""


def record_chunks(per_record: np.ndarray, chunk: int, rows_per_record: int = 1) -> list[slice]:
    """Consecutive slices of records, each of at most ``chunk`` work and :data:`CHUNK_ROWS`
    result rows (a record alone may reach ``chunk``, :func:`check_work` refuses more, and
    always makes a chunk of its own), in record order."""
    per_record = np.asarray(per_record, dtype=np.int64)
    ends = np.cumsum(per_record)
    most_records = max(CHUNK_ROWS // max(int(rows_per_record), 1), 1)
    slices, start = [], 0
    while start < per_record.size:
        before = int(ends[start - 1]) if start else 0
        stop = min(int(np.searchsorted(ends, before + chunk, side="right")), start + most_records)
        stop = max(stop, start + 1)
        slices.append(slice(start, stop))
        start = stop
    return slices
