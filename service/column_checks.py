"""Whole-column validation of records against their marshmallow schema.

Validating ten thousand records one by one in marshmallow is slow, so :func:`check_columns`
checks whole columns with numpy against the *same* declarations (each field's type and
its ``Range``/``Length``/registry validators, read once per schema class by
:func:`column_rules`, and the schema's ``exclusive_fields``/``one_of_fields`` pairs), and
only the records it flags go through marshmallow, whose messages then name each error
(:func:`describe_records`). Tests hold the two paths to the same verdicts.

Input columns map wire names to lists of JSON values (``None`` = not given); output
columns map attribute names (the engine's column names) to arrays. Missing optional
values become ``NaN`` (numbers, times, dates), ``None`` (text) or ``False`` (booleans);
nothing is clamped.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Callable, Iterable, Mapping, Sequence

import numpy as np
from marshmallow import Schema, ValidationError, fields, validate

from uvdose.service.problems import FieldError, FieldErrors, Problem, invalid_records
from uvdose.service.record_fields import (
    IsoDate,
    NoControlCharacters,
    OffsetDateTime,
    OneOfRegistry,
    StrictBoolean,
    StrictNumber,
    WholeNumber,
)
from uvdose.service.time_text import (
    parse_iso_date,
    parse_offset_datetime,
    unix_seconds_of_canonical_dates,
    unix_seconds_of_canonical_times,
)


@dataclass(frozen=True)
class ColumnRule:
    """What the vectorised path checks for one field, read from its marshmallow declaration."""

    wire: str
    column: str
    kind: str  # "number", "whole", "time", "date", "text" or "boolean"
    required: bool
    minimum: float | None = None
    maximum: float | None = None
    max_inclusive: bool = True
    max_length: int | None = None
    registry: OneOfRegistry | None = None
    no_control_characters: bool = False


_KINDS = ((WholeNumber, "whole"), (StrictNumber, "number"), (OffsetDateTime, "time"), (IsoDate, "date"),
          (fields.String, "text"), (StrictBoolean, "boolean"))


def column_rules(schema: Schema) -> tuple[ColumnRule, ...]:
    """The per-field checks of ``schema``, in declaration order (read once per schema class)."""
    return _column_rules_of(type(schema))


@lru_cache(maxsize=None)
def _column_rules_of(schema_class: type[Schema]) -> tuple[ColumnRule, ...]:
    schema = schema_class()
    rules = []
    for name, field in schema.fields.items():
        kind = next((kind for field_type, kind in _KINDS if isinstance(field, field_type)), None)
        if kind is None:
            raise TypeError(f"{schema_class.__name__}.{name}: no column check for {type(field).__name__}")
        rule = dict(wire=field.data_key or name, column=name, kind=kind, required=field.required)
        for validator in field.validators:
            if isinstance(validator, validate.Range):
                if not validator.min_inclusive:
                    raise TypeError(f"{name}: exclusive minimum not supported by the column check")
                rule.update(minimum=validator.min, maximum=validator.max, max_inclusive=validator.max_inclusive)
            elif isinstance(validator, validate.Length):
                rule["max_length"] = validator.max
            elif isinstance(validator, OneOfRegistry):
                rule["registry"] = validator
            elif isinstance(validator, NoControlCharacters):
                rule["no_control_characters"] = True
            else:
                raise TypeError(f"{name}: no column check for validator {type(validator).__name__}")
        rules.append(ColumnRule(**rule))
    return tuple(rules)


@dataclass
class Batch:
    """Validated records as columns: ``columns`` maps engine names to (N,) arrays."""

    columns: dict[str, np.ndarray]
    ids: np.ndarray  # object array, None where the record gave no id

    def __len__(self) -> int:
        return len(self.ids)


# ---------------------------------------------------------------------------------------
# One check per kind of field: (column, mask of bad entries)


_NUMBER_TYPES = frozenset((int, float, type(None)))
_WHOLE_TYPES = frozenset((int, type(None)))
_TEXT_TYPES = frozenset((str, type(None)))
_BOOLEAN_TYPES = frozenset((bool, type(None)))


def _object_column(values: list) -> np.ndarray:
    # np.array(values, dtype=object) would build a 2-D array from nested lists.
    return np.fromiter(values, dtype=object, count=len(values))


def _none_mask(values: list) -> np.ndarray:
    return np.equal(_object_column(values), None)


def _given(column: np.ndarray) -> np.ndarray:
    if column.dtype.kind == "f":
        return ~np.isnan(column)
    return ~np.equal(column, None)


def _wrong_types(values: list, allowed: frozenset) -> np.ndarray | None:
    """Mask of entries whose type is not allowed (``None`` when every entry is fine)."""
    if set(map(type, values)) <= allowed:
        return None
    return np.array([type(value) not in allowed for value in values])


def _in_range(rule: ColumnRule, column: np.ndarray) -> np.ndarray:
    """Finite and within the rule's declared bounds (NaN is out of range)."""
    with np.errstate(invalid="ignore"):
        inside = np.isfinite(column)
        if rule.minimum is not None:
            inside &= column >= rule.minimum
        if rule.maximum is not None:
            inside &= (column <= rule.maximum) if rule.max_inclusive else (column < rule.maximum)
    return inside


def _finite_or_inf(value: Any) -> float | None:
    try:
        return None if value is None else float(value)
    except OverflowError:
        return math.inf


def _check_numbers(rule: ColumnRule, values: list, n: int, allowed: frozenset) -> tuple[np.ndarray, np.ndarray]:
    bad = np.zeros(n, dtype=bool)
    wrong = _wrong_types(values, allowed)
    if wrong is not None:
        bad |= wrong
        values = [None if is_wrong else v for v, is_wrong in zip(values, wrong)]
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


def _check_number(rule: ColumnRule, values: list, n: int) -> tuple[np.ndarray, np.ndarray]:
    return _check_numbers(rule, values, n, _NUMBER_TYPES)


def _check_whole(rule: ColumnRule, values: list, n: int) -> tuple[np.ndarray, np.ndarray]:
    return _check_numbers(rule, values, n, _WHOLE_TYPES)


def _check_instants(rule: ColumnRule, values: list, n: int, vectorised: Callable, one: Callable[[str], float]):
    """Times or dates: the vectorised reader on the given entries, ``one`` on what it leaves."""
    missing = _none_mask(values)
    given = np.flatnonzero(~missing)
    column = np.full(n, np.nan)
    seconds, read = vectorised(values if len(given) == n else [values[index] for index in given])
    column[given] = seconds
    bad = np.zeros(n, dtype=bool)
    for index in given[~read]:  # other shapes, one by one
        try:
            column[index] = one(values[index])
        except (TypeError, ValueError):
            bad[index] = True
    bad |= ~missing & ~_in_range(rule, column)
    if rule.required:
        bad |= missing
    return column, bad


def _check_time(rule: ColumnRule, values: list, n: int) -> tuple[np.ndarray, np.ndarray]:
    return _check_instants(rule, values, n, unix_seconds_of_canonical_times, parse_offset_datetime)


def _check_date(rule: ColumnRule, values: list, n: int) -> tuple[np.ndarray, np.ndarray]:
    return _check_instants(rule, values, n, unix_seconds_of_canonical_dates, parse_iso_date)


def _check_text(rule: ColumnRule, values: list, n: int) -> tuple[np.ndarray, np.ndarray]:
    bad = np.zeros(n, dtype=bool)
    wrong = _wrong_types(values, _TEXT_TYPES)
    if wrong is not None:
        bad |= wrong
        values = [None if is_wrong else v for v, is_wrong in zip(values, wrong)]
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
        if rule.no_control_characters:
            search = NoControlCharacters.pattern.search
            ok &= np.fromiter((search(text) is None for text in texts), dtype=bool, count=len(texts))
        bad[np.flatnonzero(given)[~ok]] = True
    column[bad] = None  # a refused text (an over-long or control-laden id) is not echoed back
    return column, bad


def _check_boolean(rule: ColumnRule, values: list, n: int) -> tuple[np.ndarray, np.ndarray]:
    wrong = _wrong_types(values, _BOOLEAN_TYPES)
    bad = np.zeros(n, dtype=bool) if wrong is None else wrong
    column = np.fromiter((value is True for value in values), dtype=bool, count=n)
    if rule.required:
        bad |= _none_mask(values)
    return column, bad


_CHECKS = {"number": _check_number, "whole": _check_whole, "time": _check_time, "date": _check_date,
           "text": _check_text, "boolean": _check_boolean}


# ---------------------------------------------------------------------------------------
# Checking a batch


DESCRIBED_RECORDS_AT_MOST = 10_000
"""Bad records whose errors marshmallow words (about 20 µs each); the errors of any
further bad records are counted from the column checks' masks, not described, so that a
request of half a million bad route points costs a fraction of a second, not seconds
(``error_count`` still counts them all)."""


def check_columns(
    raw: Mapping[str, list],
    schema: Schema,
    *,
    n: int,
    record_offset: int = 0,
    unknown: Sequence[FieldError] = (),
) -> tuple[Batch, list[FieldError]]:
    """Check raw columns (wire name -> list of JSON values, ``None`` = not given) against ``schema``.

    Returns the columns (bad entries NaN/None) and every error, each naming the record
    index (plus ``record_offset``), its id, the field's wire name and the reason, sorted by
    index; request-wide errors (``index`` None) first. ``unknown`` are errors the caller
    already found (fields the schema does not have, entries that are not objects). Past
    :data:`DESCRIBED_RECORDS_AT_MOST` bad records the errors are a
    :class:`service.problems.FieldErrors` counting the rest.
    """
    rules = column_rules(schema)
    known = {rule.wire for rule in rules}
    errors = list(unknown)
    errors += [FieldError(field=name, reason=schema.error_messages["unknown"])
               for name in raw if name not in known]
    raw = {name: values for name, values in raw.items() if name in known}
    bad_rows = np.zeros(n, dtype=bool)
    bad_fields = np.zeros(n, dtype=np.int64)  # per record: fields in error, as marshmallow counts them
    columns: dict[str, np.ndarray] = {}
    for rule in rules:
        values = raw.get(rule.wire)
        if values is None:
            bad_rows |= rule.required
            bad_fields += rule.required
            if rule.kind == "boolean":
                columns[rule.column] = np.zeros(n, dtype=bool)
            continue
        if len(values) != n:
            errors.append(FieldError(field=rule.wire, reason=f"has {len(values)} entries, expected {n}"))
            continue
        column, bad = _CHECKS[rule.kind](rule, values, n)
        bad_rows |= bad
        bad_fields += bad
        columns[rule.column] = column
    missing = np.zeros(n, dtype=bool)
    for first, second in getattr(schema, "exclusive_fields", ()):
        if first in columns and second in columns:
            bad_rows |= _given(columns[first]) & _given(columns[second])
    for first, second in getattr(schema, "one_of_fields", ()):
        bad_rows |= (_given(columns[first]) if first in columns else missing) == \
                    (_given(columns[second]) if second in columns else missing)

    ids = columns.pop("id", None)
    if ids is None:
        ids = np.full(n, None, dtype=object)
    if errors or bad_rows.any():
        not_objects = {error.index for error in errors if error.field == "records"}
        bad_indices = [index for index in np.flatnonzero(bad_rows) if index not in not_objects]
        described, counted = bad_indices[:DESCRIBED_RECORDS_AT_MOST], bad_indices[DESCRIBED_RECORDS_AT_MOST:]
        errors += describe_records(raw, schema, described, ids, record_offset)
        errors.sort(key=lambda error: -1 if error.index is None else error.index)
        if counted:
            # A record with field errors gets one per field (marshmallow then skips the
            # schema's pair checks); one without, one for its first broken pair.
            counted = np.asarray(counted)
            errors = FieldErrors(errors, int(np.maximum(bad_fields[counted], 1).sum()),
                                 (counted + record_offset).tolist())
    if "surface_type" in columns:
        columns["surface_type"] = np.where(np.equal(columns["surface_type"], None), "", columns["surface_type"])
    return Batch(columns=columns, ids=ids), errors


def validate_columns(raw: Mapping[str, list], schema: Schema, *, n: int, **options: Any) -> Batch:
    """:func:`check_columns` (same arguments), raising :class:`service.problems.Problem` (422)
    listing every error when any record is bad."""
    batch, errors = check_columns(raw, schema, n=n, **options)
    if errors:
        raise invalid_records(errors, n)
    return batch


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
