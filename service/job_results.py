"""A job's rows as NDJSON, CSV or Parquet, part by part.

The parts hold the endpoint's answer rows as NDJSON (one JSON object per line, as the
synchronous answer's ``results`` hold them, written by :mod:`service.answer_streams`). CSV
and Parquet take them flat: nested objects become dotted column names
(:func:`service.answer_streams.flat_row`, ``dose_j_m2.erythema``), and a row's list of
objects (a field's ``days``) becomes one row per entry, with the row's other members beside
each (``id``; :func:`entry_rows`). CSV lines are written by the synchronous answers' own
writer (:func:`service.answer_streams.csv_row_lines`); Parquet by pyarrow, one row group
per part. The columns are those of the job's first row, in its order, then ``caution``:
the answer's caution and its figure cautions, on every row, as in every CSV answer.
"""
from __future__ import annotations

from typing import Any, Iterable, Iterator

import orjson

from uvdose.service.answer_streams import csv_header, csv_row_lines, flat_row
from uvdose.service.cautions import CSV_CAUTION_COLUMN
from uvdose.service.negotiation import CSV_MEDIA_TYPE, NDJSON_MEDIA_TYPE

PARQUET_MEDIA_TYPE = "application/vnd.apache.parquet"
FORMATS = {"ndjson": NDJSON_MEDIA_TYPE, "csv": CSV_MEDIA_TYPE, "parquet": PARQUET_MEDIA_TYPE}


def entry_rows(row: dict[str, Any]) -> Iterator[dict[str, Any]]:
    """A row, or one row per entry of its list of objects (with the row's other members)."""
    nested = next((key for key, value in row.items()
                   if isinstance(value, list) and value and isinstance(value[0], dict)), None)
    if nested is None:
        yield row
        return
    outer = {key: value for key, value in row.items() if key != nested}
    for entry in row[nested]:
        yield {**outer, **entry}


def _rows(ndjson: bytes, caution: str) -> Iterator[dict[str, Any]]:
    for line in ndjson.splitlines():
        if line:
            for row in entry_rows(orjson.loads(line)):
                yield {**row, CSV_CAUTION_COLUMN: caution}


def csv_parts(parts: Iterable[bytes], caution: str) -> Iterator[bytes]:
    """CSV text, a header and then the rows of each NDJSON part in turn, ``caution`` last."""
    names: list[str] | None = None
    for ndjson in parts:
        rows = list(_rows(ndjson, caution))
        head = ""
        if names is None and rows:
            names = list(flat_row(rows[0]))
            head = csv_header(names)
        yield (head + (csv_row_lines(rows, names) if rows else "")).encode()


def ndjson_parts(parts: Iterable[bytes]) -> Iterator[bytes]:
    yield from parts


def write_parquet(parts: Iterable[bytes], target, caution: str) -> None:
    """One Parquet file (``target`` a path or binary file), a row group per part, ``caution`` last."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    writer = None
    try:
        for ndjson in parts:
            rows = [flat_row(row) for row in _rows(ndjson, caution)]
            if not rows:
                continue
            if writer is None:
                names = list(rows[0])
                table = pa.Table.from_pylist([{name: row.get(name) for name in names} for row in rows])
                writer = pq.ParquetWriter(target, table.schema)
            else:
                table = pa.Table.from_pylist([{name: row.get(name) for name in writer.schema.names} for row in rows],
                                             schema=writer.schema)
            writer.write_table(table)
    finally:
        if writer is not None:
            writer.close()
