"""Pictures: ``GET /v1/pictures/uv-index-day`` and ``GET /v1/pictures/field-season``.

Each picture is one place (or field) given in the query string, so it can be linked and
embedded (``<img src=...>``) as it is. The query is read as one record of the same record
schemas the batch endpoints use (same fields, ranges and messages; errors name the query
parameter), and computed through the same gateway and engine:

* ``uv-index-day``: the records of :mod:`service.irradiance_batch` at every ``step_min``
  minutes of one local day, so each plotted UV Index is what ``POST /v1/irradiance``
  answers for that place and time;
* ``field-season``: ``models.dose.field_season`` for one field with the evaluator of
  ``POST /v1/doses/fields``, so each plotted day is that endpoint's answer for the same
  field, season, spectrum and glazing.

Answers are SVG (:mod:`service.svg_charts`) unless the client asks for
``application/json``, which gives the plotted values themselves.
"""
from __future__ import annotations

import math
import re
from typing import Any, Mapping

import numpy as np
from flask import Blueprint, Response, request
from marshmallow import validate

from uvdose.models import MODEL_VERSION, dose, filters
from uvdose.models.action_spectra import ACTION_SPECTRA
from uvdose.models.spectral_grid import WAVELENGTH_NM
from uvdose.service import cautions, engine_gateway, irradiance_batch, metrics, svg_charts
from uvdose.service.column_checks import check_columns, column_rules
from uvdose.service.problems import FieldError, Problem, invalid_records
from uvdose.service.record_fields import (
    EARLIEST_TIME,
    TIME_BEFORE,
    ConditionsRecordSchema,
    IsoDate,
    OneOfRegistry,
    OptionsSchema,
    Text,
    time_span,
)
from uvdose.service.time_text import iso_utc
from uvdose.service.negotiation import JSON_MEDIA_TYPE, chosen_media_type, produces
from uvdose.service.wire_formats import json_response, load_options

blueprint = Blueprint("pictures", __name__)

UV_DAY_ROUTE = "/v1/pictures/uv-index-day"
SEASON_ROUTE = "/v1/pictures/field-season"
SVG_MEDIA_TYPE = "image/svg+xml"

STEP_MINUTES = ("5", "10", "15", "20", "30", "60")
MAX_SEASON_DAYS = 366
_UTC_OFFSET = re.compile(r"^[+-](0\d|1[0-4]):[0-5]\d$")
_DAY_S = 86400.0
_AEROSOL_TYPE = ("angstrom_exponent", "single_scattering_albedo", "asymmetry_factor")
_MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")


class UvDayPlaceSchema(ConditionsRecordSchema):
    """The place of a day's UV curve: the conditions fields of an irradiance record but
    ``time`` (the picture's own samples) and the aerosol type (Ångström exponent,
    single-scattering albedo, asymmetry), which would send every sample to the full solve."""

    class Meta:
        exclude = ("time_unix_s",) + _AEROSOL_TYPE


class UvDayOptionsSchema(OptionsSchema):
    date = IsoDate(required=True, validate=time_span("must be a date from 1950-01-01 to 2100-12-31"))
    utc_offset = Text(load_default="+00:00",
                      validate=validate.Regexp(_UTC_OFFSET, error="must be an offset ±hh:mm from -14:00 to +14:00"))
    step_min = Text(load_default="10", validate=validate.OneOf(STEP_MINUTES, error="must be one of {choices}"))


class SeasonFieldSchema(ConditionsRecordSchema):
    """A field of the season picture: the fields of a ``POST /v1/doses/fields`` record but the
    aerosol type."""

    class Meta:
        exclude = ("time_unix_s", "ozone_du", "cloud_modification_factor") + _AEROSOL_TYPE


class SeasonOptionsSchema(OptionsSchema):
    first_day = IsoDate(required=True, validate=time_span("must be a date from 1950-01-01 to 2100-12-31"))
    last_day = IsoDate(required=True, validate=time_span("must be a date from 1950-01-01 to 2100-12-31"))
    spectrum = Text(load_default="plant_damage", validate=OneOfRegistry(lambda: ACTION_SPECTRA.keys(), "action spectrum"))
    glazing = Text(validate=OneOfRegistry(lambda: filters.FILTERS.keys(), "glazing"))


_UV_PLACE, _UV_OPTIONS = UvDayPlaceSchema(), UvDayOptionsSchema()
_SEASON_FIELD, _SEASON_OPTIONS = SeasonFieldSchema(), SeasonOptionsSchema()


def _query_value(text: str, kind: str) -> Any:
    """A query text as the JSON value a body would hold: numbers for number fields (the
    text itself where it is not one, so the check words the error), text otherwise."""
    if kind in ("number", "whole") and text.strip():
        try:
            value = float(text)
        except ValueError:
            return text
        return value if math.isfinite(value) else text
    return text


def _read_query(place_schema, options_schema) -> tuple[str, dict[str, np.ndarray], Any, dict[str, Any]]:
    """(the negotiated media type, validated place columns (1,), its id, options) from the
    query string; a 422 problem naming each bad or unknown parameter otherwise."""
    # An empty parameter is not given (as an HTML form sends the fields left blank).
    query: Mapping[str, str] = {name: value for name, value in request.args.items() if value != ""}
    kinds = {rule.wire: rule.kind for rule in column_rules(place_schema)}
    option_names = {field.data_key or name for name, field in options_schema.fields.items()}
    errors = [FieldError(field=name, reason="is not a parameter of this picture")
              for name in query if name not in kinds and name not in option_names]
    raw = {name: [_query_value(query[name], kind)] for name, kind in kinds.items() if name in query}
    batch, record_errors = check_columns(raw, place_schema, n=1)
    errors += [FieldError(field=error.field, reason=error.reason) for error in record_errors]
    options, option_errors = load_options(options_schema, {name: query[name] for name in option_names if name in query})
    errors += option_errors
    if errors:
        raise invalid_records(errors, 0)
    return chosen_media_type(), batch.columns, batch.ids[0], options


def _offset_seconds(text: str) -> float:
    sign = -1.0 if text.startswith("-") else 1.0
    hours, minutes = text[1:].split(":")
    return sign * (int(hours) * 3600.0 + int(minutes) * 60.0)


def _options_problem(field: str, reason: str) -> Problem:
    return invalid_records([FieldError(field=field, reason=reason)], 0)


def _label(record_id: Any, columns: Mapping[str, np.ndarray]) -> str:
    if isinstance(record_id, str) and record_id:
        return record_id
    return f"{columns['latitude_deg'][0]:.4g}°, {columns['longitude_deg'][0]:.4g}°"


@blueprint.get(UV_DAY_ROUTE)
@produces(SVG_MEDIA_TYPE, JSON_MEDIA_TYPE)
def uv_index_day() -> Response:
    media_type, place, record_id, options = _read_query(_UV_PLACE, _UV_OPTIONS)
    offset_s = _offset_seconds(options["utc_offset"])
    step_s = 60.0 * int(options["step_min"])
    midnight = options["date"] - offset_s
    times = midnight + np.arange(int(_DAY_S // step_s) + 1) * step_s
    if times[0] < EARLIEST_TIME.timestamp() or times[-1] >= TIME_BEFORE.timestamp():
        raise _options_problem("date", "the local day must lie from 1950-01-01T00:00:00Z up to, not "
                                       "including, 2101-01-01T00:00:00Z")
    n = times.size
    columns = {name: np.repeat(values, n) for name, values in place.items()}
    columns["time_unix_s"] = times
    ids = np.array([record_id] * n, dtype=object)
    result, _, _ = irradiance_batch.compute(engine_gateway.current(), columns, ids, ["erythema"], False)
    metrics.count_records(UV_DAY_ROUTE, n)
    uv_index = np.asarray(result["uv_index"], dtype=float)
    date_text = iso_utc([options["date"]])[0][:10]
    if media_type == JSON_MEDIA_TYPE:
        return json_response({
            "model_version": MODEL_VERSION, "caution": cautions.UV_DAY_CAUTION, "figure_cautions": {},
            "id": record_id, "date": date_text, "utc_offset": options["utc_offset"], "step_min": int(options["step_min"]),
            "samples": {"time": iso_utc(times), "uv_index": uv_index,
                        "exposure_category": list(result["exposure_category"])}})
    picture = svg_charts.uv_index_day(
        (times - midnight) / 3600.0, uv_index,
        title=f"UV Index over {date_text} at {_label(record_id, place)}",
        x_label=f"Local time (UTC{options['utc_offset']}), every {options['step_min']} minutes",
        caution=cautions.UV_DAY_CAUTION)
    return Response(picture, mimetype=SVG_MEDIA_TYPE)


def _day_label(unix_s: float) -> str:
    return str(np.datetime64(int(unix_s), "s").astype("datetime64[D]"))


def _tick_days(labels: list[str]) -> list[int]:
    """Day indices to label: month starts when there are several, else about eight evenly."""
    starts = [i for i, label in enumerate(labels) if label.endswith("-01")]
    if 2 <= len(starts) <= 13:
        return starts
    step = max(1, math.ceil(len(labels) / 8))
    return list(range(0, len(labels), step))


def _short(label: str) -> str:
    return f"{int(label[8:])} {_MONTHS[int(label[5:7]) - 1]}"


@blueprint.get(SEASON_ROUTE)
@produces(SVG_MEDIA_TYPE, JSON_MEDIA_TYPE)
def field_season() -> Response:
    media_type, place, record_id, options = _read_query(_SEASON_FIELD, _SEASON_OPTIONS)
    first, last = options["first_day"], options["last_day"]
    n_days = int(round((last - first) / _DAY_S)) + 1
    if not 1 <= n_days <= MAX_SEASON_DAYS:
        raise _options_problem("last_day", f"must be on or after first_day and at most {MAX_SEASON_DAYS} days later")
    days = first + np.arange(n_days) * _DAY_S
    spectrum = options["spectrum"]
    glazing = options.get("glazing")
    transmittance = filters.resolve_transmittance(glazing, None, WAVELENGTH_NM)
    label = glazing or "none"
    evaluate = engine_gateway.current().dose_evaluator([spectrum], transmittance, label, "fields")
    nan = np.full((1, n_days), np.nan)
    season = dose.field_season(place, days, evaluate, ozone_du=nan, cloud_modification_factor=nan,
                               spectra=[spectrum], day_quadrature="gauss_legendre")
    metrics.count_records(SEASON_ROUTE, 1)
    daily = np.asarray(season.daily_dose_j_m2[spectrum][0], dtype=float)
    total = np.asarray(season.season_dose_j_m2[spectrum][0], dtype=float)
    labels = [_day_label(day) for day in days]
    if media_type == JSON_MEDIA_TYPE:
        return json_response({
            "model_version": MODEL_VERSION, "caution": cautions.FIELD_CAUTION,
            "figure_cautions": cautions.figure_cautions([spectrum]), "id": record_id, "spectrum": spectrum,
            "glazing": label, "first_day": labels[0], "last_day": labels[-1],
            "days": {"day": labels, "dose_j_m2": daily, "season_total_j_m2": total}})
    title_spectrum = ACTION_SPECTRA[spectrum].title
    ticks = _tick_days(labels)
    caution = cautions.csv_caution(cautions.FIELD_CAUTION, cautions.figure_cautions([spectrum]))
    picture = svg_charts.season(
        labels, ticks, daily, total, title=f"{title_spectrum}: {_label(record_id, place)}",
        x_label=f"Day (UTC date), {labels[0]} to {labels[-1]}, clear sky" + (f", under {glazing}" if glazing else ""),
        daily_label=f"Daily dose, kJ m⁻² ({spectrum})", cumulative_label=f"Season total, kJ m⁻² ({spectrum})",
        caution=caution, tick_text=[_short(labels[i]) for i in ticks])
    return Response(picture, mimetype=SVG_MEDIA_TYPE)
