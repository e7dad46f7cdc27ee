"""Answers written part by part: result rows as NDJSON lines and as CSV lines.

A large answer is computed in chunks of records; each chunk's results become text here and
leave at once, so the first bytes go out before the last row is computed and a worker
holds one chunk at a time. The synchronous dose endpoints and the jobs' downloads write
through these functions, so that both give the same bytes for the same rows.

* NDJSON (``application/x-ndjson``, one JSON text per line, each ended by ``\\n``;
  https://github.com/ndjson/ndjson-spec): :func:`ndjson_lines` writes rows with orjson
  (NaN as ``null``, numpy values as numbers), the same serialiser as the JSON answers.
* CSV (RFC 4180 with ``\\n`` line ends): nested members are flattened to dotted column
  names (:func:`flat_columns`, :func:`flat_row`: ``dose_j_m2.erythema``, as the irradiance
  CSV names ``effective_w_m2.<spectrum>``); every cell goes through the one CSV cell
  writer of the service, :func:`service.wire_formats.csv_cell`.

:func:`streamed` wraps chunks in a Flask response sent chunk by chunk (HTTP/1.1 chunked
transfer coding under gunicorn; gzip or zstd coding, when asked for, chunk by chunk too).
"""
from __future__ import annotations

import csv
import io
from typing import Any, Iterable, Iterator, Mapping, Sequence

import orjson
from flask import Response, stream_with_context

from uvdose.service.negotiation import NDJSON_MEDIA_TYPE
from uvdose.service.wire_formats import csv_cell

__all__ = ["NDJSON_MEDIA_TYPE", "csv_header", "csv_lines", "csv_row_lines", "flat_columns", "flat_row",
           "ndjson_line", "ndjson_lines", "streamed"]

_ORJSON_OPTIONS = orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_APPEND_NEWLINE


def ndjson_line(value: Any) -> bytes:
    """One JSON text and its line end."""
    return orjson.dumps(value, option=_ORJSON_OPTIONS)


def ndjson_lines(rows: Iterable[Mapping[str, Any]]) -> bytes:
    """Rows as NDJSON, one line per row (an empty ``rows`` gives no bytes)."""
    return b"".join(orjson.dumps(row, option=_ORJSON_OPTIONS) for row in rows)


def flat_row(row: Mapping[str, Any], prefix: str = "") -> dict[str, Any]:
    """A row with its nested objects flattened to dotted names, in member order:
    ``{"dose_j_m2": {"erythema": 1.0}}`` -> ``{"dose_j_m2.erythema": 1.0}``."""
    out: dict[str, Any] = {}
    for key, value in row.items():
        name = f"{prefix}{key}"
        if isinstance(value, Mapping):
            out.update(flat_row(value, name + "."))
        else:
            out[name] = value
    return out


def flat_columns(columns: Mapping[str, Sequence], prefix: str = "") -> dict[str, list]:
    """Equal-length columns whose values may be objects, flattened to dotted names
    (:func:`flat_row` done column-wise: the same names in the same order). A column of
    objects gives one column per member any of its objects has; a missing member is
    ``None``."""
    out: dict[str, list] = {}
    for key, values in columns.items():
        name = f"{prefix}{key}"
        objects = [value for value in values if isinstance(value, Mapping)]
        if not objects:
            out[name] = list(values)
            continue
        members = dict.fromkeys(member for value in objects for member in value)
        nested = {member: [value.get(member) if isinstance(value, Mapping) else None for value in values]
                  for member in members}
        out.update(flat_columns(nested, name + "."))
    return out


def _csv_writer(out: io.StringIO):
    return csv.writer(out, lineterminator="\n")


def csv_header(names: Sequence[str]) -> str:
    """The header line of a CSV answer."""
    out = io.StringIO()
    _csv_writer(out).writerow([csv_cell(name) for name in names])
    return out.getvalue()


def csv_lines(columns: Mapping[str, Sequence], names: Sequence[str] | None = None) -> str:
    """Equal-length flat columns as CSV lines (no header), in the order of ``names``
    (default: the columns' own); a name the columns lack gives empty cells."""
    names = list(columns) if names is None else list(names)
    n = len(next(iter(columns.values()))) if columns else 0
    empty = [None] * n
    cells = [[csv_cell(value) for value in columns.get(name, empty)] for name in names]
    out = io.StringIO()
    _csv_writer(out).writerows(zip(*cells))
    return out.getvalue()


def csv_row_lines(rows: Iterable[Mapping[str, Any]], names: Sequence[str]) -> str:
    """Rows (nested objects allowed) as CSV lines in the order of ``names`` (the dotted
    names of :func:`flat_row`); a member a row lacks gives an empty cell."""
    out = io.StringIO()
    writer = _csv_writer(out)
    for row in rows:
        flat = flat_row(row)
        writer.writerow([csv_cell(flat.get(name)) for name in names])
    return out.getvalue()


def streamed(chunks: Iterable[bytes | str], media_type: str, status: int = 200) -> Response:
    """A response whose body is ``chunks``, each sent as it comes (inside the request's
    context, so the chunks may use the app)."""
    return Response(stream_with_context(_as_bytes(chunks)), status=status, mimetype=media_type)


def _as_bytes(chunks: Iterable[bytes | str]) -> Iterator[bytes]:
    for chunk in chunks:
        data = chunk.encode("utf-8") if isinstance(chunk, str) else chunk
        if data:
            yield data
