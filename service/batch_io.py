"""Batch input and output shared by every batch endpoint: JSON rows, JSON columns and CSV.

A record schema is declared once in marshmallow (fields, wire names, ranges, messages);
that declaration is the single source of truth. Validating ten thousand records one by
one in marshmallow is slow, so :func:`validate_columns` checks whole columns with numpy
against the *same* declarations (read from the schema's ``Range``/``Length``/choice
validators), and only the records it flags go through marshmallow, whose messages then
name each error. Tests hold the two paths to the same verdicts.

Wire names (``lat``, ``cloud_factor``) are marshmallow ``data_key``s; attribute names are
the engine's column names (``latitude_deg``, ``cloud_modification_factor``), so the
validated columns go to :func:`models.engine.Conditions.from_columns` unchanged.
Missing optional values become ``NaN`` (numbers) or ``""`` (text); nothing is clamped.
"""
from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from functools import lru_cache
from datetime import datetime, timezone
from typing import Any, Callable, Iterable, Mapping, Sequence

import numpy as np
import orjson
from flask import Request, Response
from marshmallow import Schema, ValidationError, fields, validate, validates_schema

from uvdose.service.problems import FieldError, Problem

JSON_MEDIA_TYPE = "application/json"
CSV_MEDIA_TYPE = "text/csv"

# ---------------------------------------------------------------------------------------
# Field declarations


def between(minimum: float, maximum: float) -> validate.Range:
    """An inclusive range whose message states it (``must be between -90 and 90``)."""
    return validate.Range(min=minimum, max=maximum, error=f"must be between {minimum} and {maximum}")


def parse_offset_datetime(text: str) -> float:
    """Unix seconds of an ISO 8601 date-time that carries a UTC offset (``Z`` or ``±hh:mm``).

    Raises ``ValueError`` for text that is not ISO 8601 or has no offset: a time without
    an offset is ambiguous, and guessing UTC would silently shift a day's dose.
    """
    moment = datetime.fromisoformat(text)
    if moment.tzinfo is None or moment.utcoffset() is None:
        raise ValueError("no UTC offset")
    return moment.timestamp()


class StrictNumber(fields.Float):
    """A JSON number: strings and booleans are refused, as are NaN and infinities."""

    default_error_messages = {
        "invalid": "must be a number",
        "special": "must be a finite number",
        "too_large": "must be a finite number",
        "required": "is required",
        "null": "must not be null",
    }

    def __init__(self, **kwargs: Any) -> None:
        kwargs.setdefault("allow_none", not kwargs.get("required", False))
        super().__init__(allow_nan=False, **kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.make_error("invalid")
        try:
            return super()._deserialize(float(value), attr, data, **kwargs)
        except OverflowError:
            raise self.make_error("too_large") from None


class OffsetDateTime(fields.Field):
    """An ISO 8601 date-time with offset, loaded as Unix seconds (see :func:`parse_offset_datetime`)."""

    default_error_messages = {
        "invalid": "must be an ISO 8601 date-time string",
        "no_offset": "must carry a UTC offset, e.g. 2026-05-20T12:00:00+02:00 or ...Z",
        "required": "is required",
        "null": "must not be null",
    }

    def _deserialize(self, value, attr, data, **kwargs) -> float:
        if not isinstance(value, str):
            raise self.make_error("invalid")
        try:
            return parse_offset_datetime(value)
        except ValueError as error:
            raise self.make_error("no_offset" if str(error) == "no UTC offset" else "invalid") from None


class Text(fields.String):
    """A JSON string; ``null`` allowed when the field is optional."""

    default_error_messages = {"invalid": "must be a string", "required": "is required",
                              "null": "must not be null"}

    def __init__(self, **kwargs: Any) -> None:
        kwargs.setdefault("allow_none", not kwargs.get("required", False))
        super().__init__(**kwargs)


class StrictBoolean(fields.Boolean):
    """``true`` or ``false`` only (no 1, "yes" or "on")."""

    default_error_messages = {"invalid": "must be true or false"}

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, bool):
            raise self.make_error("invalid")
        return value


class OneOfRegistry(validate.Validator):
    """Value must be a key of a registry looked up at call time (e.g. surface types)."""

    def __init__(self, registry: Callable[[], Iterable[str]], what: str) -> None:
        self.registry = registry
        self.what = what

    @property
    def choices(self) -> frozenset[str]:
        return frozenset(self.registry())

    def __call__(self, value: str) -> str:
        choices = self.choices
        if value not in choices:
            raise ValidationError(f"unknown {self.what} {value!r}; known: {', '.join(sorted(choices))}")
        return value


class RecordSchema(Schema):
    """Base for record schemas: unknown fields are errors that name the field."""

    error_messages = {"unknown": "is not a field of this record", "type": "must be an object"}


def _surface_type_names() -> Iterable[str]:
    from uvdose.models.surfaces import SURFACE_TYPES

    return SURFACE_TYPES.keys()


EARLIEST_TIME = datetime(1950, 1, 1, tzinfo=timezone.utc)
TIME_BEFORE = datetime(2101, 1, 1, tzinfo=timezone.utc)


class ConditionsRecordSchema(RecordSchema):
    """Where and when, and the atmosphere and ground there: the fields every batch endpoint shares.

    Ranges are what the service accepts, wide enough for any real place on Earth's
    surface (and cloud enhancement up to 1.5, seen under broken cloud); they are not
    claims about model accuracy at the extremes.
    """

    id = Text(validate=validate.Length(max=200, error="must be at most {max} characters"),
              metadata={"description": "client's own label, echoed back"})
    time_unix_s = OffsetDateTime(
        data_key="time", required=True,
        validate=validate.Range(
            min=EARLIEST_TIME.timestamp(), max=TIME_BEFORE.timestamp(), max_inclusive=False,
            error="must be from 1950-01-01T00:00:00Z up to, not including, 2101-01-01T00:00:00Z"),
        metadata={"units": "ISO 8601 with offset"})
    latitude_deg = StrictNumber(data_key="lat", required=True, validate=between(-90, 90),
                                metadata={"units": "degree north"})
    longitude_deg = StrictNumber(data_key="lon", required=True, validate=between(-180, 180),
                                 metadata={"units": "degree east"})
    elevation_m = StrictNumber(validate=between(-500, 9000), metadata={"units": "m"})
    pressure_hpa = StrictNumber(validate=between(300, 1100), metadata={"units": "hPa"})
    ozone_du = StrictNumber(validate=between(50, 700), metadata={"units": "DU"})
    aod_550 = StrictNumber(validate=between(0, 5), metadata={"units": "1"})
    angstrom_exponent = StrictNumber(validate=between(-0.5, 3), metadata={"units": "1"})
    single_scattering_albedo = StrictNumber(validate=between(0, 1), metadata={"units": "1"})
    asymmetry_factor = StrictNumber(validate=between(0, 0.95), metadata={"units": "1"})
    surface_albedo = StrictNumber(validate=between(0, 1), metadata={"units": "1"})
    surface_type = Text(validate=[validate.Length(max=64, error="must be at most {max} characters"),
                                  OneOfRegistry(_surface_type_names, "surface type")],
                        metadata={"units": "name"})
    cloud_modification_factor = StrictNumber(data_key="cloud_factor", validate=between(0, 1.5),
                                             metadata={"units": "1"})

    exclusive_fields = (("surface_albedo", "surface_type"),)
    """Pairs of fields (attribute names) a record may give one of, not both."""

    @validates_schema
    def _one_of_each_pair(self, data: Mapping[str, Any], **kwargs: Any) -> None:
        for first, second in self.exclusive_fields:
            if data.get(first) is not None and data.get(second) is not None:
                raise ValidationError(f"give {self.fields[first].data_key or first} or "
                                      f"{self.fields[second].data_key or second}, not both",
                                      self.fields[second].data_key or second)


# ---------------------------------------------------------------------------------------
# Column rules read from a schema


@dataclass(frozen=True)
class ColumnRule:
    """What the vectorised path checks for one field, read from its marshmallow declaration."""

    wire: str
    column: str
    kind: str  # "number", "time" or "text"
    required: bool
    minimum: float | None = None
    maximum: float | None = None
    max_inclusive: bool = True
    max_length: int | None = None
    registry: OneOfRegistry | None = None


def _validators(field: fields.Field) -> list[validate.Validator]:
    return list(field.validators)


def column_rules(schema: Schema) -> tuple[ColumnRule, ...]:
    """The per-field checks of ``schema``, in declaration order (read once per schema class)."""
    return _column_rules_of(type(schema))


@lru_cache(maxsize=None)
def _column_rules_of(schema_class: type[Schema]) -> tuple[ColumnRule, ...]:
    schema = schema_class()
    rules = []
    for name, field in schema.fields.items():
        if isinstance(field, StrictNumber):
            kind = "number"
        elif isinstance(field, OffsetDateTime):
            kind = "time"
        elif isinstance(field, fields.String):
            kind = "text"
        else:
            raise TypeError(f"{type(schema).__name__}.{name}: no column check for {type(field).__name__}")
        rule = dict(wire=field.data_key or name, column=name, kind=kind, required=field.required)
        for validator in _validators(field):
            if isinstance(validator, validate.Range):
                if not validator.min_inclusive:
                    raise TypeError(f"{name}: exclusive minimum not supported by the column check")
                rule.update(minimum=validator.min, maximum=validator.max, max_inclusive=validator.max_inclusive)
            elif isinstance(validator, validate.Length):
                rule["max_length"] = validator.max
            elif isinstance(validator, OneOfRegistry):
                rule["registry"] = validator
            else:
                raise TypeError(f"{name}: no column check for validator {type(validator).__name__}")
        rules.append(ColumnRule(**rule))
    return tuple(rules)


# ---------------------------------------------------------------------------------------
# Validation of whole columns


@dataclass
class Batch:
    """Validated records as columns: ``columns`` maps engine names to (N,) arrays."""

    columns: dict[str, np.ndarray]
    ids: np.ndarray  # object array, None where the record gave no id

    def __len__(self) -> int:
        return len(self.ids)


_NUMBER_TYPES = frozenset((int, float, type(None)))
_TEXT_TYPES = frozenset((str, type(None)))


def _object_column(values: list) -> np.ndarray:
    # np.array(values, dtype=object) would build a 2-D array from nested lists.
    return np.fromiter(values, dtype=object, count=len(values))


def _none_mask(values: list) -> np.ndarray:
    return np.equal(_object_column(values), None)


def _given(column: np.ndarray) -> np.ndarray:
    return ~np.isnan(column) if column.dtype.kind == "f" else ~np.equal(column, None)


def _check_number(rule: ColumnRule, values: list, n: int) -> tuple[np.ndarray, np.ndarray]:
    """(float column with NaN where not given, mask of bad entries)."""
    bad = np.zeros(n, dtype=bool)
    if not set(map(type, values)) <= _NUMBER_TYPES:
        kinds = np.array([type(v) in _NUMBER_TYPES for v in values])
        bad |= ~kinds
        values = [v if ok else None for v, ok in zip(values, kinds)]
    try:
        column = np.array(values, dtype=np.float64)
    except OverflowError:
        column = np.array([_finite_or_inf(v) for v in values], dtype=np.float64)
    missing = _none_mask(values) & ~bad
    given = ~missing & ~bad
    bad |= given & ~_in_range(rule, column)
    if rule.required:
        bad |= missing
    column[bad] = np.nan
    return column, bad


def _finite_or_inf(value: Any) -> float | None:
    try:
        return None if value is None else float(value)
    except OverflowError:
        return math.inf


_DIGITS_AT = np.array([0, 1, 2, 3, 5, 6, 8, 9, 11, 12, 14, 15, 17, 18])
_DAYS_IN_MONTH = np.array([0, 31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31])


def unix_seconds_of_canonical_times(values: Sequence[Any]) -> tuple[np.ndarray, np.ndarray]:
    """Vectorised :func:`parse_offset_datetime` for the two shapes clients send most,
    ``YYYY-MM-DDTHH:MM:SSZ`` and ``YYYY-MM-DDTHH:MM:SS±HH:MM``.

    Returns (Unix seconds, mask of the entries it read); entries of any other shape (or
    not strings) are left to :func:`parse_offset_datetime`. The entries it reads are
    exactly those Python's ``datetime.fromisoformat`` reads to the same instant (a test
    holds the two together); it exists because ``datetime.timestamp()`` costs about 2 µs
    a record, most of the time spent validating 10 000 records.
    """
    n = len(values)
    if not n or set(map(type, values)) != {str}:  # None, numbers, lists: one by one
        return np.full(n, np.nan), np.zeros(n, dtype=bool)
    text = np.array(values)
    if text.dtype.itemsize // 4 not in (20, 25):
        return np.full(n, np.nan), np.zeros(n, dtype=bool)
    codes = text.view(np.uint32).reshape(n, -1).astype(np.int64)
    if codes.shape[1] == 20:
        codes = np.hstack([codes, np.zeros((n, 5), dtype=np.int64)])
    digits = codes[:, _DIGITS_AT] - 48
    ok = ((digits >= 0) & (digits <= 9)).all(axis=1)
    ok &= (codes[:, 4] == 45) & (codes[:, 7] == 45) & (codes[:, 10] == 84)  # "-", "-", "T"
    ok &= (codes[:, 13] == 58) & (codes[:, 16] == 58)  # ":", ":"
    zulu = (codes[:, 19] == 90) & (codes[:, 20] == 0)  # "Z", then nothing
    off_digits = codes[:, [20, 21, 23, 24]] - 48
    signed = np.isin(codes[:, 19], (43, 45)) & (codes[:, 22] == 58)  # "+" or "-", "hh:mm"
    signed &= ((off_digits >= 0) & (off_digits <= 9)).all(axis=1)
    ok &= zulu | signed

    def number(columns):
        return (digits[:, columns] * (10 ** np.arange(len(columns) - 1, -1, -1))).sum(axis=1)

    year, month, day = number([0, 1, 2, 3]), number([4, 5]), number([6, 7])
    hour, minute, second = number([8, 9]), number([10, 11]), number([12, 13])
    offset_h = off_digits[:, 0] * 10 + off_digits[:, 1]
    offset_m = off_digits[:, 2] * 10 + off_digits[:, 3]
    leap = (year % 4 == 0) & ((year % 100 != 0) | (year % 400 == 0))
    month_days = _DAYS_IN_MONTH[np.clip(month, 0, 12)] + ((month == 2) & leap)
    ok &= (year >= 1) & (month >= 1) & (month <= 12) & (day >= 1) & (day <= month_days)
    ok &= (hour <= 23) & (minute <= 59) & (second <= 59)
    ok &= zulu | ((offset_h <= 23) & (offset_m <= 59))
    # Days from the civil date (proleptic Gregorian), H. Hinnant's "days_from_civil" algorithm.
    y = year - (month <= 2)
    era = np.floor_divide(y, 400)
    year_of_era = y - era * 400
    day_of_year = (153 * (month + np.where(month > 2, -3, 9)) + 2) // 5 + day - 1
    day_of_era = year_of_era * 365 + year_of_era // 4 - year_of_era // 100 + day_of_year
    days = era * 146097 + day_of_era - 719468
    offset_s = np.where(zulu, 0, np.where(codes[:, 19] == 45, -1, 1) * (offset_h * 3600 + offset_m * 60))
    seconds = days * 86400 + hour * 3600 + minute * 60 + second - offset_s
    return np.where(ok, seconds.astype(np.float64), np.nan), ok


def _in_range(rule: ColumnRule, column: np.ndarray) -> np.ndarray:
    """Finite and within the rule's declared bounds (NaN is out of range)."""
    with np.errstate(invalid="ignore"):
        inside = np.isfinite(column)
        if rule.minimum is not None:
            inside &= column >= rule.minimum
        if rule.maximum is not None:
            inside &= (column <= rule.maximum) if rule.max_inclusive else (column < rule.maximum)
    return inside


def _check_time(rule: ColumnRule, values: list, n: int) -> tuple[np.ndarray, np.ndarray]:
    column, read = unix_seconds_of_canonical_times(values)
    bad = np.zeros(n, dtype=bool)
    for index in np.flatnonzero(~read):  # other shapes, one by one
        try:
            column[index] = parse_offset_datetime(values[index])
        except (TypeError, ValueError):
            bad[index] = True
    return column, bad | ~_in_range(rule, column)


def _check_text(rule: ColumnRule, values: list, n: int) -> tuple[np.ndarray, np.ndarray]:
    bad = np.zeros(n, dtype=bool)
    if not set(map(type, values)) <= _TEXT_TYPES:
        bad |= np.array([type(v) not in _TEXT_TYPES for v in values])
        values = [None if wrong else v for v, wrong in zip(values, bad)]
    column = _object_column(values)
    missing = np.equal(column, None)
    if rule.required:
        bad |= missing
    given = ~missing & ~bad
    if given.any():
        texts = column[given]
        ok = np.ones(len(texts), dtype=bool)
        if rule.max_length is not None:
            ok &= np.fromiter(map(len, texts), dtype=np.int64, count=len(texts)) <= rule.max_length
        if rule.registry is not None:
            ok &= np.isin(texts.astype(str), np.array(sorted(rule.registry.choices), dtype=str))
        bad[np.flatnonzero(given)[~ok]] = True
    return column, bad


_CHECKS = {"number": _check_number, "time": _check_time, "text": _check_text}


def validate_columns(
    raw: Mapping[str, list],
    schema: Schema,
    *,
    n: int,
    record_offset: int = 0,
    unknown: Sequence[FieldError] = (),
) -> Batch:
    """Check raw columns (wire name -> list of JSON values, ``None`` = not given) against ``schema``.

    Raises :class:`service.problems.Problem` (422) listing every error, each naming the
    record index, its id, the field's wire name and the reason, when any record is bad.
    ``record_offset`` is added to indices (for chunked input); ``unknown`` are errors the
    caller already found (fields the schema does not have).
    """
    rules = column_rules(schema)
    known = {rule.wire for rule in rules}
    errors = list(unknown)
    errors += [FieldError(field=name, reason="is not a field of this record")
               for name in raw if name not in known]
    raw = {name: values for name, values in raw.items() if name in known}
    bad_rows = np.zeros(n, dtype=bool)
    columns: dict[str, np.ndarray] = {}
    for rule in rules:
        values = raw.get(rule.wire)
        if values is None:
            bad_rows |= rule.required
            continue
        if len(values) != n:
            errors.append(FieldError(field=rule.wire, reason=f"has {len(values)} entries, expected {n}"))
            continue
        column, bad = _CHECKS[rule.kind](rule, values, n)
        bad_rows |= bad
        columns[rule.column] = column
    for first, second in getattr(schema, "exclusive_fields", ()):
        if first in columns and second in columns:
            bad_rows |= _given(columns[first]) & _given(columns[second])

    ids = columns.pop("id", None)
    if ids is None:
        ids = np.full(n, None, dtype=object)
    if errors or bad_rows.any():
        not_objects = {error.index for error in errors if error.field == "records"}
        bad_indices = [index for index in np.flatnonzero(bad_rows) if index not in not_objects]
        errors += describe_records(raw, schema, bad_indices, ids, record_offset)
        errors.sort(key=lambda error: -1 if error.index is None else error.index)
        bad_count = len({error.index for error in errors if error.index is not None})
        if not bad_count:  # only request-wide errors: options, or column names in the column layout
            raise Problem(422, "invalid-options", "The request options are invalid", "Nothing was computed.",
                          errors)
        raise Problem(422, "invalid-records", "The batch has invalid records",
                      f"{bad_count} of {n} record(s) have errors; nothing was computed.", errors)
    if "surface_type" in columns:
        columns["surface_type"] = np.where(np.equal(columns["surface_type"], None), "", columns["surface_type"])
    return Batch(columns=columns, ids=ids)


def describe_records(
    raw: Mapping[str, list], schema: Schema, indices: Iterable[int], ids: np.ndarray, offset: int = 0
) -> list[FieldError]:
    """Name each error of the flagged records, with marshmallow's messages."""
    errors: list[FieldError] = []
    for index in indices:
        record = {wire: values[index] for wire, values in raw.items()
                  if len(values) > index and values[index] is not None}
        record_id = ids[index] if isinstance(ids[index], str) else None
        try:
            schema.load(record)
            messages: Mapping[str, Any] = {"": ["rejected by the column check"]}  # the paths disagree
        except ValidationError as error:
            messages = error.normalized_messages()
        for wire, reasons in messages.items():
            for reason in reasons if isinstance(reasons, list) else [reasons]:
                errors.append(FieldError(field=wire, reason=str(reason), index=int(index) + offset, id=record_id))
    return errors


# ---------------------------------------------------------------------------------------
# Reading a request


class OptionsSchema(Schema):
    """Base for request-wide options (everything in the body besides the records)."""

    error_messages = {"unknown": "is not a field of this request", "type": "must be an object"}


@dataclass
class BatchRequest:
    """A validated batch: its records as columns, its options, and how it was laid out."""

    batch: Batch
    options: dict[str, Any]
    layout: str  # "records", "columns" or "csv"


def _problem_400(detail: str) -> Problem:
    return Problem(400, "malformed-body", "The request body cannot be read", detail)


def _too_many(n: int, max_records: int) -> Problem:
    return Problem(413, "too-many-records", "Too many records in one request",
                   f"{n} records sent; at most {max_records} are accepted per request "
                   "(UVDOSE_MAX_RECORDS). Split the batch.", extensions={"max_records": max_records})


def _options(options_schema: Schema, values: Mapping[str, Any]) -> tuple[dict[str, Any], list[FieldError]]:
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
    return read_batch_bytes(request.get_data(), request.mimetype, request.args,
                            record_schema=record_schema, options_schema=options_schema,
                            max_records=max_records)


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
        raw, n, unknown = _csv_columns(data, record_schema)
        if n > max_records:
            raise _too_many(n, max_records)
        options, option_errors = _options(options_schema, _query_options(query, options_schema))
        batch = validate_columns(raw, record_schema, n=n, unknown=option_errors + unknown)
        return BatchRequest(batch, options, "csv")
    if mimetype != JSON_MEDIA_TYPE and not mimetype.endswith("+json"):
        raise Problem(415, "unsupported-media-type", "Unsupported Media Type",
                      f"Send {JSON_MEDIA_TYPE} or {CSV_MEDIA_TYPE}, not {mimetype or 'no Content-Type'}.")
    try:
        body = orjson.loads(data)
    except orjson.JSONDecodeError as error:
        raise _problem_400(f"The body is not valid JSON: {error}") from None
    if not isinstance(body, dict):
        raise _problem_400("The body must be a JSON object with a `records` or a `columns` member.")
    layouts = [key for key in ("records", "columns") if key in body]
    if len(layouts) != 1:
        raise Problem(422, "invalid-options", "The request options are invalid", "Nothing was computed.",
                      [FieldError(field="records", reason="give exactly one of `records` or `columns`")])
    layout = layouts[0]
    rest = {key: value for key, value in body.items() if key != layout}
    if layout == "records":
        raw, n, unknown = _row_columns(body["records"], record_schema, max_records)
    else:
        raw, n, unknown = _given_columns(body["columns"], record_schema, max_records)
    options, option_errors = _options(options_schema, rest)
    # Query options are for CSV bodies; ignoring them under JSON would drop them silently.
    option_errors += [FieldError(field=name, reason="is a query option for CSV bodies; give it in the JSON body")
                      for name in _query_options(query, options_schema)]
    batch = validate_columns(raw, record_schema, n=n, unknown=option_errors + unknown)
    return BatchRequest(batch, options, layout)


def _wire_names(schema: Schema) -> list[str]:
    return [field.data_key or name for name, field in schema.fields.items()]


def _row_columns(records: Any, schema: Schema, max_records: int):
    if not isinstance(records, list) or not records:
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.",
                      [FieldError(field="records", reason="must be a non-empty array of objects")])
    if len(records) > max_records:
        raise _too_many(len(records), max_records)
    n = len(records)
    unknown: list[FieldError] = []
    if not all(type(record) is dict for record in records):
        for index, record in enumerate(records):
            if type(record) is not dict:
                unknown.append(FieldError(field="records", reason="must be an object", index=index))
        records = [record if type(record) is dict else {} for record in records]
    wires = set(_wire_names(schema))
    sent = set().union(*records)
    for name in sorted(sent - wires):
        for index, record in enumerate(records):
            if name in record:
                record_id = record.get("id") if isinstance(record.get("id"), str) else None
                unknown.append(FieldError(field=name, reason="is not a field of this record",
                                          index=index, id=record_id))
    raw = {wire: [record.get(wire) for record in records] for wire in wires & sent}
    return raw, n, unknown


def _given_columns(columns: Any, schema: Schema, max_records: int):
    if not isinstance(columns, dict) or not columns:
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.",
                      [FieldError(field="columns", reason="must be an object of equal-length arrays")])
    unknown = [FieldError(field=f"columns.{name}", reason="must be an array")
               for name, values in columns.items() if not isinstance(values, list)]
    lengths = {len(values) for values in columns.values() if isinstance(values, list)}
    n = max(lengths, default=0)
    if n > max_records:
        raise _too_many(n, max_records)
    if len(lengths) > 1:
        unknown.append(FieldError(field="columns", reason=f"arrays differ in length: {sorted(lengths)}"))
    if unknown:
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.", unknown)
    if n == 0:
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.",
                      [FieldError(field="columns", reason="arrays must not be empty")])
    missing = [FieldError(field=f"columns.{rule.wire}", reason="is required")
               for rule in column_rules(schema) if rule.required and rule.wire not in columns]
    if missing:
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.", missing)
    return dict(columns), n, []


def _csv_columns(data: bytes, schema: Schema):
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        raise _problem_400(f"The CSV body is not UTF-8: {error}") from None
    try:
        rows = list(csv.reader(io.StringIO(text, newline="")))
    except csv.Error as error:
        raise _problem_400(f"The CSV body cannot be parsed: {error}") from None
    rows = [row for row in rows if row]
    if len(rows) < 2:
        raise _problem_400("The CSV body needs a header line and at least one record line.")
    header, body = [name.strip() for name in rows[0]], rows[1:]
    errors = [FieldError(field="", reason=f"has {len(row)} values, the header has {len(header)}", index=index)
              for index, row in enumerate(body) if len(row) != len(header)]
    if errors:
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.", errors)
    if len(set(header)) != len(header):
        raise _problem_400("The CSV header names a column twice.")
    kinds = {rule.wire: rule.kind for rule in column_rules(schema)}
    raw = {}
    for name, values in zip(header, zip(*body)):
        raw[name] = _csv_numbers(values) if kinds.get(name) == "number" else [v if v != "" else None for v in values]
    return raw, len(body), []


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


def _query_options(query: Mapping[str, str], options_schema: Schema) -> dict[str, Any]:
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
# Writing a response


def negotiate(request: Request) -> str:
    """The response media type the client accepts: JSON unless it asks for CSV; 406 if neither."""
    if not request.headers.get("Accept"):
        return JSON_MEDIA_TYPE
    best = request.accept_mimetypes.best_match([JSON_MEDIA_TYPE, CSV_MEDIA_TYPE])
    if best is None:
        raise Problem(406, "not-acceptable", "Not Acceptable",
                      f"This resource is available as {JSON_MEDIA_TYPE} or {CSV_MEDIA_TYPE}.")
    return best


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
    # A dict display with constant keys builds each row about twice as fast as
    # dict(zip(keys, values)) (measured in tests/benchmarks/bench_http.py, 10 000 rows).
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


def csv_text(columns: Mapping[str, Sequence], header: bool = True) -> str:
    """Equal-length columns as CSV text (with a header line unless ``header`` is false);
    ``None`` and NaN as empty cells."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    if header:
        writer.writerow(list(columns))
    cleaned = [[None if isinstance(v, float) and v != v else v for v in values] for values in columns.values()]
    writer.writerows(zip(*cleaned))
    return out.getvalue()


def csv_response(columns: Mapping[str, Sequence], status: int = 200) -> Response:
    return Response(csv_text(columns), status=status, mimetype=CSV_MEDIA_TYPE)
