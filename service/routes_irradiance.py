"""``POST /v1/irradiance``: instantaneous UV quantities for a batch of records.

Request → :mod:`service.batch_io` (schema declarations below, column checks) → arrays →
:func:`models.engine.compute` (through the grid-cell cache when one is attached) →
arrays → JSON rows, JSON columns or CSV.
"""
from __future__ import annotations

from typing import Any, Callable, Mapping

import numpy as np
from flask import Blueprint, Response, current_app, request
from marshmallow import ValidationError, fields, validate, validates

from uvdose.models import MODEL_VERSION
from uvdose.models import clouds
from uvdose.service import metrics
from uvdose.service.batch_io import (
    CSV_MEDIA_TYPE,
    ConditionsRecordSchema,
    OneOfRegistry,
    OptionsSchema,
    StrictBoolean,
    StrictNumber,
    between,
    csv_response,
    json_response,
    negotiate,
    read_batch,
    rows_from_columns,
)
from uvdose.service.problems import FieldError, Problem

CAUTION = (
    "Estimates for planning, computed from a model atmosphere: not a measurement, and not "
    "medical or occupational-health advice. Real exposure depends on shade, posture, "
    "reflections, clothing and local weather. Defer to local regulations and licensed practice."
)
"""The caution every response carries (see README, "Cautions")."""

ROUTE = "/v1/irradiance"

blueprint = Blueprint("irradiance", __name__)


def _spectrum_names():
    from uvdose.models.action_spectra import ACTION_SPECTRA

    return ACTION_SPECTRA.keys()


def default_spectra() -> list[str]:
    from uvdose.models.engine import DEFAULT_SPECTRA

    return list(DEFAULT_SPECTRA)


class IrradianceRecordSchema(ConditionsRecordSchema):
    """One record of ``POST /v1/irradiance``: the shared conditions fields, and a measured
    broadband global horizontal irradiance from which the cloud factor can be derived."""

    measured_ghi_w_m2 = StrictNumber(validate=between(0, 1500), metadata={"units": "W m-2"})

    exclusive_fields = ConditionsRecordSchema.exclusive_fields + (
        ("cloud_modification_factor", "measured_ghi_w_m2"),)


class IrradianceOptionsSchema(OptionsSchema):
    """Request-wide options of ``POST /v1/irradiance``."""

    spectra = fields.List(
        fields.String(validate=OneOfRegistry(_spectrum_names, "action spectrum"),
                      error_messages={"invalid": "must be a string"}),
        validate=validate.Length(min=1, max=8, error="must name between {min} and {max} spectra"),
        error_messages={"invalid": "must be an array of spectrum names"},
    )
    include_spectrum = StrictBoolean(load_default=False)

    @validates("spectra")
    def _distinct(self, value: list[str], **kwargs: Any) -> None:
        if len(set(value)) != len(value):
            raise ValidationError("names a spectrum twice")


_RECORDS = IrradianceRecordSchema()
_OPTIONS = IrradianceOptionsSchema()

_SCALAR_OUTPUTS = (
    # (wire name, engine column)
    ("solar_zenith_deg", "solar_zenith_deg"),
    ("solar_azimuth_deg", "solar_azimuth_deg"),
    ("uv_index", "uv_index"),
    ("exposure_category", "exposure_category"),
)
_USED_OUTPUTS = (
    ("uvb_w_m2", "uvb_w_m2"),
    ("uva_w_m2", "uva_w_m2"),
    ("ozone_du", "ozone_du"),
    ("ozone_source", "ozone_source"),
    ("pressure_hpa", "pressure_hpa"),
    ("surface_albedo", "surface_albedo"),
    ("cloud_factor", "cloud_modification_factor"),
)


def engine_call(spectra: list[str], include_spectrum: bool, ozone_resolver=None,
                max_full_solve_records: int | None = None) -> Callable[[Mapping[str, np.ndarray]], dict]:
    """The engine on a dict of input columns, returning result columns (what the cache stores).

    ``max_full_solve_records`` bounds, over every call of the returned function, the records
    that may take the full solve (``None``: no bound, as for offline batch files)."""
    from uvdose.models import clear_sky, engine

    budget = None if max_full_solve_records is None else clear_sky.FullSolveBudget(max_full_solve_records)

    def compute(columns: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
        conditions = engine.Conditions.from_columns(columns)
        return engine.compute(conditions, spectra=spectra, include_spectrum=include_spectrum,
                              ozone_resolver=ozone_resolver, full_solve_budget=budget).as_columns()

    return compute


def compute_through_cache(columns: Mapping[str, np.ndarray], compute, context: str) -> dict[str, np.ndarray]:
    """Run ``compute`` through the app's grid-cell cache when one is attached."""
    cache = current_app.extensions.get("uvdose_cache")
    if cache is None:
        return compute(columns)
    return cache.compute_through(columns, compute, context)


def result_columns(result: Mapping[str, np.ndarray], ids: np.ndarray, spectra: list[str]) -> dict[str, Any]:
    """Flat output columns: id, scalars, ``effective_w_m2.<name>``, used values.

    Numbers stay float arrays (orjson writes them directly); text columns become lists."""
    out: dict[str, Any] = {"id": ids.tolist()}
    names = [(wire, column) for wire, column in _SCALAR_OUTPUTS]
    names += [(f"effective_w_m2.{name}", f"effective_w_m2.{name}") for name in spectra]
    names += list(_USED_OUTPUTS)
    for wire, column in names:
        values = np.asarray(result[column])
        out[wire] = values.tolist() if values.dtype.kind in "OUS" else np.ascontiguousarray(values, np.float64)
    return out


def as_lists(columns: Mapping[str, Any]) -> dict[str, list]:
    """The same columns as Python lists (for row building and CSV)."""
    return {name: values.tolist() if isinstance(values, np.ndarray) else values for name, values in columns.items()}


def spectrum_matrix(result: Mapping[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """(wavelength_nm (W,), spectral irradiance (N, W)) from result columns."""
    from uvdose.models.engine import EngineResult

    full = EngineResult.from_columns(result)
    return np.asarray(full.wavelength_nm, dtype=np.float64), full.spectrum_w_m2_nm


def envelope(spectra: list[str], wavelength_nm: np.ndarray | None) -> dict[str, Any]:
    """The response members besides the results."""
    body: dict[str, Any] = {"model_version": MODEL_VERSION, "caution": CAUTION, "spectra": spectra}
    if wavelength_nm is not None:
        body["wavelength_nm"] = wavelength_nm
    return body


def csv_columns(columns: Mapping[str, Any], wavelength_nm, spectrum) -> dict[str, list]:
    """Flat columns plus one ``spectrum_w_m2_nm.<nm>`` column per wavelength when there is a spectrum."""
    columns = as_lists(columns)
    if spectrum is not None:
        for index, nm in enumerate(wavelength_nm):
            columns[f"spectrum_w_m2_nm.{nm:g}"] = spectrum[:, index].tolist()
    return columns


def result_rows(columns: Mapping[str, Any], spectra: list[str], spectrum) -> list[dict[str, Any]]:
    """One dict per record, effective irradiance nested under ``effective_w_m2``."""
    columns = as_lists(columns)
    if spectrum is not None:
        columns["spectrum_w_m2_nm"] = spectrum.tolist()
    return rows_from_columns(columns, nest="effective_w_m2")


def with_cloud_factor_from_measurement(columns: Mapping[str, np.ndarray], ids: np.ndarray) -> dict[str, np.ndarray]:
    """Replace a ``measured_ghi_w_m2`` column by the cloud factor it implies
    (:func:`models.clouds.cmf_from_measured_global_irradiance`), before the cache and the
    engine see the batch. A measurement above 1.5 times the clear-sky value rejects the
    batch, naming each such record."""
    columns = dict(columns)
    measured = columns.pop("measured_ghi_w_m2", None)
    if measured is None or np.isnan(measured).all():
        return columns
    n = len(measured)
    nan = np.full(n, np.nan)
    cmf, implausible = clouds.cmf_from_measured_global_irradiance(
        measured, columns["time_unix_s"], columns["latitude_deg"], columns["longitude_deg"],
        columns.get("elevation_m", nan), columns.get("pressure_hpa", nan))
    if implausible.any():
        raise Problem(422, "invalid-records", "The batch has invalid records", "Nothing was computed.",
                      [FieldError(field="measured_ghi_w_m2", index=int(i),
                                  id=ids[i] if isinstance(ids[i], str) else None,
                                  reason="is more than 1.5 times the clear-sky global irradiance "
                                         "at that place and time: check units and sensor")
                       for i in np.flatnonzero(implausible)])
    given = columns.get("cloud_modification_factor", nan)
    columns["cloud_modification_factor"] = np.where(np.isnan(given), cmf, given)
    return columns


def run(columns: Mapping[str, np.ndarray], ids: np.ndarray, spectra: list[str], include_spectrum: bool,
        through: Callable | None = None,
        ozone_resolver=None,
        max_full_solve_records: int | None = None) -> tuple[dict[str, Any], np.ndarray | None, np.ndarray | None]:
    """Compute validated columns; returns (flat output columns, wavelength_nm, spectrum).

    ``ozone_resolver`` is the app's (``app.extensions["uvdose_ozone"]``), ``None`` for the
    engine's default; its fingerprint goes into the cache context, since a changed grid
    file changes results without a new ``MODEL_VERSION``.
    """
    columns = with_cloud_factor_from_measurement(columns, ids)
    compute = engine_call(spectra, include_spectrum, ozone_resolver, max_full_solve_records)
    context = (f"irradiance;spectra={','.join(spectra)};spectrum={int(include_spectrum)};"
               f"ozone={getattr(ozone_resolver, 'fingerprint', 'default')}")
    result = through(columns, compute, context) if through else compute(columns)
    wavelength_nm = spectrum = None
    if include_spectrum:
        wavelength_nm, spectrum = spectrum_matrix(result)
    return result_columns(result, ids, spectra), wavelength_nm, spectrum


@blueprint.post(ROUTE)
def irradiance() -> Response:
    media_type = negotiate(request)
    batch_request = read_batch(request, record_schema=_RECORDS, options_schema=_OPTIONS,
                               max_records=current_app.config["UVDOSE_MAX_RECORDS"])
    batch, options = batch_request.batch, batch_request.options
    spectra = options.get("spectra") or default_spectra()
    columns, wavelength_nm, spectrum = run(batch.columns, batch.ids, spectra, options["include_spectrum"],
                                           through=compute_through_cache,
                                           ozone_resolver=current_app.extensions.get("uvdose_ozone"),
                                           max_full_solve_records=current_app.config["UVDOSE_MAX_FULL_SOLVE_RECORDS"])
    metrics.count_records(ROUTE, len(batch))
    if media_type == CSV_MEDIA_TYPE:
        return csv_response(csv_columns(columns, wavelength_nm, spectrum))
    body = envelope(spectra, wavelength_nm)
    if batch_request.layout == "columns":
        if spectrum is not None:
            columns["spectrum_w_m2_nm"] = spectrum
        body["columns"] = columns
    else:
        body["results"] = result_rows(columns, spectra, spectrum)
    return json_response(body)
