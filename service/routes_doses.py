"""Cumulative doses: ``POST /v1/doses/windows``, ``/v1/doses/fields``, ``/v1/doses/routes``.

Request → record schemas below, read by the shared readers and column checks
(:mod:`service.wire_formats`, :mod:`service.column_checks`) → arrays → ``models.dose`` /
``models.vehicle_routes`` with the engine as evaluator (:mod:`service.engine_gateway`, through
the grid-cell cache) → arrays → JSON. The physics, the quadrature and their sources are
documented in those modules; this layer only validates and shapes.

* windows: each record is a place and a time window (``start``, ``end``) with the
  shared conditions fields, optional cloud cover and a receiver orientation.
* fields: each record is a field; the request names a season (``first_day`` …
  ``last_day``, UTC dates) and optional per-day ozone and cloud inputs as a column
  table (``daily``, one :class:`DailyEntrySchema` record per entry); the answer has
  per-day doses, running season totals and the ratio to the same field's clear-sky
  climatological dose.
* routes: each route is a list of timestamped points (or a GeoJSON Feature with a
  ``times`` property, turned into the same points first); the points of all routes are
  checked as one batch of :class:`RoutePointSchema` records, the route-level members as
  :class:`RouteConditionsSchema` records. The answer has the dose on the driver's side
  window.

Errors in the ``daily`` table are request-wide (``index`` null) and name the entry:
``daily.day[4]``. Errors in a route carry the route's position as ``index`` and its id,
and name the value by its path in the body: ``routes[3].points[7].lat``, or in a GeoJSON
Feature ``routes[3].geometry.coordinates[7][1]`` and ``routes[3].properties.times[7]``.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass, replace
from typing import Any, Callable, Mapping

import numpy as np
from flask import Blueprint, Response, current_app, request
from marshmallow import fields, validate

from uvdose.models import MODEL_VERSION, clouds, dose, exposure, filters, vehicle_routes
from uvdose.models.record_errors import RecordError
from uvdose.models.spectral_grid import WAVELENGTH_NM
from uvdose.service import cautions, dose_answers, engine_gateway, metrics, uncertainty_fields, work_bounds
from uvdose.service.column_checks import check_columns
from uvdose.service.dose_answers import STREAMED_MEDIA_TYPES, Chunk, DoseAnswer
from uvdose.service.negotiation import CSV_MEDIA_TYPE, JSON_MEDIA_TYPE, NDJSON_MEDIA_TYPE, produces
from uvdose.service.problems import (FieldError, FieldErrors, NameRecordError, Problem, by_schema, invalid_records,
                                     records_named, unlisted_errors)
from uvdose.service.request_body import read_body
from uvdose.service.record_fields import (
    AOD_550,
    CLOUD_COVER,
    CLOUD_FACTOR,
    CLOUD_OKTAS,
    ELEVATION,
    LATITUDE,
    LONGITUDE,
    OZONE_COLUMN,
    RECORD_ID,
    OZONE_CLIMATOLOGY_OPTION,
    SPECTRA_OPTION,
    SURFACE_ALBEDO,
    ConditionsRecordSchema,
    IsoDate,
    OneOfRegistry,
    OptionsSchema,
    RecordSchema,
    StrictBoolean,
    StrictNumber,
    Text,
    WholeNumber,
    between,
    offset_time,
    time_span,
)
from uvdose.service.time_text import iso_utc
from uvdose.service.weather_series_table import (
    TIME_STAMPS_OPTION,
    FieldWeatherSchema,
    WindowWeatherSchema,
    provenance,
    read_weather,
    source_used,
)
from uvdose.service.wire_formats import (
    given_columns,
    inputs_only,
    load_options,
    negotiate,
    read_endpoint_batch,
    read_json_object,
    row_columns,
    rows_from_columns,
    too_many,
)

blueprint = Blueprint("doses", __name__)

WINDOWS_ROUTE = "/v1/doses/windows"
FIELDS_ROUTE = "/v1/doses/fields"
ROUTES_ROUTE = "/v1/doses/routes"

MAX_WINDOW_S = 31 * 86400.0
"""Longest time window accepted (31 days): bounds the work of one record."""
MAX_SEASON_DAYS = 366
MAX_ROUTE_SPAN_S = MAX_WINDOW_S
"""Longest time from a route's first point to its last (31 days, as for a window): bounds
the samples of one route before any is allocated."""
ANSWER_MEDIA_TYPES = (JSON_MEDIA_TYPE, NDJSON_MEDIA_TYPE, CSV_MEDIA_TYPE)
"""What every dose endpoint answers in: whole JSON, or streamed NDJSON or CSV."""

DEFAULT_WINDOW_SPECTRA = ("erythema", "actinic_icnirp")
DEFAULT_FIELD_SPECTRA = ("plant_damage", "plant_growth", "erythema")
DEFAULT_ROUTE_SPECTRA = ("erythema", "actinic_icnirp")
DEFAULT_ROUTE_GLAZING = "clear_side_glass"

_SECONDS_PER_DAY = 86400


# -- shared option fields -------------------------------------------------------------

MAX_CURVE_POINTS = 2000
"""Nodes accepted in a client's transmittance curve (a 0.1 nm curve over 200 nm fits)."""


def _curve_nodes() -> validate.Length:
    return validate.Length(min=2, max=MAX_CURVE_POINTS, error="must have between {min} and {max} entries")


class CurveSchema(OptionsSchema):
    wavelength_nm = fields.List(StrictNumber(allow_none=False), required=True, validate=_curve_nodes())
    transmittance = fields.List(StrictNumber(allow_none=False), required=True, validate=_curve_nodes())


class DoseOptionsSchema(OptionsSchema):
    spectra = SPECTRA_OPTION
    step_s = StrictNumber(validate=between(dose.MIN_STEP_S, dose.MAX_STEP_S))
    glazing = Text(validate=OneOfRegistry(lambda: filters.FILTERS.keys(), "glazing"))
    transmittance_curve = fields.Nested(CurveSchema)
    ozone_climatology = OZONE_CLIMATOLOGY_OPTION
    answer_layout = Text(validate=validate.OneOf(["records", "columns"], error="must be 'records' or 'columns'"))


def _options_problem(field: str, reason: str) -> Problem:
    return invalid_records([FieldError(field=field, reason=reason)], 0)


def _transmittance(options: Mapping[str, Any], default: str | None = None):
    """(transmittance on the grid or None, label for responses and cache context)."""
    name, curve = options.get("glazing"), options.get("transmittance_curve")
    if name is None and curve is None:
        name = default
    try:
        values = filters.resolve_transmittance(name, curve, WAVELENGTH_NM)
    except ValueError as error:
        raise _options_problem("transmittance_curve" if curve is not None else "glazing", str(error)) from None
    if curve is not None:
        digest = hashlib.sha256(np.asarray(values, dtype=np.float64).tobytes()).hexdigest()[:16]
        return values, f"curve:{digest}"
    return values, name or "none"


def _exposure_rows(doses: Mapping[str, np.ndarray], final: Mapping[str, np.ndarray]) -> dict[str, list]:
    figures = exposure.exposure_figures(doses, final)
    out: dict[str, list] = {}
    for key, value in figures.items():
        if isinstance(value, dict):
            out[key] = rows_from_columns({k: np.asarray(v).tolist() for k, v in value.items()})
        else:
            out[key] = [None if np.isinf(x) else x for x in np.asarray(value).tolist()]
    return out


def _read_records(record_schema, options_schema):
    """(validated batch, options, layout of a whole JSON answer) of a JSON records/columns body."""
    _, batch_request = read_endpoint_batch(record_schema, options_schema)
    options = batch_request.options
    layout = options.get("answer_layout") or ("columns" if batch_request.layout == "columns" else "records")
    return batch_request.batch, options, layout


def _id_bytes(ids) -> int:
    """Bytes the ids take in an answer (with their quotes), for its size estimate."""
    return sum(len(text.encode("utf-8")) + 2 for text in ids.tolist() if isinstance(text, str))


def _bounded(kind: str, per_record: np.ndarray, ids, rows: int, spectra: int, id_bytes: int,
             rows_per_record: int = 1) -> tuple[str, list]:
    """(the answer's media type, the chunks of records to compute) once the request's work
    (``per_record``: samples × spectra of each record) and its answer's estimated size are
    within the limits (:mod:`service.work_bounds`); else a 413 problem, nothing computed."""
    limits = work_bounds.Limits.of(current_app.config)
    work_bounds.check_work(per_record, ids, kind, limits)
    media_type = negotiate(request)
    estimate = work_bounds.answer_bytes(kind, media_type, rows, spectra, id_bytes)
    work_bounds.check_answer(kind, estimate, media_type in STREAMED_MEDIA_TYPES, limits)
    return media_type, work_bounds.record_chunks(per_record, limits.chunk_sample_spectra, rows_per_record)


def _shifted(name: NameRecordError, offset: int) -> NameRecordError:
    """``name`` for errors of a chunk whose first record is record ``offset``."""
    def named(error: RecordError) -> FieldError:
        error.index = int(error.index) + offset
        return name(error)

    return named


def _steps_part(steps, part: slice):
    """The weather series of the records in ``part`` (``None`` without a weather table)."""
    if steps is None:
        return None
    keep = (steps.owner >= part.start) & (steps.owner < part.stop)
    return replace(steps, owner=steps.owner[keep] - part.start, start_unix_s=steps.start_unix_s[keep],
                   end_unix_s=steps.end_unix_s[keep], cmf=steps.cmf[keep], kind=steps.kind[part])


def _count(route: str, n: int) -> Callable[[int], None]:
    return lambda rows: metrics.count_records(route, n)


def _record_id(ids, index: int):
    return ids[index] if isinstance(ids[index], str) else None


def _common(spectra, step_s, label, caution: str, results: list[dict[str, Any]]) -> dict[str, Any]:
    """The members every dose answer has; ``figure_cautions`` for the figures ``results`` hold."""
    figures = set(spectra).union(*(result.keys() for result in results))
    return {"model_version": MODEL_VERSION, "caution": caution,
            "figure_cautions": cautions.figure_cautions(figures), "spectra": list(spectra),
            "step_s": step_s, "glazing": label, "uncertainty_basis": uncertainty_fields.BASIS}


def _uncertainty_objects(sigma, count: int, clouds=None) -> list[dict[str, Any]]:
    """One ``uncertainty`` object per dose result (``service.uncertainty_fields``)."""
    return [uncertainty_fields.dose_object(sigma, i, None if clouds is None else clouds[i]) for i in range(count)]


def _longer_than_limit_period(duration_s: np.ndarray) -> list[bool]:
    """Per result: does it span more than the ICNIRP limit's 8-hour period?"""
    return (np.asarray(duration_s) > exposure.ICNIRP_REFERENCE_DAY_S).tolist()


# -- windows --------------------------------------------------------------------------

class WindowRecordSchema(ConditionsRecordSchema):
    """A place, a time window and the conditions there."""

    time_unix_s = offset_time("start")
    end_unix_s = offset_time("end")
    cloud_cover_fraction = CLOUD_COVER
    cloud_cover_oktas = CLOUD_OKTAS
    tilt_deg = StrictNumber(validate=between(0, 180))
    receiver_azimuth_deg = StrictNumber(validate=between(0, 360))
    sky_view_factor = StrictNumber(validate=between(0, 1))

    exclusive_fields = ConditionsRecordSchema.exclusive_fields + (
        ("cloud_modification_factor", "cloud_cover_fraction"),
        ("cloud_modification_factor", "cloud_cover_oktas"),
        ("cloud_cover_fraction", "cloud_cover_oktas"),
    )


class WindowOptionsSchema(DoseOptionsSchema):
    weather = fields.Raw(error_messages={"null": "must not be null"})  # read as WindowWeatherSchema records
    weather_time_stamps = TIME_STAMPS_OPTION


_WINDOW_RECORDS = WindowRecordSchema()
_WINDOW_OPTIONS = WindowOptionsSchema()
_WINDOW_WEATHER = WindowWeatherSchema()
_WINDOW_CLOUD_WIRES = (("cloud_modification_factor", "cloud_factor"), ("cloud_cover_fraction", "cloud_cover"),
                       ("cloud_cover_oktas", "cloud_oktas"))


def _cloud_input_names(columns: Mapping[str, np.ndarray], n: int) -> np.ndarray:
    """(n,) the wire name of the cloud input each record gives, ``clear_sky`` for none."""
    out = np.full(n, "clear_sky", dtype=object)
    for column, wire in _WINDOW_CLOUD_WIRES:
        if column in columns:
            out[~np.isnan(columns[column])] = wire
    return out


def _weather_steps(options: Mapping[str, Any], schema, ids, places: Mapping[str, np.ndarray]):
    """The records' weather series (``None`` when the request has no ``weather`` table)."""
    if options.get("weather") is None:
        return None
    return read_weather(options["weather"], schema, ids, places,
                        current_app.config["UVDOSE_MAX_WEATHER_READINGS"], options.get("weather_time_stamps"))


def _cmf_columns(columns: Mapping[str, np.ndarray], ids) -> np.ndarray:
    with records_named(by_schema(_WINDOW_RECORDS, ids), len(ids)):
        return clouds.resolve_cmf(columns.get("cloud_modification_factor"),
                                  columns.get("cloud_cover_fraction"),
                                  columns.get("cloud_cover_oktas"))


@blueprint.post(WINDOWS_ROUTE)
@produces(*ANSWER_MEDIA_TYPES)
def windows() -> Response:
    batch, options, layout = _read_records(_WINDOW_RECORDS, _WINDOW_OPTIONS)
    cols = dict(batch.columns)
    start, end = cols.pop("time_unix_s"), cols.pop("end_unix_s")
    length = end - start
    bad = (length < 0) | (length > MAX_WINDOW_S)
    if bad.any():
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.",
                      [FieldError(field="end", reason="must not precede start and the window may last "
                                  "at most 31 days", index=int(i),
                                  id=_record_id(batch.ids, i))
                       for i in np.flatnonzero(bad)])
    source = clouds.cloud_source(cols.get("cloud_modification_factor"), cols.get("cloud_cover_fraction"),
                                 cols.get("cloud_cover_oktas"))
    outside = _cloud_input_names(cols, len(batch))
    cols["cloud_modification_factor"] = np.broadcast_to(_cmf_columns(cols, batch.ids), start.shape).copy()
    cols["cloud_source"] = np.broadcast_to(source, start.shape).copy()
    cols.pop("cloud_cover_fraction", None), cols.pop("cloud_cover_oktas", None)
    steps = _weather_steps(options, _WINDOW_WEATHER, batch.ids, cols)
    spectra = list(options.get("spectra") or DEFAULT_WINDOW_SPECTRA)
    step_s = float(options.get("step_s") or dose.DEFAULT_WINDOW_STEP_S)
    transmittance, label = _transmittance(options)
    work = dose.trapezoid_node_counts(start, end, step_s) * len(spectra)
    media_type, parts = _bounded("windows", work, batch.ids, len(batch), len(spectra), _id_bytes(batch.ids))
    if inputs_only():  # every check done, nothing computed
        return Response(status=204)
    evaluate = engine_gateway.current(options.get("ozone_climatology")).dose_evaluator(spectra, transmittance, label, "windows")
    name = by_schema(_WINDOW_RECORDS, batch.ids)

    def chunk(part: slice) -> Chunk:
        part_steps = _steps_part(steps, part)
        part_cols = {key: values[part] for key, values in cols.items()}
        with records_named(_shifted(name, part.start), len(batch)):
            out = dose.window_doses(part_cols, start[part], end[part], evaluate, step_s=step_s, spectra=spectra,
                                    cloud_steps=part_steps)
        share = _window_share(part_steps, out, length[part])
        doses = out["dose_j_m2"]
        n = part.stop - part.start
        columns: dict[str, list] = {
            "id": batch.ids[part].tolist(), "start": iso_utc(start[part]), "end": iso_utc(end[part]),
            "dose_j_m2": rows_from_columns({k: np.asarray(v).tolist() for k, v in doses.items()}),
            "peak_uv_index": np.asarray(out["peak_uv_index"]).tolist(),
            "cloud_factor": [None if np.isnan(x) else x for x in part_cols["cloud_modification_factor"].tolist()],
            "uncertainty": _uncertainty_objects(out["relative_sigma"], n,
                                                source_used(part_steps, share, part_cols["cloud_source"]).tolist()),
            "clouds": provenance(np.full(n, "", dtype=object) if part_steps is None else part_steps.kind, share,
                                 outside[part]),
        }
        columns.update(_exposure_rows(doses, out["final_rate_w_m2"]))
        if "icnirp_limit_fraction" in columns:
            columns["limit_period_exceeded"] = _longer_than_limit_period(length[part])
        return Chunk(columns, out["samples"])

    answer = DoseAnswer(envelope=lambda first: _common(spectra, step_s, label, cautions.DOSE_CAUTION, [first.columns]),
                        chunks=map(chunk, parts), layout=layout, on_complete=_count(WINDOWS_ROUTE, len(batch)))
    return dose_answers.respond(answer, media_type)


def _window_share(steps, out: Mapping[str, Any], length_s: np.ndarray) -> np.ndarray:
    """(K,) the share of each window covered by weather-series readings."""
    if steps is None:
        return np.zeros(length_s.size)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.where(length_s > 0, out["series_covered_s"] / np.where(length_s > 0, length_s, 1.0), 0.0)
    return np.minimum(share, 1.0)


# -- fields ---------------------------------------------------------------------------

class FieldRecordSchema(ConditionsRecordSchema):
    """A field: where it is and its ground; time, ozone and clouds come per day."""

    class Meta:
        exclude = ("time_unix_s", "ozone_du", "cloud_modification_factor")


class DailyEntrySchema(RecordSchema):
    """One entry of the ``daily`` table: one field's ozone and clouds on one day."""

    error_messages = {"unknown": "is not a column of the daily table"}

    field_index = WholeNumber(data_key="field", required=True,
                              validate=validate.Range(min=0, error="must be a record index, 0 or more"))
    day_unix_s = IsoDate(data_key="day", required=True,
                         validate=time_span("must be a date from 1950-01-01 to 2100-12-31"))
    ozone_du = OZONE_COLUMN
    cloud_modification_factor = CLOUD_FACTOR
    cloud_cover_oktas = CLOUD_OKTAS

    exclusive_fields = (("cloud_modification_factor", "cloud_cover_oktas"),)


class FieldOptionsSchema(DoseOptionsSchema):
    first_day = fields.Date(required=True, error_messages={"invalid": "must be a date YYYY-MM-DD"})
    last_day = fields.Date(required=True, error_messages={"invalid": "must be a date YYYY-MM-DD"})
    daily = fields.Raw(error_messages={"null": "must not be null"})  # read as DailyEntrySchema records
    weather = fields.Raw(error_messages={"null": "must not be null"})  # read as FieldWeatherSchema records
    weather_time_stamps = TIME_STAMPS_OPTION


_FIELD_RECORDS = FieldRecordSchema()
_FIELD_OPTIONS = FieldOptionsSchema()
_DAILY_ENTRIES = DailyEntrySchema()
_FIELD_WEATHER = FieldWeatherSchema()
_DAILY_CLOUD_WIRES = {"factor": "cloud_factor", "cover": "cloud_oktas", "none": "clear_sky"}
"""The wire name of the daily table's cloud input of each cloud source kind."""


def _daily_table(daily: Any, n_fields: int, n_days: int):
    """The ``daily`` table's entries as validated columns (entries named ``daily.<column>[i]``)."""
    most = n_fields * n_days
    if isinstance(daily, dict) and any(isinstance(v, list) and len(v) > most for v in daily.values()):
        raise _options_problem("daily", f"has more entries than fields × days ({most}); give each field "
                                        "and day at most once")
    try:
        raw, n = given_columns(daily, _DAILY_ENTRIES, most, name="daily", allow_empty=True)
    except Problem as problem:
        if problem.status != 422:
            raise
        raise invalid_records(problem.errors, 0) from None
    entries, errors = check_columns(raw, _DAILY_ENTRIES, n=n)
    return entries, FieldErrors([FieldError(field=f"daily.{error.field}" + (f"[{error.index}]" if error.index is not None else ""),
                                            reason=error.reason) for error in errors], unlisted_errors(errors))


def _daily_entry_names(error: RecordError) -> FieldError:
    """A models error about entry i of the daily table, named as its other errors are."""
    return FieldError(field=f"daily.{by_schema(_DAILY_ENTRIES)(error).field}[{error.index}]",
                      reason=error.reason)


def _daily_inputs(daily: Any, n_fields: int, first: np.datetime64, n_days: int):
    """(ozone (F, D), CMF (F, D), cloud source (F, D)) from the optional daily table."""
    ozone = np.full((n_fields, n_days), np.nan)
    cmf = np.full((n_fields, n_days), np.nan)
    source = np.full((n_fields, n_days), "none", dtype=object)
    if daily is None:
        return ozone, cmf, source
    entries, errors = _daily_table(daily, n_fields, n_days)
    if errors:
        raise invalid_records(errors, 0)
    n = len(entries)
    if not n:
        return ozone, cmf, source
    columns = entries.columns
    # Compared as floats first: an index past the int64 range must be an error, not wrap.
    beyond = columns["field_index"] >= n_fields
    field_index = np.where(beyond, 0, columns["field_index"]).astype(np.int64)
    day_index = (columns["day_unix_s"] // _SECONDS_PER_DAY).astype(np.int64) - first.astype(np.int64)
    outside = (day_index < 0) | (day_index >= n_days)
    key = field_index * n_days + day_index
    order = np.argsort(key, kind="stable")
    repeated = np.zeros(n, bool)
    repeated[order[1:]] = key[order][1:] == key[order][:-1]
    repeated &= ~beyond & ~outside
    found = [(beyond, "field", f"must be a record index 0–{n_fields - 1}"),
             (outside, "day", "must lie between first_day and last_day"),
             (repeated, "day", "repeats a field and day given before")]
    listed = current_app.config["UVDOSE_MAX_ERRORS_LISTED"]
    errors = [FieldError(field=f"daily.{column}[{i}]", reason=reason)
              for mask, column, reason in found for i in np.flatnonzero(mask)[:listed]]
    if errors:
        raise invalid_records(errors, 0, error_count=sum(int(np.count_nonzero(mask)) for mask, _, _ in found))

    def column(name):
        return columns.get(name, np.full(n, np.nan))

    with records_named(_daily_entry_names, n, "entry"):
        day_cmf = clouds.resolve_cmf(column("cloud_modification_factor"), None, column("cloud_cover_oktas"))
    ozone[field_index, day_index] = column("ozone_du")
    cmf[field_index, day_index] = np.broadcast_to(day_cmf, (n,))
    source[field_index, day_index] = clouds.cloud_source(column("cloud_modification_factor"), None,
                                                         column("cloud_cover_oktas"))
    return ozone, cmf, source


_SUN_STATES = np.array(["polar_night", "ordinary", "midnight_sun"])


def _field_work(n_fields: int, n_days: int, daily, step_s, grids: bool, n_spectra: int) -> np.ndarray:
    """(F,) samples × spectra of each field's season: its days' nodes (Gauss–Legendre, or
    at most a whole day's trapezoid nodes), again for the days whose clear-sky reference
    is evaluated anew (operator grids in use, or where the ``daily`` (ozone, CMF) arrays
    (F, D) give ozone or a cloud factor 0; ``daily`` ``None``: no daily table)."""
    per_day = dose.DEFAULT_GAUSS_NODES if step_s is None else int(_SECONDS_PER_DAY // float(step_s)) + 3
    if grids:
        again = np.full(n_fields, n_days)
    elif daily is None:
        again = np.zeros(n_fields, np.int64)
    else:
        ozone, cmf = daily
        again = (~np.isnan(ozone) | (cmf == 0.0)).sum(axis=1)
    return (n_days + again) * per_day * n_spectra


def _field_day_columns(season, ids: list, dates: list[str], steps, cloud_source: np.ndarray) -> dict[str, list]:
    """One entry per field and day (fields first), ``id`` first, then the day's members."""
    n_fields, n_days = season.sun_state.shape
    share = np.zeros((n_fields, n_days)) if steps is None else season.series_share_of_daylight
    sources = source_used(steps, share, cloud_source).ravel().tolist()
    outside = np.vectorize(_DAILY_CLOUD_WIRES.get, otypes=[object])(cloud_source)
    day_clouds = provenance(np.full((n_fields, 1), "", dtype=object) if steps is None else steps.kind[:, None],
                            share, outside)
    cells = [(f, d) for f in range(n_fields) for d in range(n_days)]
    return {
        "id": np.repeat(np.asarray(ids, dtype=object), n_days).tolist(), "day": dates * n_fields,
        "sunrise": iso_utc(season.sunrise_unix_s.ravel()), "sunset": iso_utc(season.sunset_unix_s.ravel()),
        "sun": _SUN_STATES[season.sun_state.ravel() + 1].tolist(),
        "dose_j_m2": rows_from_columns({k: v.ravel().tolist() for k, v in season.daily_dose_j_m2.items()}),
        "season_total_j_m2": rows_from_columns({k: v.ravel().tolist() for k, v in season.season_dose_j_m2.items()}),
        "ratio_to_clear_sky": rows_from_columns({k: np.where(np.isnan(v), None, v).ravel().tolist()
                                                 for k, v in season.ratio_to_clear_sky.items()}),
        "peak_uv_index": season.peak_uv_index.ravel().tolist(),
        "clouds": [entry for row in day_clouds for entry in row],
        "uncertainty": [uncertainty_fields.dose_object(season.daily_relative_sigma, cell, source)
                        for cell, source in zip(cells, sources)],
        "season_total_uncertainty": [uncertainty_fields.dose_object(season.season_relative_sigma, cell)
                                     for cell in cells],
    }


@blueprint.post(FIELDS_ROUTE)
@produces(*ANSWER_MEDIA_TYPES)
def field_doses() -> Response:
    batch, options, layout = _read_records(_FIELD_RECORDS, _FIELD_OPTIONS)
    first = np.datetime64(options["first_day"].isoformat(), "D")
    last = np.datetime64(options["last_day"].isoformat(), "D")
    n_days = int((last - first).astype(np.int64)) + 1
    if not 1 <= n_days <= MAX_SEASON_DAYS:
        raise _options_problem("last_day", f"must be on or after first_day and at most {MAX_SEASON_DAYS} days later")
    if first < np.datetime64("1950-01-01") or last >= np.datetime64("2101-01-01"):
        raise _options_problem("first_day", "the season must lie within 1950–2100")
    days = (first + np.arange(n_days)).astype("datetime64[s]").astype(np.int64).astype(float)
    spectra = list(options.get("spectra") or DEFAULT_FIELD_SPECTRA)
    # Gauss–Legendre over each daylight period unless the client asks for a step.
    step_s = options.get("step_s")
    quadrature = (dict(day_quadrature="trapezoid", step_s=float(step_s)) if step_s is not None
                  else dict(day_quadrature="gauss_legendre"))
    gateway = engine_gateway.current(options.get("ozone_climatology"))
    transmittance, label = _transmittance(options)

    def bounded(daily) -> tuple[str, list]:
        work = _field_work(len(batch), n_days, daily, step_s, bool(gateway.ozone_grids()), len(spectra))
        return _bounded("fields", work, batch.ids, len(batch) * n_days, len(spectra),
                        _id_bytes(batch.ids) * n_days, rows_per_record=n_days)

    # Without a daily table the work is known before the (fields × days) inputs are built.
    bound = bounded(None) if options.get("daily") is None else None
    ozone, cmf, cloud_source = _daily_inputs(options.get("daily"), len(batch), first, n_days)
    media_type, parts = bound or bounded((ozone, cmf))
    steps = _weather_steps(options, _FIELD_WEATHER, batch.ids, batch.columns)
    if inputs_only():  # every check done, nothing computed
        return Response(status=204)
    evaluate = gateway.dose_evaluator(spectra, transmittance, label, "fields")
    dates = [str(d) for d in first + np.arange(n_days)]

    def chunk(part: slice) -> Chunk:
        # Every input was validated above: an error from here on is the service's, not the client's.
        part_steps = _steps_part(steps, part)
        season = dose.field_season({key: values[part] for key, values in batch.columns.items()}, days, evaluate,
                                   ozone_du=ozone[part], cloud_modification_factor=cmf[part],
                                   cloud_source=cloud_source[part], spectra=spectra,
                                   reference_ozone=gateway.reference_ozone, cloud_steps=part_steps, **quadrature)
        return Chunk(_field_day_columns(season, batch.ids[part].tolist(), dates, part_steps, cloud_source[part]),
                     season.samples)

    def envelope(_first: Chunk) -> dict[str, Any]:
        body = _common(spectra, step_s, label, cautions.FIELD_CAUTION, [])
        body.update(first_day=dates[0], last_day=dates[-1],
                    quadrature=(f"trapezoid:{step_s:g}s" if step_s is not None
                                else f"gauss_legendre:{dose.DEFAULT_GAUSS_NODES}"))
        return body

    answer = DoseAnswer(envelope=envelope, chunks=map(chunk, parts), layout=layout, rows_per_result=n_days,
                        on_complete=_count(FIELDS_ROUTE, len(batch)))
    return dose_answers.respond(answer, media_type)


# -- routes ---------------------------------------------------------------------------

class RouteOptionsSchema(DoseOptionsSchema):
    driver_side = Text(validate=validate.OneOf(["left", "right"], error="must be 'left' or 'right'"))
    roof_cutoff_elevation_deg = StrictNumber(validate=between(0, 90))
    cab_sky_view_factor = StrictNumber(validate=between(0, 1))
    parked_dose = StrictBoolean(load_default=False)
    routes = fields.Raw(required=True)  # read as RouteConditionsSchema and RoutePointSchema records


class RoutePointSchema(RecordSchema):
    """One timestamped fix of a route (a ``points`` entry, or one GeoJSON coordinate with its time)."""

    error_messages = {"unknown": "is not a field of a route point"}

    time_unix_s = offset_time()
    latitude_deg = LATITUDE
    longitude_deg = LONGITUDE
    stop = StrictBoolean(load_default=False, allow_none=True)  # null: not given, as for every field
    gap = StrictBoolean(load_default=False, allow_none=True)


class RouteConditionsSchema(RecordSchema):
    """What a route gives besides its points: its id and the conditions along it."""

    error_messages = {"unknown": "is not a field of a route"}

    id = RECORD_ID
    ozone_du = OZONE_COLUMN
    cloud_modification_factor = CLOUD_FACTOR
    surface_albedo = SURFACE_ALBEDO
    aod_550 = AOD_550
    elevation_m = ELEVATION


_ROUTE_OPTIONS = RouteOptionsSchema()
_ROUTE_POINTS = RoutePointSchema()
_ROUTE_CONDITIONS = RouteConditionsSchema()
_CONDITION_WIRES = frozenset(field.data_key or name for name, field in _ROUTE_CONDITIONS.fields.items())
_FEATURE_POINT_PATHS = {"time": "properties.times[{p}]", "lat": "geometry.coordinates[{p}][1]",
                        "lon": "geometry.coordinates[{p}][0]", "stop": "properties.stops[{p}]",
                        "gap": "properties.gaps[{p}]"}


@dataclass
class _RouteBatch:
    """The routes of one request, flattened: one route-level record per route, one point
    record per fix, and what maps a point back to its route and its place in the body."""

    conditions: list[dict]
    points: list[Any]
    point_route: list[int]
    point_start: list[int]
    is_feature: list[bool]
    errors: list[FieldError]

    def error(self, route: int, where: str, reason: str, route_body: Any) -> None:
        route_id = route_body.get("id") if isinstance(route_body, dict) else None
        self.errors.append(FieldError(field=f"routes[{route}]{where}", reason=reason, index=route,
                                      id=route_id if isinstance(route_id, str) else None))

    def point_path(self, point: int, wire: str | None) -> str:
        route = self.point_route[point]
        p = point - self.point_start[route]
        if self.is_feature[route]:
            return f"routes[{route}]." + (_FEATURE_POINT_PATHS[wire].format(p=p) if wire else f"geometry.coordinates[{p}]")
        return f"routes[{route}].points[{p}]" + (f".{wire}" if wire else "")


def _feature_points(index: int, feature: dict, into: _RouteBatch) -> tuple[list, dict] | None:
    """A GeoJSON Feature as point records and its route-level record (None if malformed)."""
    props = feature.get("properties") or {}
    geometry = feature.get("geometry") or {}
    if not isinstance(props, dict) or not isinstance(geometry, dict):
        into.error(index, "", "must be a GeoJSON Feature with object `geometry` and `properties`", feature)
        return None
    if geometry.get("type") not in ("LineString", "MultiPoint"):
        into.error(index, ".geometry.type", "must be LineString or MultiPoint", feature)
        return None
    coordinates, times = geometry.get("coordinates"), props.get("times")
    if not isinstance(coordinates, list):
        into.error(index, ".geometry.coordinates", "must be an array of [longitude, latitude] positions", feature)
        return None
    if not isinstance(times, list) or len(times) != len(coordinates):
        into.error(index, ".properties.times", "must be an array with one time per coordinate", feature)
        return None
    flags = {}
    for name, member in (("stop", "stops"), ("gap", "gaps")):
        values = props.get(member, [None] * len(times))
        if not isinstance(values, list) or len(values) != len(times):
            into.error(index, f".properties.{member}", "must be an array with one boolean per coordinate", feature)
            return None
        flags[name] = values
    bad = [p for p, position in enumerate(coordinates) if not isinstance(position, list) or len(position) < 2]
    for p in bad[:100]:
        into.error(index, f".geometry.coordinates[{p}]", "must be a [longitude, latitude] position", feature)
    if bad:
        return None
    points = [{"time": t, "lon": position[0], "lat": position[1], "stop": s, "gap": g}
              for t, position, s, g in zip(times, coordinates, flags["stop"], flags["gap"])]
    conditions = {name: props[name] for name in _CONDITION_WIRES & props.keys()}
    conditions["id"] = feature.get("id", props.get("id"))
    return points, conditions


def _flatten_routes(raw_routes: list) -> _RouteBatch:
    """Every route's points as one list of point records, and one route-level record per route."""
    flat = _RouteBatch([], [], [], [], [], [])
    for index, route in enumerate(raw_routes):
        flat.point_start.append(len(flat.points))
        flat.is_feature.append(isinstance(route, dict) and route.get("type") == "Feature")
        if not isinstance(route, dict):
            flat.error(index, "", "must be an object", route)
            parsed = None
        elif flat.is_feature[-1]:
            parsed = _feature_points(index, route, flat)
        elif not isinstance(route.get("points"), list):
            flat.error(index, ".points", "must be an array of {time, lat, lon} objects", route)
            parsed = None
        else:
            parsed = route["points"], {key: value for key, value in route.items() if key != "points"}
        if parsed is not None and len(parsed[0]) < 2:
            where = ".geometry.coordinates" if flat.is_feature[-1] else ".points"
            flat.error(index, where, "needs at least two points", route)
        points, conditions = parsed or ([], {})
        flat.conditions.append(conditions)
        flat.points.extend(points)
        flat.point_route.extend([index] * len(points))
    return flat


def _route_count(raw_routes: list) -> int:
    """Points sent, all routes together (counted before any is read)."""
    def size(route):
        if not isinstance(route, dict):
            return 0
        points = route.get("points")
        if route.get("type") == "Feature":
            geometry = route.get("geometry")
            points = geometry.get("coordinates") if isinstance(geometry, dict) else None
        return len(points) if isinstance(points, list) else 0

    return sum(map(size, raw_routes))


def _overlong_routes(flat: _RouteBatch, time_unix_s: np.ndarray, ids: np.ndarray) -> list[FieldError]:
    """An error for each route whose points span more than :data:`MAX_ROUTE_SPAN_S`,
    naming its last point's time (times not readable are left to their own errors)."""
    route = np.asarray(flat.point_route, dtype=np.int64)
    first = np.full(len(flat.point_start), np.inf)
    last = np.full(len(flat.point_start), -np.inf)
    readable = ~np.isnan(time_unix_s)
    np.minimum.at(first, route[readable], time_unix_s[readable])
    np.maximum.at(last, route[readable], time_unix_s[readable])
    ends = np.r_[flat.point_start[1:], len(route)] - 1
    return [FieldError(field=flat.point_path(int(ends[r]), "time"),
                       reason=f"the route may span at most {MAX_ROUTE_SPAN_S / 86400:g} days from its first "
                              f"point to its last; it spans {(last[r] - first[r]) / 86400:.1f} days",
                       index=int(r), id=_record_id(ids, r))
            for r in np.flatnonzero(last - first > MAX_ROUTE_SPAN_S)]


def _read_routes(raw_routes: list) -> tuple[vehicle_routes.RoutePoints, dict[str, np.ndarray], np.ndarray,
                                             NameRecordError]:
    """(points of every route, per-route conditions (R,), route ids, the namer of models
    errors about them) of valid routes; else a 422 problem naming every bad value by route,
    point and field."""
    n_routes = len(raw_routes)
    flat = _flatten_routes(raw_routes)
    raw, _, unknown = row_columns(flat.conditions, _ROUTE_CONDITIONS, n_routes)
    route_batch, route_errors = check_columns(raw, _ROUTE_CONDITIONS, n=n_routes, unknown=unknown)
    ids = route_batch.ids
    errors = flat.errors
    for error in route_errors:
        where = "properties." if flat.is_feature[error.index] and error.field != "id" else ""
        errors.append(FieldError(field=f"routes[{error.index}].{where}{error.field}", reason=error.reason,
                                 index=error.index, id=_record_id(ids, error.index)))
    if flat.points:
        raw, n, unknown = row_columns(flat.points, _ROUTE_POINTS, len(flat.points))
        point_batch, point_errors = check_columns(raw, _ROUTE_POINTS, n=n, unknown=unknown)
        for error in point_errors:
            route = flat.point_route[error.index]
            wire = None if error.field == "records" else error.field
            errors.append(FieldError(field=flat.point_path(error.index, wire), reason=error.reason,
                                     index=route, id=_record_id(ids, route)))
        columns = point_batch.columns
        # No time column at all when no point is an object with a time (each is named above).
        errors += _overlong_routes(flat, columns.get("time_unix_s", np.full(len(flat.points), np.nan)), ids)
    else:
        columns = {name: np.zeros(0) for name in ("time_unix_s", "latitude_deg", "longitude_deg")}
        columns.update(stop=np.zeros(0, bool), gap=np.zeros(0, bool))
        point_errors = []
    if errors or unlisted_errors(point_errors):
        errors.sort(key=lambda error: error.index)
        # Bad points beyond those described are counted, by route (service.column_checks).
        point_routes = np.asarray(flat.point_route, dtype=np.int64)[list(getattr(point_errors, "unlisted_indices", ()))]
        raise invalid_records(FieldErrors(errors, unlisted_errors(route_errors) + unlisted_errors(point_errors),
                                          [*getattr(route_errors, "unlisted_indices", ()), *point_routes.tolist()]),
                              n_routes, "route")
    points = vehicle_routes.RoutePoints(route=np.asarray(flat.point_route, dtype=np.int64),
                                time_unix_s=columns["time_unix_s"], latitude_deg=columns["latitude_deg"],
                                longitude_deg=columns["longitude_deg"], stop=columns["stop"], gap=columns["gap"])
    per_route = {name: route_batch.columns.get(name, np.full(n_routes, np.nan))
                 for name in _ROUTE_CONDITIONS.fields if name != "id"}
    point_wire = {name: declared.data_key or name for name, declared in _ROUTE_POINTS.fields.items()}

    def name_route_error(error: RecordError) -> FieldError:
        """A models error about route ``index`` (and its point ``point``), named by its path
        in the request body."""
        if error.point is None:
            field = f"routes[{error.index}]"
        else:
            field = flat.point_path(flat.point_start[error.index] + error.point, point_wire.get(error.field))
        return FieldError(field=field, reason=error.reason, index=error.index, id=_record_id(ids, error.index))

    return points, per_route, ids, name_route_error


def _route_part(points: vehicle_routes.RoutePoints, point_start: np.ndarray, part: slice) -> vehicle_routes.RoutePoints:
    """The points of the routes in ``part``, their routes numbered from 0."""
    a, b = int(point_start[part.start]), int(point_start[part.stop])
    return vehicle_routes.RoutePoints(route=points.route[a:b] - part.start, time_unix_s=points.time_unix_s[a:b],
                                      latitude_deg=points.latitude_deg[a:b], longitude_deg=points.longitude_deg[a:b],
                                      stop=points.stop[a:b], gap=points.gap[a:b])


@blueprint.post(ROUTES_ROUTE)
@produces(*ANSWER_MEDIA_TYPES)
def route_doses() -> Response:
    negotiate(request)
    body = read_json_object(read_body(request), request.mimetype, "a `routes` array")
    options, option_errors = load_options(_ROUTE_OPTIONS, body)
    if option_errors:
        raise invalid_records(option_errors, 0)
    raw_routes = options["routes"]
    max_routes = current_app.config["UVDOSE_MAX_RECORDS"]
    if not isinstance(raw_routes, list) or not raw_routes:
        raise _options_problem("routes", f"must be a non-empty array of at most {max_routes} routes")
    if len(raw_routes) > max_routes:
        raise too_many(len(raw_routes), max_routes, "routes")
    max_points = current_app.config["UVDOSE_MAX_ROUTE_POINTS"]
    sent = _route_count(raw_routes)
    if sent > max_points:
        raise too_many(sent, max_points, "route points", "UVDOSE_MAX_ROUTE_POINTS")
    points, per_route, ids, name_route_error = _read_routes(raw_routes)
    n_routes = len(raw_routes)
    with records_named(name_route_error, n_routes, "route"):
        vehicle_routes.check_routes(points)
    spectra = list(options.get("spectra") or DEFAULT_ROUTE_SPECTRA)
    step_s = float(options.get("step_s") or vehicle_routes.DEFAULT_ROUTE_STEP_S)
    transmittance, label = _transmittance(options, default=DEFAULT_ROUTE_GLAZING)
    side = options.get("driver_side") or "left"
    cutoff = float(options.get("roof_cutoff_elevation_deg", vehicle_routes.DEFAULT_ROOF_CUTOFF_ELEVATION_DEG))
    sky_view = float(options.get("cab_sky_view_factor", vehicle_routes.DEFAULT_CAB_SKY_VIEW_FACTOR))
    work = vehicle_routes.route_sample_bound(points, step_s) * len(spectra) * (2 if options["parked_dose"] else 1)
    media_type, parts = _bounded("routes", work, ids, n_routes, len(spectra), _id_bytes(ids))
    gateway = engine_gateway.current(options.get("ozone_climatology"))
    evaluate = gateway.dose_evaluator(spectra, transmittance, label, "routes")
    open_sky = gateway.dose_evaluator(spectra, None, "none", "routes-parked") if options["parked_dose"] else None
    point_start = np.searchsorted(points.route, np.arange(n_routes + 1))

    def chunk(part: slice) -> Chunk:
        sub = _route_part(points, point_start, part)
        sub_routes = {key: values[part] for key, values in per_route.items()}
        with records_named(_shifted(name_route_error, part.start), n_routes, "route"):
            out = vehicle_routes.route_doses(sub, evaluate, per_route=sub_routes, driver_side=side,
                                             step_s=step_s, roof_cutoff_elevation_deg=cutoff,
                                             sky_view_factor=sky_view, spectra=spectra)
        n = part.stop - part.start
        columns: dict[str, list] = {
            "id": ids[part].tolist(),
            "driving_s": out.driving_s.tolist(), "parked_s": out.parked_s.tolist(), "gap_s": out.gap_s.tolist(),
            "dose_j_m2": rows_from_columns({k: v.tolist() for k, v in out.dose_j_m2.items()}),
            "peak_uv_index": out.peak_uv_index.tolist(),
            "uncertainty": _uncertainty_objects(out.relative_sigma, n),
        }
        columns.update(_exposure_rows(out.dose_j_m2, out.final_rate_w_m2))
        if "icnirp_limit_fraction" in columns:
            first_fix = np.full(n, np.inf)
            last_fix = np.full(n, -np.inf)
            np.minimum.at(first_fix, sub.route, sub.time_unix_s)
            np.maximum.at(last_fix, sub.route, sub.time_unix_s)
            columns["limit_period_exceeded"] = _longer_than_limit_period(last_fix - first_fix)
        columns["parked_time_excluded"] = (out.parked_s > 0).tolist()
        if open_sky is not None:
            parked = vehicle_routes.parked_doses(sub, open_sky, per_route=sub_routes, step_s=step_s, spectra=spectra)
            columns["parked_dose_j_m2"] = rows_from_columns({k: v.tolist() for k, v in parked.items()})
        return Chunk(columns, out.samples)

    def envelope(first: Chunk) -> dict[str, Any]:
        response = _common(spectra, step_s, label, cautions.ROUTE_CAUTION, [first.columns])
        response.update(driver_side=side, roof_cutoff_elevation_deg=cutoff, cab_sky_view_factor=sky_view)
        return response

    answer = DoseAnswer(envelope=envelope, chunks=map(chunk, parts), layout=options.get("answer_layout") or "records",
                        on_complete=_count(ROUTES_ROUTE, n_routes))
    return dose_answers.respond(answer, media_type)
