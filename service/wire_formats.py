"""Batches on the wire: JSON rows, JSON columns and CSV in; JSON and CSV out.

Readers turn a body into raw columns (wire name -> list of JSON values, ``None`` = not
given) and hand them to :mod:`service.column_checks`; they raise
:class:`service.problems.Problem` for bodies that cannot be read (400), media types the
service does not take (415), too many records (413) and malformed layouts (422).
Writers negotiate the response type and serialise (orjson for JSON).
"""
from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Callable, Iterable, Mapping, Sequence

import numpy as np
import orjson
from flask import Request, Response
from marshmallow import Schema, ValidationError, fields

from uvdose.service.column_checks import Batch, column_rules, validate_columns
from uvdose.service.json_body import parse_json_body
from uvdose.service.negotiation import CSV_MEDIA_TYPE, JSON_MEDIA_TYPE, chosen_media_type
from uvdose.service.problems import FieldError, Problem
from uvdose.service.request_body import read_body


# ---------------------------------------------------------------------------------------
# Reading


@dataclass
class BatchRequest:
    """A validated batch: its records as columns, its options, and how it was laid out."""

    batch: Batch
    options: dict[str, Any]
    layout: str  # "records", "columns" or "csv"


def malformed_body(detail: str) -> Problem:
    return Problem(400, "malformed-body", "The request body cannot be read", detail)


def too_many(n: int, max_records: int, what: str = "records", setting: str = "UVDOSE_MAX_RECORDS") -> Problem:
    return Problem(413, "too-many-records", "Too many records in one request",
                   f"{n} {what} sent; at most {max_records} are accepted per request "
                   f"({setting}). Split the batch.", extensions={"max_records": max_records})


def _layout_problem(field: str, reason: str) -> Problem:
    return Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.",
                   [FieldError(field=field, reason=reason)])


def read_json_object(data: bytes, mimetype: str, members: str) -> dict[str, Any]:
    """The JSON object of a body (``members`` says what it must hold, for the 400's detail)."""
    if mimetype != JSON_MEDIA_TYPE and not mimetype.endswith("+json"):
        raise Problem(415, "unsupported-media-type", "Unsupported Media Type",
                      f"Send {JSON_MEDIA_TYPE}, not {mimetype or 'no Content-Type'}.")
    body = parse_json_body(data)
    if not isinstance(body, dict):
        raise malformed_body(f"The body must be a JSON object with {members}.")
    return body


def load_options(options_schema: Schema, values: Mapping[str, Any]) -> tuple[dict[str, Any], list[FieldError]]:
    """Loaded options and the errors in them (request-wide: no index, no id)."""
    try:
        return options_schema.load(values), []
    except ValidationError as error:
        errors = [FieldError(field=str(name), reason=str(reason))
                  for name, reasons in _flatten(error.normalized_messages())
                  for reason in reasons]
        return {}, errors


def _flatten(messages: Mapping[Any, Any], prefix: str = "") -> Iterable[tuple[str, list]]:
    for key, value in messages.items():
        if key == "_schema" and prefix:
            name = prefix
        elif isinstance(key, int):
            name = f"{prefix}[{key}]"
        else:
            name = f"{prefix}.{key}" if prefix else str(key)
        if isinstance(value, Mapping):
            yield from _flatten(value, name)
        else:
            yield name, value if isinstance(value, list) else [value]


def read_batch(
    request: Request, *, record_schema: Schema, options_schema: Schema, max_records: int
) -> BatchRequest:
    """Read a JSON (``records`` or ``columns``) or CSV batch from a request and validate it whole.

    CSV bodies carry their options in the query string (same names; lists comma-separated).
    """
    return read_batch_bytes(read_body(request), request.mimetype, request.args,
                            record_schema=record_schema, options_schema=options_schema,
                            max_records=max_records)


INPUTS_ONLY_ENVIRON = "uvdose.inputs_only"
"""A WSGI environ key no HTTP request can set: the jobs' submission check
(service/job_operations.py) sets it to have a batch endpoint read and check a whole body,
its tables and what it checks beyond the schemas included, and answer 204 before anything
is computed."""


def inputs_only() -> bool:
    """Whether the request being served asks only for its inputs to be checked (see
    :data:`INPUTS_ONLY_ENVIRON`)."""
    from flask import request

    return bool(request.environ.get(INPUTS_ONLY_ENVIRON))


def read_endpoint_batch(record_schema: Schema, options_schema: Schema) -> tuple[str, BatchRequest]:
    """(the answer's negotiated media type, the batch) of the batch endpoint's request being
    served: negotiated first (a 406 before the body is read), then read and validated whole,
    at most ``UVDOSE_MAX_RECORDS`` records."""
    from flask import current_app, request

    media_type = negotiate(request)
    return media_type, read_batch(request, record_schema=record_schema, options_schema=options_schema,
                                  max_records=current_app.config["UVDOSE_MAX_RECORDS"])


def read_batch_bytes(
    data: bytes,
    mimetype: str,
    query: Mapping[str, str],
    *,
    record_schema: Schema,
    options_schema: Schema,
    max_records: int,
) -> BatchRequest:
    """:func:`read_batch` on a body held in memory (the offline ``uvdose batch`` uses this too)."""
    if mimetype == CSV_MEDIA_TYPE:
        raw, n = csv_columns(data, record_schema)
        if n > max_records:
            raise too_many(n, max_records)
        options, option_errors = load_options(options_schema, query_options(query, options_schema))
        batch = validate_columns(raw, record_schema, n=n, unknown=option_errors)
        return BatchRequest(batch, options, "csv")
    if mimetype != JSON_MEDIA_TYPE and not mimetype.endswith("+json"):
        raise Problem(415, "unsupported-media-type", "Unsupported Media Type",
                      f"Send {JSON_MEDIA_TYPE} or {CSV_MEDIA_TYPE}, not {mimetype or 'no Content-Type'}.")
    body = read_json_object(data, mimetype, "a `records` or a `columns` member")
    layouts = [key for key in ("records", "columns") if key in body]
    if len(layouts) != 1:
        raise Problem(422, "invalid-options", "The request options are invalid", "Nothing was computed.",
                      [FieldError(field="records", reason="give exactly one of `records` or `columns`")])
    layout = layouts[0]
    rest = {key: value for key, value in body.items() if key != layout}
    if layout == "records":
        raw, n, unknown = row_columns(body["records"], record_schema, max_records)
    else:
        raw, n = given_columns(body["columns"], record_schema, max_records)
        unknown = []
    options, option_errors = load_options(options_schema, rest)
    # Query options are for CSV bodies; ignoring them under JSON would drop them silently.
    option_errors += [FieldError(field=name, reason="is a query option for CSV bodies; give it in the JSON body")
                      for name in query_options(query, options_schema)]
    batch = validate_columns(raw, record_schema, n=n, unknown=option_errors + unknown)
    return BatchRequest(batch, options, layout)


def _wire_names(schema: Schema) -> list[str]:
    return [field.data_key or name for name, field in schema.fields.items()]


def row_columns(records: Any, schema: Schema, max_records: int,
                name: str = "records") -> tuple[dict[str, list], int, list[FieldError]]:
    """JSON rows (a list of objects) as raw columns, the row count, and the errors of rows
    that are not objects (``field`` = ``name``) or give fields the schema lacks."""
    if not isinstance(records, list) or not records:
        raise _layout_problem(name, "must be a non-empty array of objects")
    if len(records) > max_records:
        raise too_many(len(records), max_records)
    n = len(records)
    unknown: list[FieldError] = []
    if not all(type(record) is dict for record in records):
        for index, record in enumerate(records):
            if type(record) is not dict:
                unknown.append(FieldError(field=name, reason="must be an object", index=index))
        records = [record if type(record) is dict else {} for record in records]
    wires = set(_wire_names(schema))
    sent = set().union(*records)
    for extra in sorted(sent - wires):
        for index, record in enumerate(records):
            if extra in record:
                record_id = record.get("id") if isinstance(record.get("id"), str) else None
                unknown.append(FieldError(field=extra, reason=schema.error_messages["unknown"],
                                          index=index, id=record_id))
    raw = {wire: [record.get(wire) for record in records] for wire in wires & sent}
    return raw, n, unknown


def given_columns(columns: Any, schema: Schema, max_records: int, name: str = "columns",
                  allow_empty: bool = False) -> tuple[dict[str, list], int]:
    """JSON columns (an object of equal-length arrays) as raw columns and the row count.

    The column layout's own faults (not arrays, unequal lengths, a required column
    missing; empty unless ``allow_empty``) are 422 problems naming ``name.<column>``."""
    if not isinstance(columns, dict) or (not columns and not allow_empty):
        raise _layout_problem(name, "must be an object of equal-length arrays")
    unknown = [FieldError(field=f"{name}.{column}", reason="must be an array")
               for column, values in columns.items() if not isinstance(values, list)]
    lengths = {len(values) for values in columns.values() if isinstance(values, list)}
    n = max(lengths, default=0)
    if n > max_records:
        raise too_many(n, max_records)
    if len(lengths) > 1:
        unknown.append(FieldError(field=name, reason=f"arrays differ in length: {sorted(lengths)}"))
    if unknown:
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.", unknown)
    if n == 0 and not allow_empty:
        raise _layout_problem(name, "arrays must not be empty")
    missing = [FieldError(field=f"{name}.{rule.wire}", reason="is required")
               for rule in column_rules(schema) if rule.required and rule.wire not in columns]
    if missing and n:
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.", missing)
    return dict(columns), n


def csv_columns(data: bytes, schema: Schema) -> tuple[dict[str, list], int]:
    """A CSV body (header line, then one line per record) as raw columns and the row count."""
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        raise malformed_body(f"The CSV body is not UTF-8: {error}") from None
    try:
        rows = list(csv.reader(io.StringIO(text, newline="")))
    except csv.Error as error:
        raise malformed_body(f"The CSV body cannot be parsed: {error}") from None
    rows = [row for row in rows if row]
    if len(rows) < 2:  # readable, but no record: as an empty `records` array, a 422
        raise _layout_problem("records", "a CSV body needs a header line and at least one record line")
    header, body = [name.strip() for name in rows[0]], rows[1:]
    errors = [FieldError(field="", reason=f"has {len(row)} values, the header has {len(header)}", index=index)
              for index, row in enumerate(body) if len(row) != len(header)]
    if errors:
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.", errors)
    if len(set(header)) != len(header):
        raise malformed_body("The CSV header names a column twice.")
    kinds = {rule.wire: rule.kind for rule in column_rules(schema)}
    raw = {}
    for name, values in zip(header, zip(*body)):
        raw[name] = _csv_numbers(values) if kinds.get(name) == "number" else [v if v != "" else None for v in values]
    return raw, len(body)


def _csv_numbers(texts: Sequence[str]) -> list:
    """CSV cells as floats, ``None`` for empty cells, the text itself where it is not a number."""
    stripped = [text.strip() for text in texts]
    try:
        numbers = np.array([text or "nan" for text in stripped], dtype=np.float64)
        values = numbers.tolist()
        return [None if text == "" else (value if math.isfinite(value) else text)
                for text, value in zip(stripped, values)]
    except ValueError:
        return [None if text == "" else _float_or_text(text) for text in stripped]


def _float_or_text(text: str):
    try:
        value = float(text)
    except ValueError:
        return text
    return value if math.isfinite(value) else text


def query_options(query: Mapping[str, str], options_schema: Schema) -> dict[str, Any]:
    """Options given in the query string (CSV bodies): lists comma-separated, booleans as text."""
    options: dict[str, Any] = {}
    for name, field in options_schema.fields.items():
        wire = field.data_key or name
        if wire not in query:
            continue
        text = query[wire]
        if isinstance(field, fields.List):
            options[wire] = [item.strip() for item in text.split(",") if item.strip()]
        elif isinstance(field, fields.Boolean):
            options[wire] = {"true": True, "false": False}.get(text.lower(), text)
        else:
            options[wire] = text
    return options


# ---------------------------------------------------------------------------------------
# Writing


def negotiate(request: Request) -> str:
    """The response media type negotiated for ``request`` before the view ran, among those
    the view declared with :func:`service.negotiation.produces` (a 406 was answered if the
    ``Accept`` header allows none)."""
    return chosen_media_type()


def json_response(body: Any, status: int = 200) -> Response:
    """Serialise with orjson (numpy arrays and NaN-as-null handled)."""
    return Response(orjson.dumps(body, option=orjson.OPT_SERIALIZE_NUMPY), status=status,
                    mimetype=JSON_MEDIA_TYPE)


def rows_from_columns(columns: Mapping[str, Sequence], nest: str | None = None) -> list[dict[str, Any]]:
    """Turn equal-length columns (lists) into a list of row dicts, keys in column order.

    With ``nest``, columns named ``<nest>.<name>`` become one dict member ``<nest>`` of
    each row (``{"<name>": value, ...}``), placed where the first of them stands.
    """
    return _row_builder(tuple(columns), nest)(zip(*columns.values()))


@lru_cache(maxsize=64)
def _row_builder(keys: tuple[str, ...], nest: str | None) -> Callable[[Iterable[tuple]], list[dict[str, Any]]]:
    # Kept hand-written because it measures fastest (tests/benchmarks/bench_rows.py, 10 000
    # irradiance rows, 15 columns with 3 nested, best of 25 on the shared 2-core box): this
    # dict display with constant keys 0.0135 s; dict(zip(keys, row)) 0.0242 s (1.8x);
    # pandas 3.1 DataFrame.to_dict("records") 0.108 s (8.0x). With orjson.dumps after:
    # 0.027 s, 0.042 s (1.5x), 0.132 s (4.9x). orjson writes numpy structured arrays only
    # as lists, so it cannot build named rows itself.
    # The keys enter the generated source only through repr(), as string literals.
    if not keys:
        return lambda rows: [{} for _ in rows]
    names = [f"v{index}" for index in range(len(keys))]
    members: list[str | None] = []  # None marks where the nested member goes
    nested: list[str] = []
    for key, name in zip(keys, names):
        if nest is not None and key.startswith(nest + "."):
            if not nested:
                members.append(None)
            nested.append(f"{key[len(nest) + 1:]!r}: {name}")
        else:
            members.append(f"{key!r}: {name}")
    group = f"{nest!r}: {{{', '.join(nested)}}}"
    display = ", ".join(group if member is None else member for member in members)
    targets = ", ".join(names) + ("," if len(names) == 1 else "")
    return eval(f"lambda rows: [{{{display}}} for {targets} in rows]")  # noqa: S307


FORMULA_LEADS = ("=", "+", "-", "@", "\t", "\r")
"""First characters that make a spreadsheet read a text cell as a formula (the OWASP
guidance on CSV injection); such cells are written with a leading single quote."""


def spreadsheet_safe(text: str) -> str:
    """``text`` as a CSV cell a spreadsheet shows as text: a single quote before a formula lead."""
    return "'" + text if text.startswith(FORMULA_LEADS) else text


def csv_cell(value: Any) -> Any:
    """One value as a CSV cell, the one cell writer of every CSV answer (the streamed ones
    of :mod:`service.answer_streams` too): ``None`` and NaN as empty cells, booleans as
    ``true``/``false`` (as in JSON and in the query options), text made
    :func:`spreadsheet_safe`, anything else as the csv module writes it."""
    if value is None or (isinstance(value, float) and value != value):
        return None
    if value is True or value is False:
        return "true" if value else "false"
    if isinstance(value, str):
        return spreadsheet_safe(value)
    return value


def csv_text(columns: Mapping[str, Sequence], header: bool = True) -> str:
    """Equal-length columns as CSV text (with a header line unless ``header`` is false);
    every cell through :func:`csv_cell`."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    if header:
        writer.writerow([csv_cell(name) for name in columns])
    cleaned = [[csv_cell(v) for v in values] for values in columns.values()]
    writer.writerows(zip(*cleaned))
    return out.getvalue()


def csv_response(columns: Mapping[str, Sequence], status: int = 200) -> Response:
    return Response(csv_text(columns), status=status, mimetype=CSV_MEDIA_TYPE)
