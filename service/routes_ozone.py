"""Total-ozone lookup: ``POST /v1/ozone``.

For each record (a place and either an instant or a UTC date) it answers the total
ozone column the engine would use when the record gives none: the first operator grid
that covers it, else the embedded climatology. The resolver is the app's one instance
(:mod:`service.engine_gateway`), which the irradiance and dose endpoints hand to the
engine too, so this endpoint returns exactly the values they use.

Request (JSON or CSV): ``{"records": [{"id", "lat", "lon", "time" | "date"}, ...]}`` or
``{"columns": {"lat": [...], "lon": [...], "time": [...] | "date": [...]}}``.
``time`` is ISO 8601 with a UTC offset; ``date`` is ``YYYY-MM-DD`` and stands for
12:00 UTC of that day. Both are read by the shared time reader and column checks.
"""
from __future__ import annotations

from typing import Any

import numpy as np
from flask import Blueprint, Response, g

from uvdose.models import MODEL_VERSION
from uvdose.service import engine_gateway, metrics
from uvdose.service.cautions import OZONE_CAUTION, with_caution_column
from uvdose.service.negotiation import JSON_MEDIA_TYPE, produces
from uvdose.service.record_fields import (
    LATITUDE,
    LONGITUDE,
    OZONE_CLIMATOLOGY_OPTION,
    RECORD_ID,
    TIME_SPAN_MESSAGE,
    IsoDate,
    OptionsSchema,
    RecordSchema,
    offset_time,
    time_span,
)
from uvdose.service.time_text import iso_utc
from uvdose.service.wire_formats import CSV_MEDIA_TYPE, csv_response, json_response, read_endpoint_batch, \
    rows_from_columns

blueprint = Blueprint("ozone", __name__)

ROUTE = "/v1/ozone"

_TIME_MESSAGE = "must be an ISO 8601 date-time " + TIME_SPAN_MESSAGE
_DATE_MESSAGE = "must be an ISO 8601 date YYYY-MM-DD from 1950-01-01 to 2100-12-31"
_NOON_S = 43200.0


class OzoneRecordSchema(RecordSchema):
    """One ozone lookup: where, and when (``time`` or ``date``, exactly one)."""

    id = RECORD_ID
    time_unix_s = offset_time(required=False, validate=time_span(_TIME_MESSAGE),
                              error_messages={"invalid": _TIME_MESSAGE})
    date_unix_s = IsoDate(data_key="date", validate=time_span(_DATE_MESSAGE),
                          error_messages={"invalid": _DATE_MESSAGE},
                          metadata={"units": "ISO 8601 date, 12:00 UTC"})
    latitude_deg = LATITUDE
    longitude_deg = LONGITUDE

    one_of_fields = (("time_unix_s", "date_unix_s"),)


class OzoneOptionsSchema(OptionsSchema):
    """Request-wide options of ``POST /v1/ozone``."""

    ozone_climatology = OZONE_CLIMATOLOGY_OPTION


_SCHEMA = OzoneRecordSchema()
_OPTIONS = OzoneOptionsSchema()


@blueprint.post(ROUTE)
@produces(JSON_MEDIA_TYPE, CSV_MEDIA_TYPE)
def lookup_ozone() -> Response:
    media_type, batch_request = read_endpoint_batch(_SCHEMA, _OPTIONS)
    batch = batch_request.batch
    columns, ids = batch.columns, batch.ids
    g.uvdose_record_count = len(ids)
    n = len(ids)
    time_s = columns.get("time_unix_s", np.full(n, np.nan))
    time_s = np.where(np.isnan(time_s), columns.get("date_unix_s", np.full(n, np.nan)) + _NOON_S, time_s)
    gateway = engine_gateway.current(batch_request.options.get("ozone_climatology"))
    ozone_du, sources = gateway.ozone(columns["latitude_deg"], columns["longitude_deg"], time_s)
    out = {
        "id": ids.tolist(),
        "time": iso_utc(time_s),
        "ozone_du": ozone_du.tolist(),
        "ozone_source": sources.tolist(),
    }
    metrics.count_records(ROUTE, n)
    if media_type == CSV_MEDIA_TYPE:
        return csv_response(with_caution_column(out, OZONE_CAUTION))
    body: dict[str, Any] = {
        "model_version": MODEL_VERSION,
        "caution": OZONE_CAUTION,
        "ozone_grids": gateway.ozone_grids(),
        "ozone_climatology": gateway.ozone_climatology,
    }
    if batch_request.layout == "columns":
        body["columns"] = out
    else:
        body["results"] = rows_from_columns(out)
    return json_response(body)
