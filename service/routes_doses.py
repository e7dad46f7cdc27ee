"""Cumulative doses: ``POST /v1/doses/windows``, ``/v1/doses/fields``, ``/v1/doses/routes``.

Request → schemas below (records through :mod:`service.batch_io`) → arrays →
``models.dose`` / ``models.routes`` with the engine as evaluator (through the grid-cell
cache when one is attached) → arrays → JSON. The physics, the quadrature and their
sources are documented in those modules; this layer only validates and shapes.

* windows: each record is a place and a time window (``start``, ``end``) with the
  shared conditions fields, optional cloud cover and a receiver orientation.
* fields: each record is a field; the request names a season (``first_day`` …
  ``last_day``, UTC dates) and optional per-day ozone and cloud inputs as a column
  table (``daily``); the answer has per-day doses, running season totals and the
  ratio to the same field's clear-sky climatological dose.
* routes: each route is a list of timestamped points (or a GeoJSON Feature with a
  ``times`` property); the answer has the dose on the driver's side window.
"""
from __future__ import annotations

import hashlib
from typing import Any, Mapping

import numpy as np
from flask import Blueprint, Response, current_app, request
from marshmallow import ValidationError, fields, validate, validates

from uvdose.models import MODEL_VERSION, clear_sky, clouds, dose, exposure, filters, routes
from uvdose.models.spectral_grid import WAVELENGTH_NM
from uvdose.service import metrics
from uvdose.service.batch_io import (
    ConditionsRecordSchema,
    OffsetDateTime,
    OneOfRegistry,
    OptionsSchema,
    StrictNumber,
    Text,
    between,
    json_response,
    negotiate,
    parse_offset_datetime,
    read_batch,
    rows_from_columns,
)
from uvdose.service.problems import FieldError, Problem
from uvdose.service.routes_irradiance import StrictBoolean, compute_through_cache

blueprint = Blueprint("doses", __name__)

WINDOWS_ROUTE = "/v1/doses/windows"
FIELDS_ROUTE = "/v1/doses/fields"
ROUTES_ROUTE = "/v1/doses/routes"

MAX_WINDOW_S = 31 * 86400.0
"""Longest time window accepted (31 days): bounds the work of one record."""
MAX_SEASON_DAYS = 366
MAX_ROUTE_POINTS = 500_000
"""Points accepted in one routes request, all routes together."""

DEFAULT_WINDOW_SPECTRA = ("erythema", "actinic_icnirp")
DEFAULT_FIELD_SPECTRA = ("plant_damage", "plant_growth", "erythema")
DEFAULT_ROUTE_SPECTRA = ("erythema", "actinic_icnirp")
DEFAULT_ROUTE_GLAZING = "clear_side_glass"

CAUTION = exposure.CAUTION


# -- shared option fields -------------------------------------------------------------

def _spectrum_names():
    from uvdose.models.action_spectra import ACTION_SPECTRA

    return ACTION_SPECTRA.keys()


def _spectra_field():
    return fields.List(
        fields.String(validate=OneOfRegistry(_spectrum_names, "action spectrum"),
                      error_messages={"invalid": "must be a string"}),
        validate=validate.Length(min=1, max=8, error="must name between {min} and {max} spectra"),
        error_messages={"invalid": "must be an array of spectrum names"})


class CurveSchema(OptionsSchema):
    wavelength_nm = fields.List(StrictNumber(allow_none=False), required=True)
    transmittance = fields.List(StrictNumber(allow_none=False), required=True)


class DoseOptionsSchema(OptionsSchema):
    spectra = _spectra_field()
    step_s = StrictNumber(validate=between(dose.MIN_STEP_S, dose.MAX_STEP_S))
    glazing = Text(validate=OneOfRegistry(lambda: filters.FILTERS.keys(), "glazing"))
    transmittance_curve = fields.Nested(CurveSchema)

    @validates("spectra")
    def _distinct(self, value: list[str], **kwargs: Any) -> None:
        if len(set(value)) != len(value):
            raise ValidationError("names a spectrum twice")


def _options_problem(field: str, reason: str) -> Problem:
    return Problem(422, "invalid-options", "The request options are invalid", "Nothing was computed.",
                   [FieldError(field=field, reason=reason)])


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


def _evaluator(spectra, transmittance, label: str, kind: str) -> dose.Evaluator:
    resolver = current_app.extensions.get("uvdose_ozone")
    budget = clear_sky.FullSolveBudget(current_app.config["UVDOSE_MAX_FULL_SOLVE_RECORDS"])
    compute = dose.engine_evaluator(spectra, transmittance=transmittance, ozone_resolver=resolver,
                                    full_solve_budget=budget)
    context = (f"doses:{kind};spectra={','.join(spectra)};glazing={label};"
               f"ozone={getattr(resolver, 'fingerprint', 'default')}")

    def evaluate(columns):
        # Samples are built from validated input, so a ValueError inside the engine is
        # our fault, not the client's: keep it out of the 422 path below.
        try:
            return compute_through_cache(columns, compute, context)
        except ValueError as error:
            raise RuntimeError(f"engine failed on dose samples: {error}") from error

    return evaluate


def _model_problem(error: ValueError, field_prefix: str = "") -> Problem:
    return Problem(422, "invalid-records", "The batch has invalid records",
                   "Nothing was computed.", [FieldError(field=field_prefix, reason=str(error))])


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
    """(validated batch, options) of a JSON records/columns body (service.batch_io)."""
    negotiate(request)
    batch_request = read_batch(request, record_schema=record_schema, options_schema=options_schema,
                               max_records=current_app.config["UVDOSE_MAX_RECORDS"])
    return batch_request.batch, batch_request.options


def _record_id(ids, index: int):
    return ids[index] if isinstance(ids[index], str) else None


def _common(spectra, step_s, label) -> dict[str, Any]:
    return {"model_version": MODEL_VERSION, "caution": CAUTION, "spectra": list(spectra),
            "step_s": step_s, "glazing": label}


def _iso(unix_s: np.ndarray) -> list[str]:
    return [f"{t}Z" for t in np.asarray(np.round(unix_s), dtype="int64").astype("datetime64[s]")]


# -- windows --------------------------------------------------------------------------

def _time_range() -> validate.Range:
    # The same span as the shared ``time`` field.
    return ConditionsRecordSchema._declared_fields["time_unix_s"].validators[0]


class WindowRecordSchema(ConditionsRecordSchema):
    """A place, a time window and the conditions there."""

    time_unix_s = OffsetDateTime(data_key="start", required=True, validate=_time_range(),
                                 metadata={"units": "ISO 8601 with offset"})
    end_unix_s = OffsetDateTime(data_key="end", required=True, validate=_time_range(),
                                metadata={"units": "ISO 8601 with offset"})
    cloud_cover_fraction = StrictNumber(data_key="cloud_cover", validate=between(0, 1))
    cloud_cover_oktas = StrictNumber(data_key="cloud_oktas", validate=between(0, 8))
    tilt_deg = StrictNumber(validate=between(0, 180))
    receiver_azimuth_deg = StrictNumber(validate=between(0, 360))
    sky_view_factor = StrictNumber(validate=between(0, 1))


_WINDOW_RECORDS = WindowRecordSchema()
_WINDOW_OPTIONS = DoseOptionsSchema()


def _cmf_columns(columns: Mapping[str, np.ndarray], ids) -> np.ndarray:
    try:
        return clouds.resolve_cmf(columns.get("cloud_modification_factor"),
                                  columns.get("cloud_cover_fraction"),
                                  columns.get("cloud_cover_oktas"))
    except ValueError as error:
        index = int(str(error).split(":")[0].split()[-1])
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.",
                      [FieldError(field="cloud_oktas" if "oktas" in str(error) else "cloud_factor",
                                  reason=str(error).split(": ", 1)[1], index=index,
                                  id=_record_id(ids, index))]) from None


@blueprint.post(WINDOWS_ROUTE)
def windows() -> Response:
    batch, options = _read_records(_WINDOW_RECORDS, _WINDOW_OPTIONS)
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
    cols["cloud_modification_factor"] = np.broadcast_to(_cmf_columns(cols, batch.ids), start.shape).copy()
    cols.pop("cloud_cover_fraction", None), cols.pop("cloud_cover_oktas", None)
    spectra = list(options.get("spectra") or DEFAULT_WINDOW_SPECTRA)
    step_s = float(options.get("step_s") or dose.DEFAULT_WINDOW_STEP_S)
    transmittance, label = _transmittance(options)
    evaluate = _evaluator(spectra, transmittance, label, "windows")
    try:
        out = dose.window_doses(cols, start, end, evaluate, step_s=step_s, spectra=spectra)
    except ValueError as error:
        raise _model_problem(error) from None
    metrics.count_records(WINDOWS_ROUTE, len(batch))
    doses = out["dose_j_m2"]
    columns: dict[str, list] = {
        "id": batch.ids.tolist(), "start": _iso(start), "end": _iso(end),
        "dose_j_m2": rows_from_columns({k: np.asarray(v).tolist() for k, v in doses.items()}),
        "peak_uv_index": np.asarray(out["peak_uv_index"]).tolist(),
        "cloud_factor": [None if np.isnan(x) else x for x in cols["cloud_modification_factor"].tolist()],
    }
    columns.update(_exposure_rows(doses, out["final_rate_w_m2"]))
    body = _common(spectra, step_s, label)
    body["samples"] = out["samples"]
    body["results"] = rows_from_columns(columns)
    return json_response(body)


# -- fields ---------------------------------------------------------------------------

class FieldRecordSchema(ConditionsRecordSchema):
    """A field: where it is and its ground; time, ozone and clouds come per day."""

    class Meta:
        exclude = ("time_unix_s", "ozone_du", "cloud_modification_factor")


class DailyTableSchema(OptionsSchema):
    field = fields.List(fields.Integer(strict=True), required=True)
    day = fields.List(fields.String(), required=True)
    ozone_du = fields.List(StrictNumber(validate=between(50, 700)))
    cloud_factor = fields.List(StrictNumber(validate=between(0, 1.5)))
    cloud_oktas = fields.List(StrictNumber(validate=between(0, 8)))


class FieldOptionsSchema(DoseOptionsSchema):
    first_day = fields.Date(required=True, error_messages={"invalid": "must be a date YYYY-MM-DD"})
    last_day = fields.Date(required=True, error_messages={"invalid": "must be a date YYYY-MM-DD"})
    daily = fields.Nested(DailyTableSchema)


_FIELD_RECORDS = FieldRecordSchema()
_FIELD_OPTIONS = FieldOptionsSchema()


def _daily_inputs(daily: Mapping[str, list] | None, n_fields: int, first: np.datetime64, n_days: int):
    """(ozone (F, D), CMF (F, D)) from the optional daily column table."""
    ozone = np.full((n_fields, n_days), np.nan)
    cmf = np.full((n_fields, n_days), np.nan)
    if not daily:
        return ozone, cmf
    field_index = np.asarray(daily["field"], dtype=np.int64)
    n = field_index.size
    errors: list[FieldError] = []
    for name in ("day", "ozone_du", "cloud_factor", "cloud_oktas"):
        if name in daily and len(daily[name]) != n:
            errors.append(FieldError(field=f"daily.{name}", reason=f"has {len(daily[name])} entries, expected {n}"))
    if errors:
        raise Problem(422, "invalid-options", "The request options are invalid", "Nothing was computed.", errors)
    try:
        day = np.asarray(daily["day"], dtype="datetime64[D]")
    except ValueError:
        raise _options_problem("daily.day", "every entry must be a date YYYY-MM-DD") from None
    day_index = (day - first).astype(np.int64)
    bad = (field_index < 0) | (field_index >= n_fields)
    errors += [FieldError(field=f"daily.field[{i}]", reason=f"must be a record index 0–{n_fields - 1}")
               for i in np.flatnonzero(bad)[:100]]
    bad_day = (day_index < 0) | (day_index >= n_days)
    errors += [FieldError(field=f"daily.day[{i}]", reason="must lie between first_day and last_day")
               for i in np.flatnonzero(bad_day)[:100]]
    key = field_index * n_days + day_index
    dup = np.zeros(n, bool)
    if n:
        order = np.argsort(key, kind="stable")
        dup[order[1:]] = key[order][1:] == key[order][:-1]
    errors += [FieldError(field=f"daily.day[{i}]", reason="repeats a field and day given before")
               for i in np.flatnonzero(dup)[:100]]
    if errors:
        raise Problem(422, "invalid-options", "The request options are invalid", "Nothing was computed.", errors)

    def column(name):
        values = daily.get(name)
        return np.full(n, np.nan) if values is None else np.array(
            [np.nan if v is None else v for v in values], dtype=float)

    try:
        day_cmf = clouds.resolve_cmf(column("cloud_factor"), None, column("cloud_oktas"))
    except ValueError as error:
        raise _options_problem("daily", str(error).replace("record", "entry")) from None
    ozone[field_index, day_index] = column("ozone_du")
    cmf[field_index, day_index] = np.broadcast_to(day_cmf, (n,))
    return ozone, cmf


@blueprint.post(FIELDS_ROUTE)
def field_doses() -> Response:
    batch, options = _read_records(_FIELD_RECORDS, _FIELD_OPTIONS)
    first = np.datetime64(options["first_day"].isoformat(), "D")
    last = np.datetime64(options["last_day"].isoformat(), "D")
    n_days = int((last - first).astype(np.int64)) + 1
    if not 1 <= n_days <= MAX_SEASON_DAYS:
        raise _options_problem("last_day", f"must be on or after first_day and at most {MAX_SEASON_DAYS} days later")
    if first < np.datetime64("1950-01-01") or last >= np.datetime64("2101-01-01"):
        raise _options_problem("first_day", "the season must lie within 1950–2100")
    days = (first + np.arange(n_days)).astype("datetime64[s]").astype(np.int64).astype(float)
    ozone, cmf = _daily_inputs(options.get("daily"), len(batch), first, n_days)
    spectra = list(options.get("spectra") or DEFAULT_FIELD_SPECTRA)
    # Gauss–Legendre over each daylight period unless the client asks for a step.
    step_s = options.get("step_s")
    quadrature = (dict(day_quadrature="trapezoid", step_s=float(step_s)) if step_s is not None
                  else dict(day_quadrature="gauss_legendre"))
    transmittance, label = _transmittance(options)
    evaluate = _evaluator(spectra, transmittance, label, "fields")
    try:
        season = dose.field_season(batch.columns, days, evaluate, ozone_du=ozone,
                                   cloud_modification_factor=cmf, spectra=spectra, **quadrature)
    except ValueError as error:
        raise _model_problem(error) from None
    metrics.count_records(FIELDS_ROUTE, len(batch))

    dates = [str(d) for d in first + np.arange(n_days)]
    state_names = np.array(["polar_night", "ordinary", "midnight_sun"])
    results = []
    daily_lists = {k: v.tolist() for k, v in season.daily_dose_j_m2.items()}
    season_lists = {k: v.tolist() for k, v in season.season_dose_j_m2.items()}
    ratio_lists = {k: np.where(np.isnan(v), None, v).tolist() for k, v in season.ratio_to_clear_sky.items()}
    sunrise = [_iso(row) for row in season.sunrise_unix_s]
    sunset = [_iso(row) for row in season.sunset_unix_s]
    states = state_names[season.sun_state + 1].tolist()
    peak = season.peak_uv_index.tolist()
    for f, record_id in enumerate(batch.ids.tolist()):
        day_rows = rows_from_columns({
            "day": dates, "sunrise": sunrise[f], "sunset": sunset[f], "sun": states[f],
            "dose_j_m2": rows_from_columns({k: v[f] for k, v in daily_lists.items()}),
            "season_total_j_m2": rows_from_columns({k: v[f] for k, v in season_lists.items()}),
            "ratio_to_clear_sky": rows_from_columns({k: v[f] for k, v in ratio_lists.items()}),
            "peak_uv_index": peak[f],
        })
        results.append({"id": record_id, "days": day_rows})
    body = _common(spectra, step_s, label)
    body.update(first_day=dates[0], last_day=dates[-1], samples=season.samples, results=results,
                quadrature=(f"trapezoid:{step_s:g}s" if step_s is not None
                            else f"gauss_legendre:{dose.DEFAULT_GAUSS_NODES}"))
    return json_response(body)


# -- routes ---------------------------------------------------------------------------

class RouteOptionsSchema(DoseOptionsSchema):
    driver_side = Text(validate=validate.OneOf(["left", "right"], error="must be 'left' or 'right'"))
    roof_cutoff_elevation_deg = StrictNumber(validate=between(0, 90))
    cab_sky_view_factor = StrictNumber(validate=between(0, 1))
    routes = fields.Raw(required=True)


_ROUTE_OPTIONS = RouteOptionsSchema()
_ROUTE_CONDITIONS = {"ozone_du": (50, 700), "cloud_factor": (0, 1.5), "surface_albedo": (0, 1),
                     "aod_550": (0, 5), "elevation_m": (-500, 9000)}
_ROUTE_CONDITION_COLUMNS = {"cloud_factor": "cloud_modification_factor"}
_ROUTE_KEYS = {"id", "points", *_ROUTE_CONDITIONS}
_POINT_KEYS = {"time", "lat", "lon", "stop", "gap"}


def _route_arrays(index: int, route: Any, errors: list[FieldError]):
    """(times, lats, lons, stops, gaps, id, conditions) of one route, or None if it is bad."""
    def err(field, reason):
        errors.append(FieldError(field=f"routes[{index}]{field}", reason=reason, index=index,
                                 id=route.get("id") if isinstance(route, dict) and isinstance(route.get("id"), str) else None))

    if not isinstance(route, dict):
        err("", "must be an object")
        return None
    if route.get("type") == "Feature":
        props = route.get("properties") or {}
        geometry = route.get("geometry") or {}
        if geometry.get("type") not in ("LineString", "MultiPoint"):
            err(".geometry.type", "must be LineString or MultiPoint")
            return None
        coords = geometry.get("coordinates")
        times = props.get("times")
        if not isinstance(coords, list) or not isinstance(times, list) or len(coords) != len(times):
            err(".properties.times", "must be an array with one time per coordinate")
            return None
        try:
            arr = np.asarray(coords, dtype=float)[:, :2]
        except (ValueError, TypeError, IndexError):
            err(".geometry.coordinates", "must be [longitude, latitude] number pairs")
            return None
        lons, lats = arr[:, 0], arr[:, 1]
        stops = props.get("stops", [False] * len(times))
        gaps = props.get("gaps", [False] * len(times))
        conditions, route_id = props, route.get("id", props.get("id"))
    else:
        points = route.get("points")
        if not isinstance(points, list) or not all(isinstance(p, dict) for p in points):
            err(".points", "must be an array of {time, lat, lon} objects")
            return None
        unknown = sorted(set(route) - _ROUTE_KEYS) + [
            f"points.{k}" for k in sorted(set().union(*points) - _POINT_KEYS)]
        if unknown:
            err(f".{unknown[0]}", "is not a field of a route" if "." not in unknown[0]
                else "is not a field of a route point")
            return None
        times = [p.get("time") for p in points]
        try:
            lats = np.array([p.get("lat") for p in points], dtype=float)
            lons = np.array([p.get("lon") for p in points], dtype=float)
        except (TypeError, ValueError):
            err(".points", "every point needs numeric lat and lon")
            return None
        stops = [p.get("stop", False) for p in points]
        gaps = [p.get("gap", False) for p in points]
        conditions, route_id = route, route.get("id")
    if not all(isinstance(s, bool) for s in list(stops) + list(gaps)) or len(stops) != len(times) or len(gaps) != len(times):
        err(".stops" if route.get("type") == "Feature" else ".points", "stop and gap must be true or false, one per point")
        return None
    try:
        t = np.array([parse_offset_datetime(x) for x in times], dtype=float)
    except (TypeError, ValueError):
        err(".times" if route.get("type") == "Feature" else ".points",
            "every time must be ISO 8601 with a UTC offset")
        return None
    values = {}
    for name, (low, high) in _ROUTE_CONDITIONS.items():
        v = conditions.get(name)
        if v is None:
            values[_ROUTE_CONDITION_COLUMNS.get(name, name)] = np.nan
        elif isinstance(v, bool) or not isinstance(v, (int, float)) or not low <= v <= high:
            err(f".{name}", f"must be a number between {low} and {high}")
            return None
        else:
            values[_ROUTE_CONDITION_COLUMNS.get(name, name)] = float(v)
    return t, lats, lons, np.asarray(stops, bool), np.asarray(gaps, bool), route_id, values


@blueprint.post(ROUTES_ROUTE)
def route_doses() -> Response:
    negotiate(request)
    body = request.get_json(silent=True)
    if not isinstance(body, dict):
        raise Problem(400, "malformed-body", "The request body cannot be read",
                      "The body must be a JSON object with a `routes` array.")
    try:
        options = _ROUTE_OPTIONS.load(body)
    except ValidationError as error:
        raise Problem(422, "invalid-options", "The request options are invalid", "Nothing was computed.",
                      [FieldError(field=str(k), reason=str(r[0] if isinstance(r, list) else r))
                       for k, r in error.normalized_messages().items()]) from None
    raw_routes = options["routes"]
    if not isinstance(raw_routes, list) or not raw_routes or len(raw_routes) > current_app.config["UVDOSE_MAX_RECORDS"]:
        raise _options_problem("routes", "must be a non-empty array of at most "
                               f"{current_app.config['UVDOSE_MAX_RECORDS']} routes")
    errors: list[FieldError] = []
    parsed = [_route_arrays(i, r, errors) for i, r in enumerate(raw_routes)]
    if errors:
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.", errors)
    if sum(p[0].size for p in parsed) > MAX_ROUTE_POINTS:
        raise Problem(413, "too-many-records", "Too many records in one request",
                      f"At most {MAX_ROUTE_POINTS} route points are accepted per request.",
                      extensions={"max_records": MAX_ROUTE_POINTS})
    points = routes.RoutePoints(
        route=np.repeat(np.arange(len(parsed)), [p[0].size for p in parsed]),
        time_unix_s=np.concatenate([p[0] for p in parsed]), latitude_deg=np.concatenate([p[1] for p in parsed]),
        longitude_deg=np.concatenate([p[2] for p in parsed]), stop=np.concatenate([p[3] for p in parsed]),
        gap=np.concatenate([p[4] for p in parsed]))
    ids = [p[5] for p in parsed]
    per_route = {k: np.array([p[6][k] for p in parsed]) for k in parsed[0][6]}
    spectra = list(options.get("spectra") or DEFAULT_ROUTE_SPECTRA)
    step_s = float(options.get("step_s") or routes.DEFAULT_ROUTE_STEP_S)
    transmittance, label = _transmittance(options, default=DEFAULT_ROUTE_GLAZING)
    side = options.get("driver_side") or "left"
    cutoff = float(options.get("roof_cutoff_elevation_deg", routes.DEFAULT_ROOF_CUTOFF_ELEVATION_DEG))
    sky_view = float(options.get("cab_sky_view_factor", routes.DEFAULT_CAB_SKY_VIEW_FACTOR))
    evaluate = _evaluator(spectra, transmittance, label, "routes")
    try:
        out = routes.route_doses(points, evaluate, per_route=per_route, driver_side=side, step_s=step_s,
                                 roof_cutoff_elevation_deg=cutoff, sky_view_factor=sky_view, spectra=spectra)
    except ValueError as error:
        message = str(error)
        index = int(message.split()[1].rstrip(",:")) if message.startswith("route ") else None
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.",
                      [FieldError(field=f"routes[{index}]" if index is not None else "routes", reason=message,
                                  index=index, id=ids[index] if index is not None and isinstance(ids[index], str) else None)]) from None
    metrics.count_records(ROUTES_ROUTE, len(parsed))
    columns: dict[str, list] = {
        "id": ids,
        "driving_s": out.driving_s.tolist(), "parked_s": out.parked_s.tolist(), "gap_s": out.gap_s.tolist(),
        "dose_j_m2": rows_from_columns({k: v.tolist() for k, v in out.dose_j_m2.items()}),
        "peak_uv_index": out.peak_uv_index.tolist(),
    }
    columns.update(_exposure_rows(out.dose_j_m2, out.final_rate_w_m2))
    response = _common(spectra, step_s, label)
    response.update(driver_side=side, roof_cutoff_elevation_deg=cutoff, cab_sky_view_factor=sky_view,
                    samples=out.samples, results=rows_from_columns(columns))
    return json_response(response)
