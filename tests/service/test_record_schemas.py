"""Every record schema of the service is read by the same column checks, and those checks
flag exactly the records marshmallow rejects (the schema is the one source of truth)."""
import numpy as np
import pytest

from uvdose.service.column_checks import check_columns, column_rules
from uvdose.service.irradiance_batch import IrradianceRecordSchema
from uvdose.service.routes_doses import (
    DailyEntrySchema,
    FieldRecordSchema,
    RouteConditionsSchema,
    RoutePointSchema,
    WindowRecordSchema,
)
from uvdose.service.routes_ozone import OzoneRecordSchema
from uvdose.service.time_text import parse_iso_date, unix_seconds_of_canonical_dates
from uvdose.service.weather_series_table import FieldWeatherSchema, WindowWeatherSchema

SCHEMAS = [IrradianceRecordSchema, WindowRecordSchema, FieldRecordSchema, DailyEntrySchema,
           RoutePointSchema, RouteConditionsSchema, OzoneRecordSchema, FieldWeatherSchema, WindowWeatherSchema]


def _pool(rule):
    """Values around each edge of a field's declared rule, and values of the wrong type."""
    if rule.kind in ("number", "whole"):
        low = rule.minimum if rule.minimum is not None else -1e6
        high = rule.maximum if rule.maximum is not None else 1e6
        values = [low, high, (low + high) / 2, low - 1e-3, high + 1e-3, "1", True, [1], float("inf")]
        return values + ([0, 3, 3.0, -1] if rule.kind == "whole" else [round(low), 1e308])
    if rule.kind == "time":
        return ["2026-01-01T00:00:00Z", "2026-01-01T00:00:00", "x", 5, "2100-12-31T23:59:59+00:00",
                "1950-01-01T00:00:00+01:00", "2026-06-21 12:00:00+02:00"]
    if rule.kind == "date":
        return ["2026-01-01", "2026-02-30", "2026-1-1", "20260101", 5, "1949-12-31", "2100-12-31", "2101-01-01"]
    if rule.kind == "boolean":
        return [True, False, 1, "true", [True]]
    return ["grass", "lava", 3, "x" * 201, "x" * 65, "", ["a"]]


@pytest.mark.parametrize("schema_class", SCHEMAS, ids=lambda s: s.__name__)
def test_column_checks_flag_exactly_what_marshmallow_rejects(schema_class):
    schema = schema_class()
    rules = column_rules(schema)
    rng = np.random.default_rng(sum(map(ord, schema_class.__name__)))
    records = []
    for _ in range(300):
        record = {}
        for rule in rules:  # about two fields of each record from the whole pool, the rest valid
            pool = _pool(rule)
            if rng.random() < (0.95 if rule.required else 0.3):
                record[rule.wire] = pool[rng.integers(len(pool))] if rng.random() < 2 / len(rules) else pool[0]
        records.append(record)
    expected_bad = set()
    for index, record in enumerate(records):
        try:
            schema.load(record)
        except Exception:
            expected_bad.add(index)
    assert 10 < len(expected_bad) < 290  # the sample exercises both verdicts
    names = set().union(*records)
    raw = {name: [r.get(name) for r in records] for name in names}
    _, errors = check_columns(raw, schema, n=len(records))
    assert {error.index for error in errors} == expected_bad
    assert not any(error.reason == "rejected by the column check" for error in errors)


def test_the_vectorised_date_reader_agrees_with_python_date_fromisoformat():
    # Reference: CPython's datetime.date.fromisoformat, through parse_iso_date.
    rng = np.random.default_rng(5)
    texts = [f"{rng.integers(1, 10000):04d}-{rng.integers(0, 14):02d}-{rng.integers(0, 33):02d}" for _ in range(3000)]
    texts += ["2000-02-29", "1900-02-29", "2026-1-01", "+2026-01-01", "2026-01-01T00", None, 20260101]
    seconds, read = unix_seconds_of_canonical_dates(texts)
    assert 1000 < read.sum() < len(texts)
    for text, value, was_read in zip(texts, seconds, read):
        try:
            expected = parse_iso_date(text)
        except (TypeError, ValueError):
            expected = None
        assert (value == expected) if was_read else expected is None, text
