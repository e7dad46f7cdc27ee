"""The ``weather`` table of the field and window dose requests: a weather time series per
field or window, one entry per reading, read and checked as records are.

The table is a column table (like ``daily``): ``field`` (or ``window``), the record index
the reading belongs to; ``time``, its ISO 8601 time stamp with offset; and exactly one
reading: ``ghi_w_m2`` (measured broadband global horizontal irradiance), ``cloud_cover``
(0–1), ``cloud_oktas`` (0–8) or ``cloud_factor`` (0–1.5). The request option
``weather_time_stamps`` says which end of its interval a time stamp marks. Entries go
through the shared column checks (:mod:`service.column_checks`) against the schemas
below, then through ``models.weather_series.cloud_steps``, whose checks of readings that
cannot be real come back as record errors. Every error names the record (``index`` and
``id`` of the field or window), the entry by its path in the body
(``weather.ghi_w_m2[4]``; ``weather.time[4]`` for the reading as a whole) and the reason.
"""
from __future__ import annotations

from typing import Any, Mapping, Sequence

import numpy as np
from marshmallow import validate

from uvdose.models import weather_series
from uvdose.models.record_errors import RecordError
from uvdose.service.column_checks import check_columns
from uvdose.service.problems import FieldError, FieldErrors, invalid_records, records_named, unlisted_errors
from uvdose.service.record_fields import (
    CLOUD_COVER,
    CLOUD_FACTOR,
    CLOUD_OKTAS,
    RecordSchema,
    StrictNumber,
    Text,
    WholeNumber,
    between,
    offset_time,
)
from uvdose.service.wire_formats import given_columns, too_many

TABLE = "weather"
"""The request member holding the table."""

_READINGS = ("measured_ghi_w_m2", "cloud_cover_fraction", "cloud_cover_oktas", "cloud_modification_factor")


def _all_pairs(names: Sequence[str]) -> tuple[tuple[str, str], ...]:
    return tuple((a, b) for i, a in enumerate(names) for b in names[i + 1:])


class WeatherReadingSchema(RecordSchema):
    """One reading of a weather series: its time and one of four kinds of reading."""

    error_messages = {"unknown": "is not a column of the weather table"}

    time_unix_s = offset_time()
    measured_ghi_w_m2 = StrictNumber(data_key="ghi_w_m2", validate=between(weather_series.BSRN_MIN_GHI_W_M2, 1500),
                                     metadata={"units": "W m-2"})
    cloud_cover_fraction = CLOUD_COVER
    cloud_cover_oktas = CLOUD_OKTAS
    cloud_modification_factor = CLOUD_FACTOR

    exclusive_fields = _all_pairs(_READINGS)


class FieldWeatherSchema(WeatherReadingSchema):
    """A reading of a field's series (``POST /v1/doses/fields``)."""

    record_index = WholeNumber(data_key="field", required=True,
                               validate=validate.Range(min=0, error="must be a record index, 0 or more"))


class WindowWeatherSchema(WeatherReadingSchema):
    """A reading of a window's series (``POST /v1/doses/windows``)."""

    record_index = WholeNumber(data_key="window", required=True,
                               validate=validate.Range(min=0, error="must be a record index, 0 or more"))


TIME_STAMPS_OPTION = Text(validate=validate.OneOf(weather_series.TIME_STAMPS,
                                                  error="must be one of {choices}"))
"""The ``weather_time_stamps`` option: which end of its interval a reading's time marks
(default ``interval_end``)."""

_WIRE = {name: field.data_key or name for name, field in FieldWeatherSchema().fields.items()}
"""Models names of the reading columns -> wire names (``time_unix_s`` -> ``time``)."""

SERIES_KIND_WIRE = {kind: _WIRE[kind] for kind in _READINGS}
"""The wire name of each kind of series, as the answer's provenance names it."""


def read_weather(table: Any, schema: RecordSchema, ids: np.ndarray, places: Mapping[str, np.ndarray],
                 max_readings: int, time_stamp: str | None) -> weather_series.CloudSteps:
    """The cloud step functions of the records (fields or windows) from a ``weather`` table.

    ``ids`` (K,) the records' ids; ``places`` their ``latitude_deg``, ``longitude_deg``
    and optional ``elevation_m``, ``pressure_hpa`` columns (K,). More than
    ``max_readings`` entries give a 413 problem; any bad entry a 422 problem naming every
    one (see the module notes). Nothing is dropped.
    """
    n_records = len(ids)
    index_wire = schema.fields["record_index"].data_key
    check_size(table, max_readings)
    raw, n = given_columns(table, schema, max_readings, name=TABLE)
    entries, errors = check_columns(raw, schema, n=n)
    owner = entries.columns.get("record_index", np.full(n, np.nan))
    known = ~np.isnan(owner) & (owner < n_records)
    owner_of = np.where(known, owner, -1).astype(np.int64)

    def record_of(entry: int | None) -> tuple[int | None, str | None]:
        if entry is None or owner_of[entry] < 0:
            return None, None
        record = int(owner_of[entry])
        return record, ids[record] if isinstance(ids[record], str) else None

    def entry_error(wire: str, entry: int | None, reason: str) -> FieldError:
        record, record_id = record_of(entry)
        where = f"{TABLE}.{wire}" + ("" if entry is None else f"[{entry}]")
        return FieldError(field=where, reason=reason, index=record, id=record_id)

    named = [entry_error(error.field, error.index, error.reason) for error in errors]
    named += [entry_error(index_wire, int(i), f"must be a record index 0–{n_records - 1}")
              for i in np.flatnonzero(~np.isnan(owner) & (owner >= n_records))]
    if named or unlisted_errors(errors):
        # Bad entries beyond those described are counted (service.column_checks), not named.
        raise invalid_records(FieldErrors(named, unlisted_errors(errors)), n_records)

    def name_reading_error(error: RecordError) -> FieldError:
        return entry_error(_WIRE.get(error.field, "time"), error.index, error.reason)

    columns = entries.columns
    with records_named(name_reading_error, n_records):
        return weather_series.cloud_steps(
            owner_of, columns["time_unix_s"], {kind: columns[kind] for kind in _READINGS if kind in columns},
            n_records, places["latitude_deg"], places["longitude_deg"], places.get("elevation_m"),
            places.get("pressure_hpa"), time_stamp=time_stamp or "interval_end")


def check_size(table: Any, max_readings: int) -> None:
    """The 413 problem for a table longer than ``max_readings``, before anything is read."""
    if isinstance(table, dict):
        longest = max((len(v) for v in table.values() if isinstance(v, list)), default=0)
        if longest > max_readings:
            raise too_many(longest, max_readings, "weather readings", "UVDOSE_MAX_WEATHER_READINGS")


def provenance(series_kind: np.ndarray, series_share: np.ndarray, outside: np.ndarray) -> list:
    """The ``clouds`` member of each answer row: where its clouds came from.

    ``series_kind`` (...,) the models reading kind of the record's series (``""``: none),
    ``series_share`` (...,) the share of the period covered by readings, ``outside``
    (...,) the wire name of the factor used where the series has no reading
    (``clear_sky`` when there is none). Same shape in and out (nested lists of dicts).
    """
    kinds = np.vectorize(lambda kind: SERIES_KIND_WIRE.get(kind), otypes=[object])(series_kind)
    shape = np.shape(series_share)
    flat = [{"series": k, "series_share": round(float(s), 4), "outside_series": o}
            for k, s, o in zip(np.broadcast_to(kinds, shape).ravel(), np.ravel(series_share),
                               np.broadcast_to(outside, shape).ravel())]
    return np.array(flat, dtype=object).reshape(shape).tolist() if shape else flat[0]


def source_used(steps, series_share: np.ndarray, outside_source: np.ndarray) -> np.ndarray:
    """The cloud source an answer's uncertainty names (``models.uncertainty.CLOUD_SOURCES``):
    the series' where its readings cover at least half of the period (``series_share``,
    (K,) or (F, D)), else the source used outside it (``outside_source``, same shape). The
    uncertainty itself mixes the two node by node (``models.dose``)."""
    outside = np.asarray(outside_source, dtype=object)
    if steps is None:
        return outside
    kind = steps.kind if outside.ndim == 1 else steps.kind[:, None]
    series = np.vectorize(lambda k: weather_series.UNCERTAINTY_SOURCE.get(k, "none"), otypes=[object])(kind)
    return np.where(np.asarray(series_share) >= 0.5, np.broadcast_to(series, outside.shape), outside)
