"""The batch operations a job can run, how a submission is checked, and how it is cut into parts.

A job's body is exactly what the operation's synchronous endpoint takes (JSON ``records``
or ``columns``; CSV with its options in the query string; for routes a ``routes`` array),
or a Parquet file of records (turned into the same CSV body). At submission the whole batch
goes through the endpoint's own reader (its record and option schemas and the shared column
checks, :mod:`service.wire_formats`), so every bad record is named in the endpoint's own 422
problem; the endpoint itself then answers a one-record probe, which catches what it checks
beyond the schemas (a season's length, a window's); the irradiance, windows and fields
endpoints also read and check the whole body (measured irradiances, windows, the ``daily``
and ``weather`` tables) with nothing computed, so a bad value of any record is named at
submission as the synchronous endpoint names it.

Each part is a body of the same kind holding a run of the records (the options as sent; the
``daily`` and ``weather`` tables cut to that run's entries and re-indexed), sized by the work
it implies (:func:`Operation.weights`), and is run by the endpoint itself on a Dask worker
(:mod:`service.job_parts`), so a job's rows are the synchronous endpoint's rows.
"""
from __future__ import annotations

import csv
import io
import re
import sys
from dataclasses import dataclass
from datetime import date
from typing import Any, Callable, Mapping

import numpy as np
import orjson

from uvdose.service import irradiance_batch, routes_doses, routes_ozone, wire_formats
from uvdose.service.negotiation import CSV_MEDIA_TYPE, JSON_MEDIA_TYPE
from uvdose.service.problems import Problem, invalid_records

PARQUET_MEDIA_TYPE = "application/vnd.apache.parquet"


@dataclass(frozen=True)
class Operation:
    """One batch endpoint as a job runs it."""

    name: str
    path: str
    records_member: str  # "records" (or "columns") for record batches, "routes" for routes
    record_schema: Any = None
    options_schema: Any = None
    tables: tuple[str, ...] = ()  # options holding column tables keyed by record index
    table_index: str = "field"
    takes_csv: bool = True
    checks_inputs_whole: bool = False  # its endpoint checks a whole body computing nothing (wire_formats.inputs_only)
    streams_rows: bool = False  # its endpoint streams NDJSON rows (the dose endpoints, service/dose_answers.py)

    def check(self, data: bytes, media_type: str, query: Mapping[str, str]) -> int:
        """The number of records, after the endpoint's reader has read the whole batch;
        raises the endpoint's :class:`Problem` otherwise."""
        if self.records_member == "routes":
            return _check_routes(data, media_type)
        batch = wire_formats.read_batch_bytes(data, media_type, query, record_schema=self.record_schema,
                                              options_schema=self.options_schema, max_records=sys.maxsize)
        return len(batch.batch)


def _check_routes(data: bytes, media_type: str) -> int:
    body = wire_formats.read_json_object(data, media_type, "a `routes` array")
    options, errors = wire_formats.load_options(routes_doses.RouteOptionsSchema(), body)
    if errors:
        raise invalid_records(errors, 0)
    raw_routes = options["routes"]
    if not isinstance(raw_routes, list) or not raw_routes:
        raise wire_formats.malformed_body("`routes` must be a non-empty array of routes.")
    # The endpoint's reader of routes: every bad value named by route and path in the body.
    routes_doses._read_routes(raw_routes)
    return len(raw_routes)


OPERATIONS: dict[str, Operation] = {op.name: op for op in (
    Operation("irradiance", "/v1/irradiance", "records", irradiance_batch.IrradianceRecordSchema(),
              irradiance_batch.IrradianceOptionsSchema(), checks_inputs_whole=True),
    Operation("ozone", "/v1/ozone", "records", routes_ozone.OzoneRecordSchema(), routes_ozone.OzoneOptionsSchema()),
    Operation("windows", routes_doses.WINDOWS_ROUTE, "records", routes_doses.WindowRecordSchema(),
              routes_doses.WindowOptionsSchema(), tables=("weather",), table_index="window", checks_inputs_whole=True,
              streams_rows=True),
    Operation("fields", routes_doses.FIELDS_ROUTE, "records", routes_doses.FieldRecordSchema(),
              routes_doses.FieldOptionsSchema(), tables=("daily", "weather"), table_index="field", checks_inputs_whole=True,
              streams_rows=True),
    Operation("routes", routes_doses.ROUTES_ROUTE, "routes", takes_csv=False, streams_rows=True),
)}
"""Every batch operation by the name ``POST /v1/jobs?operation=`` and ``uvdose batch`` take."""


# -- a submission in parts -------------------------------------------------------------------

@dataclass
class Submission:
    """A checked body: its media type, query options and records, ready to be cut."""

    operation: Operation
    media_type: str
    query: dict[str, str]
    body: dict[str, Any] | None  # JSON bodies
    csv_rows: list[list[str]] | None  # CSV bodies: header first
    records: int

    def weights(self) -> np.ndarray:
        """Work of each record: field-days for fields, points for routes, else 1."""
        if self.operation.name == "routes":
            return np.array([max(1, routes_doses._route_count([route])) for route in self.body["routes"]], float)
        weight = 1
        if self.operation.name == "fields":
            options = self.body if self.body is not None else self.query
            try:
                weight = (date.fromisoformat(str(options["last_day"]))
                          - date.fromisoformat(str(options["first_day"]))).days + 1
            except (KeyError, ValueError):
                weight = 1
        return np.full(self.records, max(1, weight), float)

    def bounds(self, part_work: int) -> list[tuple[int, int]]:
        """(first, end) record of each part: consecutive runs of at most ``part_work`` work
        (a record heavier than that alone)."""
        weights, out, start, work = self.weights(), [], 0, 0.0
        for index, weight in enumerate(weights):
            if index > start and work + weight > part_work:
                out.append((start, index))
                start, work = index, 0.0
            work += weight
        out.append((start, len(weights)))
        return out

    def part(self, first: int, end: int) -> "PartBody":
        """The body of the records first..end-1, of the same kind as the submission, and
        where its table entries stand in the submitted tables."""
        if self.csv_rows is not None:
            text = io.StringIO(newline="")
            csv.writer(text).writerows([self.csv_rows[0]] + self.csv_rows[1 + first:1 + end])
            return PartBody(text.getvalue().encode(), {})
        body = dict(self.body)
        member = self.operation.records_member
        if member == "records" and "columns" in body:
            member = "columns"
        if member == "columns" and isinstance(body["columns"], dict):
            body["columns"] = {name: values[first:end] if isinstance(values, list) else values
                               for name, values in body["columns"].items()}
        else:
            body[member] = body[member][first:end]
        positions = {}
        for table in self.operation.tables:
            if table in body:
                body[table], kept = _table_rows_of(body[table], self.operation.table_index, first, end)
                if kept is not None:
                    positions[table] = kept
        return PartBody(orjson.dumps(body), positions)


@dataclass(frozen=True)
class PartBody:
    """A part's body, and ``table_positions``: for each table cut to the part's entries
    (``daily``, ``weather``), the position in the submitted table of each entry kept."""

    body: bytes
    table_positions: dict[str, list[int]]


_TABLE_ENTRY = re.compile(r"^(?P<table>[a-z_]+)\.(?P<column>[^\[]+)\[(?P<entry>\d+)\]$")


def whole_table_field(field: str, table_positions: Mapping[str, list[int]]) -> str:
    """A part's error field ``<table>.<column>[<entry>]`` named by the entry's place in the
    submitted table (any other field as it is)."""
    match = _TABLE_ENTRY.match(field)
    if match is None or match["table"] not in table_positions:
        return field
    positions, entry = table_positions[match["table"]], int(match["entry"])
    if entry >= len(positions):
        return field
    return f"{match['table']}.{match['column']}[{positions[entry]}]"


def batch_wide(problem: dict[str, Any], first: int, table_positions: Mapping[str, list[int]]) -> dict[str, Any]:
    """A part's problem (as JSON) named as the whole submission: record indices counted from
    the start of the batch (``first`` is the part's first record), table entries by their
    place in the submitted tables."""
    for error in problem.get("errors") or []:
        if error.get("index") is not None:
            error["index"] += first
        if isinstance(error.get("field"), str):
            error["field"] = whole_table_field(error["field"], table_positions)
    return problem


def _table_rows_of(table: Any, index_column: str, first: int, end: int) -> tuple[Any, list[int] | None]:
    """The entries of a column table for records first..end-1, re-indexed from 0, and the
    positions of those entries in ``table`` (a table the endpoint will refuse goes as it
    came, positions ``None``, for the endpoint to name what is wrong)."""
    if not isinstance(table, dict) or not isinstance(table.get(index_column), list):
        return table, None
    index = table[index_column]
    if any(not isinstance(value, int) or isinstance(value, bool) for value in index):
        return table, None
    lengths = {len(values) for values in table.values() if isinstance(values, list)}
    if lengths != {len(index)}:
        return table, None
    index_array = np.asarray(index, dtype=np.int64)
    keep = np.flatnonzero((index_array >= first) & (index_array < end))
    out = {name: [values[i] for i in keep] if isinstance(values, list) else values for name, values in table.items()}
    out[index_column] = (index_array[keep] - first).tolist()
    return out, keep.tolist()


def parquet_as_csv(data: bytes) -> bytes:
    """A Parquet file of records as the CSV body the endpoints read (times and dates as ISO 8601)."""
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.csv as pa_csv
    import pyarrow.parquet as pq

    try:
        table = pq.read_table(io.BytesIO(data))
    except (pa.ArrowInvalid, OSError) as error:
        raise wire_formats.malformed_body(f"The body is not a Parquet file: {error}") from None
    columns = []
    for column in table.columns:
        if pa.types.is_timestamp(column.type):
            zoned = column.cast(pa.timestamp("s", tz="UTC")) if column.type.tz is None else column
            column = pc.strftime(zoned, format="%Y-%m-%dT%H:%M:%SZ")
        elif pa.types.is_date(column.type):
            column = pc.strftime(column.cast(pa.timestamp("s")), format="%Y-%m-%d")
        columns.append(column)
    out = io.BytesIO()
    pa_csv.write_csv(pa.Table.from_arrays(columns, names=table.column_names), out,
                     pa_csv.WriteOptions(quoting_style="needed"))
    return out.getvalue()


def read_submission(operation: Operation, data: bytes, media_type: str, query: Mapping[str, str],
                    probe: Callable[..., None]) -> Submission:
    """The checked submission of ``data``; raises the endpoint's problem for a bad one.

    ``probe(operation, media_type, query, part, inputs_only=False)`` runs the endpoint on a
    :class:`PartBody` (one record; or, ``inputs_only``, the whole body, only read and checked)
    and raises its problem, named as the whole submission, if it refuses it."""
    if media_type == PARQUET_MEDIA_TYPE:
        data, media_type = parquet_as_csv(data), CSV_MEDIA_TYPE
    if media_type == CSV_MEDIA_TYPE and not operation.takes_csv:
        raise Problem(415, "unsupported-media-type", "Unsupported Media Type",
                      f"The {operation.name} operation takes {JSON_MEDIA_TYPE} only.")
    records = operation.check(data, media_type, query)
    if media_type == CSV_MEDIA_TYPE:
        rows = [row for row in csv.reader(io.StringIO(data.decode("utf-8-sig"), newline="")) if row]
        submission = Submission(operation, media_type, dict(query), None, rows, records)
    else:
        submission = Submission(operation, JSON_MEDIA_TYPE, {}, orjson.loads(data), None, records)
    probe(operation, submission.media_type, submission.query, submission.part(0, 1))
    if operation.checks_inputs_whole:
        # The whole body by the endpoint's own checks, computing nothing: a bad window or
        # table entry of any part is named now (entries by their place in the table as sent).
        probe(operation, submission.media_type, submission.query, PartBody(data, {}), inputs_only=True)
    return submission
