"""Total-ozone lookup: ``POST /v1/ozone``.

For each record (a place and either an instant or a UTC date) it answers the total
ozone column the engine would use when the record gives none: the first operator grid
that covers it, else the embedded climatology. The resolver is the one instance in
``app.extensions["uvdose_ozone"]``, which the irradiance and dose endpoints hand to
the engine (``compute(..., ozone_resolver=...)``), so this endpoint returns exactly the
values they use.

Request (JSON): ``{"records": [{"id", "lat", "lon", "time" | "date"}, ...]}`` or
``{"columns": {"lat": [...], "lon": [...], "time": [...] | "date": [...]}}``.
``time`` is ISO 8601 with a UTC offset; ``date`` is ``YYYY-MM-DD`` and stands for
12:00 UTC of that day.
"""
from __future__ import annotations

from typing import Any, Mapping

import numpy as np
from flask import Blueprint, Flask, Response, current_app, g, request
from marshmallow import ValidationError, validate, validates_schema

from uvdose.models import MODEL_VERSION
from uvdose.models.ozone_grids import GRIDS_ENV_VAR, OzoneResolver, default_resolver
from uvdose.service import metrics
from uvdose.service.batch_io import (
    CSV_MEDIA_TYPE,
    EARLIEST_TIME,
    TIME_BEFORE,
    OptionsSchema,
    RecordSchema,
    StrictNumber,
    Text,
    between,
    csv_response,
    describe_records,
    json_response,
    negotiate,
    parse_offset_datetime,
    read_batch,
    rows_from_columns,
)
from uvdose.service.problems import Problem

blueprint = Blueprint("ozone", __name__)

ROUTE = "/v1/ozone"

EXTENSION_KEY = "uvdose_ozone"
GRIDS_CONFIG_KEY = "UVDOSE_OZONE_GRIDS"

OZONE_CAUTION = (
    "Total ozone columns here are climatological or operator-supplied estimates for "
    "planning, not measurements. The embedded climatology predates the Antarctic ozone "
    "hole and overstates polar spring columns, which understates UV there. Not medical "
    "or occupational-health advice; follow local regulations and licensed practice."
)

_EARLIEST_DATE = np.datetime64(EARLIEST_TIME.date().isoformat(), "D")
_DATE_BEFORE = np.datetime64(TIME_BEFORE.date().isoformat(), "D")
_DATE_MESSAGE = "must be an ISO 8601 date YYYY-MM-DD from 1950-01-01 to 2100-12-31"
_TIME_MESSAGE = ("must be an ISO 8601 date-time from 1950-01-01T00:00:00Z up to, "
                 "not including, 2101-01-01T00:00:00Z")
_TIME_OFFSET_MESSAGE = "must carry a UTC offset, e.g. 2026-05-20T12:00:00+02:00 or ...Z"
_TIME_RANGE_S = (EARLIEST_TIME.timestamp(), TIME_BEFORE.timestamp())
_SECONDS_PER_DAY = 86400
_NOON_S = 43200


def _parse_dates(texts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Unix seconds of 12:00 UTC on each ``YYYY-MM-DD`` (NaN where bad) and the bad mask."""
    texts = np.asarray(texts, dtype=object)
    strings = np.array([t if isinstance(t, str) else "" for t in texts], dtype="U16")
    shaped = (
        (np.char.str_len(strings) == 10)
        & (np.char.find(strings, "-", 4, 5) == 4)
        & (np.char.find(strings, "-", 7, 8) == 7)
    )
    days = np.full(strings.shape, np.datetime64("NaT"), dtype="datetime64[D]")
    try:
        days[shaped] = strings[shaped].astype("datetime64[D]")
    except ValueError:  # only after a failure: find which entries
        for index in np.flatnonzero(shaped):
            try:
                days[index] = np.datetime64(strings[index], "D")
            except ValueError:
                shaped[index] = False
    with np.errstate(invalid="ignore"):
        ok = shaped & (days >= _EARLIEST_DATE) & (days < _DATE_BEFORE)
        ok &= days.astype(str) == strings  # refuses forms numpy would reinterpret
    seconds = np.where(ok, days.astype("int64") * _SECONDS_PER_DAY + _NOON_S, np.nan).astype(float)
    return seconds, ~ok


def _time_problem(text: Any) -> str | None:
    """Why ``text`` is not an acceptable ``time`` (None when it is)."""
    try:
        seconds = parse_offset_datetime(text)
    except ValueError as error:
        return _TIME_OFFSET_MESSAGE if str(error) == "no UTC offset" else _TIME_MESSAGE
    except TypeError:
        return _TIME_MESSAGE
    if not _TIME_RANGE_S[0] <= seconds < _TIME_RANGE_S[1]:
        return _TIME_MESSAGE
    return None


class OzoneRecordSchema(RecordSchema):
    """One ozone lookup: where, and when (``time`` or ``date``, exactly one).

    ``time`` and ``date`` are declared as text so the shared column check handles them
    as optional; their format, range and the exactly-one rule are checked here (one
    record) and in :func:`_instants` (whole columns), with the same messages.
    """

    id = Text(validate=validate.Length(max=200, error="must be at most {max} characters"),
              metadata={"description": "client's own label, echoed back"})
    time = Text(validate=validate.Length(max=64, error=_TIME_MESSAGE),
                metadata={"units": "ISO 8601 with offset"})
    date = Text(validate=validate.Length(max=10, error=_DATE_MESSAGE),
                metadata={"units": "ISO 8601 date, 12:00 UTC"})
    latitude_deg = StrictNumber(data_key="lat", required=True, validate=between(-90, 90),
                                metadata={"units": "degree north"})
    longitude_deg = StrictNumber(data_key="lon", required=True, validate=between(-180, 180),
                                 metadata={"units": "degree east"})

    @validates_schema
    def _time_or_date(self, data: Mapping[str, Any], **kwargs: Any) -> None:
        has_time = data.get("time") is not None
        has_date = data.get("date") is not None
        if has_time == has_date:
            raise ValidationError("give time or date, exactly one", "time" if has_time else "date")
        if has_time and (reason := _time_problem(data["time"])):
            raise ValidationError(reason, "time")
        if has_date and _parse_dates(np.array([data["date"]], dtype=object))[1][0]:
            raise ValidationError(_DATE_MESSAGE, "date")


class _NoOptions(OptionsSchema):
    """POST /v1/ozone takes no request-wide options."""


_SCHEMA = OzoneRecordSchema()
_OPTIONS = _NoOptions()


def resolver_for(app: Flask) -> OzoneResolver:
    """The app's resolver: grids from config ``UVDOSE_OZONE_GRIDS`` if set, else the process default.

    The process default (``models.ozone_grids.default_resolver``) reads the
    ``UVDOSE_OZONE_GRIDS`` environment variable once per process.
    """
    if app.config.get(GRIDS_CONFIG_KEY) is not None:
        return OzoneResolver.from_environment({GRIDS_ENV_VAR: app.config[GRIDS_CONFIG_KEY]})
    return default_resolver()


@blueprint.record_once
def _attach_resolver(state) -> None:
    if EXTENSION_KEY not in state.app.extensions:
        state.app.extensions[EXTENSION_KEY] = resolver_for(state.app)


def _instants(raw: Mapping[str, list], n: int) -> tuple[np.ndarray, np.ndarray]:
    """Unix seconds of each record's ``time`` or ``date`` (12:00 UTC), and the bad-record mask."""
    time_values = list(raw.get("time") or [None] * n)
    date_values = np.array(raw.get("date") or [None] * n, dtype=object)
    time_given = ~np.equal(np.array(time_values, dtype=object), None)
    date_given = ~np.equal(date_values, None)
    seconds = np.full(n, np.nan)
    bad = time_given == date_given
    if time_given.any():
        texts = [value for value, given in zip(time_values, time_given) if given]
        try:
            parsed = np.array([parse_offset_datetime(text) for text in texts], dtype=float)
        except (TypeError, ValueError):  # only after a failure: find which entries
            parsed = np.array([np.nan if _time_problem(text) else parse_offset_datetime(text)
                               for text in texts], dtype=float)
        with np.errstate(invalid="ignore"):
            in_range = (parsed >= _TIME_RANGE_S[0]) & (parsed < _TIME_RANGE_S[1])
        seconds[time_given] = parsed
        bad[np.flatnonzero(time_given)[~in_range]] = True
    date_s, date_bad = _parse_dates(date_values)
    bad |= date_given & date_bad
    return np.where(time_given, seconds, date_s), bad


def _read() -> tuple[dict[str, np.ndarray], np.ndarray, np.ndarray, str]:
    """(place columns, ids, instants, layout) of a valid request; else a 4xx problem.

    The shared reader checks the fields column by column; ``time``/``date`` come back
    as text columns (``None`` = not given) and are checked here for the whole batch.
    """
    batch_request = read_batch(request, record_schema=_SCHEMA, options_schema=_OPTIONS,
                               max_records=current_app.config["UVDOSE_MAX_RECORDS"])
    batch = batch_request.batch
    n = len(batch)
    raw = {
        "time": list(batch.columns.get("time", [None] * n)),
        "date": list(batch.columns.get("date", [None] * n)),
    }
    instants, bad = _instants(raw, n)
    if bad.any():
        raw.update(id=list(batch.ids), lat=batch.columns["latitude_deg"].tolist(),
                   lon=batch.columns["longitude_deg"].tolist())
        errors = describe_records(raw, _SCHEMA, np.flatnonzero(bad), batch.ids)
        raise Problem(422, "invalid-records", "The batch has invalid records",
                      f"{int(bad.sum())} of {n} record(s) have errors; nothing was computed.", errors)
    return batch.columns, batch.ids, instants, batch_request.layout


def _iso_utc(time_unix_s: np.ndarray) -> np.ndarray:
    seconds = np.round(time_unix_s).astype("int64").astype("datetime64[s]")
    return np.char.add(np.datetime_as_string(seconds, unit="s"), "Z")


@blueprint.post(ROUTE)
def lookup_ozone() -> Response:
    media_type = negotiate(request)
    columns, ids, time_s, layout = _read()
    g.uvdose_record_count = len(ids)
    resolver: OzoneResolver = current_app.extensions[EXTENSION_KEY]
    ozone_du, sources = resolver.resolve(columns["latitude_deg"], columns["longitude_deg"], time_s, None)
    out = {
        "id": ids.tolist(),
        "time": _iso_utc(time_s).tolist(),
        "ozone_du": ozone_du.tolist(),
        "ozone_source": sources.tolist(),
    }
    metrics.count_records(ROUTE, len(ids))
    if media_type == CSV_MEDIA_TYPE:
        return csv_response(out)
    body: dict[str, Any] = {
        "model_version": MODEL_VERSION,
        "caution": OZONE_CAUTION,
        "ozone_grids": resolver.describe(),
    }
    if layout == "columns":
        body["columns"] = out
    else:
        body["results"] = rows_from_columns(out)
    return json_response(body)
