"""``POST /v1/irradiance``: instantaneous UV quantities for a batch of records.

Request → :func:`service.wire_formats.read_batch` (the schemas in
:mod:`service.irradiance_batch`, whole-column checks) → arrays → the engine through
:mod:`service.engine_gateway` (and its grid-cell cache) → arrays → JSON rows, JSON columns
or CSV.
"""
from __future__ import annotations

from flask import Blueprint, Response

from uvdose.service import engine_gateway, irradiance_batch, metrics
from uvdose.service.negotiation import JSON_MEDIA_TYPE, produces
from uvdose.service.wire_formats import CSV_MEDIA_TYPE, csv_response, inputs_only, json_response, read_endpoint_batch

ROUTE = "/v1/irradiance"

blueprint = Blueprint("irradiance", __name__)

_RECORDS = irradiance_batch.IrradianceRecordSchema()
_OPTIONS = irradiance_batch.IrradianceOptionsSchema()


@blueprint.post(ROUTE)
@produces(JSON_MEDIA_TYPE, CSV_MEDIA_TYPE)
def irradiance() -> Response:
    media_type, batch_request = read_endpoint_batch(_RECORDS, _OPTIONS)
    batch, options = batch_request.batch, batch_request.options
    spectra = options.get("spectra") or engine_gateway.default_spectra()
    if inputs_only():  # the measurements' plausibility is all it checks beyond the schemas
        irradiance_batch.with_cloud_factor_from_measurement(batch.columns, batch.ids)
        return Response(status=204)
    columns, wavelength_nm, spectrum = irradiance_batch.compute(
        engine_gateway.current(options.get("ozone_climatology")), batch.columns, batch.ids, spectra, options["include_spectrum"])
    metrics.count_records(ROUTE, len(batch))
    if media_type == CSV_MEDIA_TYPE:
        return csv_response(irradiance_batch.csv_columns(columns, wavelength_nm, spectrum, spectra))
    body = irradiance_batch.envelope(spectra, wavelength_nm)
    if batch_request.layout == "columns":
        if spectrum is not None:
            columns["spectrum_w_m2_nm"] = spectrum
        body["columns"] = columns
    else:
        body["results"] = irradiance_batch.result_rows(columns, spectrum)
    return json_response(body)
