"""A dose answer in each form it is given, from results computed chunk by chunk.

The dose endpoints compute their records in chunks (:func:`service.work_bounds.record_chunks`);
each chunk gives a :class:`Chunk`: result columns (one entry per result row; values may be
objects, as in the rows of the JSON answer) and the engine samples it took. From them:

* ``application/json``, whole: ``results`` (rows; for fields one object per field with its
  ``days``) for a ``records`` request, ``columns`` (flat columns, one entry per row, dotted
  names as in CSV) for a ``columns`` request or ``answer_layout: columns``; the answer's
  other members first, ``samples`` once every chunk is done.
* ``application/x-ndjson``, streamed: the first line ``{"envelope": {...}}`` (the JSON
  answer's members besides ``results`` and ``samples``), then one line per result as
  ``results`` holds it (for fields one per field, with its ``days``, as the jobs' NDJSON
  downloads have it), then ``{"complete": {"results": n, "samples": n}}``. An answer that fails part-way ends with ``{"error": {problem}}``
  instead, so a client can always tell a complete answer from a cut one.
* ``text/csv``, streamed: a header line of the flat column names, then one line per result
  row, the ``caution`` column last on every row. A CSV answer that fails part-way is cut
  off (the connection closes before the last chunk of the chunked transfer coding).

The first chunk is computed before the answer starts, so its errors are ordinary problem
answers; the endpoints validate every record up front, so the later chunks fail only on a
fault of the service (logged).
"""
from __future__ import annotations

import itertools
import logging
from dataclasses import dataclass
from typing import Any, Callable, Iterator

from flask import Response

from uvdose.service import answer_streams, cautions
from uvdose.service.negotiation import CSV_MEDIA_TYPE, JSON_MEDIA_TYPE, NDJSON_MEDIA_TYPE
from uvdose.service.problems import TYPE_PREFIX, Problem, problem_body
from uvdose.service.wire_formats import json_response, rows_from_columns

log = logging.getLogger(__name__)

STREAMED_MEDIA_TYPES = (NDJSON_MEDIA_TYPE, CSV_MEDIA_TYPE)
"""The media types a dose answer is streamed in (the rest are answered whole)."""


@dataclass
class Chunk:
    """The results of one chunk of records: columns with one entry per result row."""

    columns: dict[str, list]
    samples: int


@dataclass
class DoseAnswer:
    """What an endpoint hands over: the answer's members besides ``results`` and
    ``samples`` (a function of the first chunk), the chunks (computed as they are
    drawn), the layout of a whole JSON answer, and for fields the rows per result."""

    envelope: Callable[[Chunk], dict[str, Any]]
    chunks: Iterator[Chunk]
    layout: str = "records"
    rows_per_result: int | None = None
    """``None``: one row per result; else rows are grouped by ``id`` under ``days``, so
    many rows per result (fields: the days of the season)."""
    on_complete: Callable[[int], None] | None = None
    """Called with the number of result rows once every chunk is done (metrics)."""


def respond(answer: DoseAnswer, media_type: str) -> Response:
    """The answer in ``media_type``: streamed for NDJSON and CSV, whole for JSON."""
    first = next(answer.chunks)
    envelope = answer.envelope(first)
    # No name keeps the first chunk once it is written: a streamed answer holds one chunk.
    chunks = itertools.chain([first], answer.chunks)
    del first
    if media_type == NDJSON_MEDIA_TYPE:
        return answer_streams.streamed(_ndjson(answer, chunks, envelope), NDJSON_MEDIA_TYPE)
    if media_type == CSV_MEDIA_TYPE:
        return answer_streams.streamed(_csv(answer, chunks, envelope), CSV_MEDIA_TYPE)
    if media_type != JSON_MEDIA_TYPE:
        raise ValueError(f"a dose answer is not written as {media_type}")
    return _whole_json(answer, chunks, envelope)


def _grouped(columns: dict[str, list], per_result: int) -> list[dict[str, Any]]:
    """Rows grouped ``per_result`` at a time under ``days``, with the group's ``id``."""
    ids = columns["id"]
    days = rows_from_columns({key: values for key, values in columns.items() if key != "id"})
    return [{"id": ids[start], "days": days[start:start + per_result]} for start in range(0, len(days), per_result)]


def _whole_json(answer: DoseAnswer, chunks: Iterator[Chunk], envelope: dict[str, Any]) -> Response:
    samples = rows = 0
    results: list[dict[str, Any]] = []
    flat: dict[str, list] = {}
    for chunk in chunks:
        samples += chunk.samples
        rows += _row_count(chunk)
        if answer.layout == "columns":
            for name, values in answer_streams.flat_columns(chunk.columns).items():
                flat.setdefault(name, []).extend(values)
        else:
            results.extend(_results(answer, chunk))
    _complete(answer, rows)
    body = dict(envelope, samples=samples)
    if answer.layout == "columns":
        body["columns"] = flat
    else:
        body["results"] = results
    return json_response(body)


def _results(answer: DoseAnswer, chunk: Chunk) -> list[dict[str, Any]]:
    """A chunk's results as the JSON answer's ``results`` holds them."""
    if answer.rows_per_result:
        return _grouped(chunk.columns, answer.rows_per_result)
    return rows_from_columns(chunk.columns)


def _row_count(chunk: Chunk) -> int:
    return len(next(iter(chunk.columns.values()))) if chunk.columns else 0


def _complete(answer: DoseAnswer, rows: int) -> None:
    if answer.on_complete is not None:
        answer.on_complete(rows)


def _ndjson(answer: DoseAnswer, chunks: Iterator[Chunk], envelope: dict[str, Any]) -> Iterator[bytes]:
    yield answer_streams.ndjson_line({"envelope": envelope})
    samples = rows = done = 0
    try:
        for chunk in chunks:
            results = _results(answer, chunk)
            data = answer_streams.ndjson_lines(results)
            samples, rows, done = samples + chunk.samples, rows + _row_count(chunk), done + len(results)
            chunk = results = None  # freed before the next chunk is computed
            yield data
    except Problem as problem:  # the request deadline, say: the status line is gone, so the last line says it
        log.warning("streamed dose answer stopped after %d result rows: %s", rows, problem)
        yield answer_streams.ndjson_line({"error": problem_body(
            problem.status, problem.title, f"{problem.detail} The answer stopped after {rows} result rows and is "
            "incomplete.", TYPE_PREFIX + problem.slug, **problem.extensions)})
        return
    except Exception:  # a fault of the service: said the same way, without its internals
        log.exception("streamed dose answer failed after %d result rows", rows)
        yield answer_streams.ndjson_line({"error": problem_body(
            500, "Internal Server Error", f"The answer failed after {rows} result rows and is incomplete.")})
        return
    _complete(answer, rows)
    yield answer_streams.ndjson_line({"complete": {"results": done, "samples": samples}})


def _csv(answer: DoseAnswer, chunks: Iterator[Chunk], envelope: dict[str, Any]) -> Iterator[str]:
    caution = cautions.csv_caution(envelope["caution"], envelope.get("figure_cautions"))
    names: list[str] | None = None
    rows = 0
    try:
        for chunk in chunks:
            rows += _row_count(chunk)
            flat = cautions.with_caution_column(answer_streams.flat_columns(chunk.columns), caution)
            chunk = None  # freed before the next chunk is computed
            if names is None:
                names = list(flat)
                yield answer_streams.csv_header(names)
            data, flat = answer_streams.csv_lines(flat, names), None
            yield data
    except Exception:  # CSV has no place to say so: the answer is cut off before its end
        log.exception("streamed dose answer failed after %d result rows", rows)
        raise
    _complete(answer, rows)
