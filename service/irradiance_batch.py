"""One irradiance batch, whichever door it comes in by: ``POST /v1/irradiance``, the offline
``uvdose batch`` and the catalogue's list of record fields share it.

Holds the record and options schemas, the cloud factor derived from a measured global
irradiance, the engine run (through :mod:`service.engine_gateway`) and the layout of the
results (flat columns; rows with the effective irradiances nested; CSV with one column per
wavelength).
"""
from __future__ import annotations

from typing import Any, Mapping

import numpy as np

from uvdose.models import MODEL_VERSION, clouds
from uvdose.models.engine import effective_column
from uvdose.service import cautions, uncertainty_fields
from uvdose.service.engine_gateway import Gateway
from uvdose.service.problems import by_schema, records_named
from uvdose.service.record_fields import (
    OZONE_CLIMATOLOGY_OPTION,
    SPECTRA_OPTION,
    ConditionsRecordSchema,
    OptionsSchema,
    StrictBoolean,
    StrictNumber,
    between,
)
from uvdose.service.wire_formats import rows_from_columns


class IrradianceRecordSchema(ConditionsRecordSchema):
    """One record of ``POST /v1/irradiance``: the shared conditions fields, and a measured
    broadband global horizontal irradiance from which the cloud factor can be derived."""

    measured_ghi_w_m2 = StrictNumber(validate=between(0, 1500), metadata={"units": "W m-2"})

    exclusive_fields = ConditionsRecordSchema.exclusive_fields + (
        ("cloud_modification_factor", "measured_ghi_w_m2"),)


_RECORD_NAMES = IrradianceRecordSchema()
"""Its wire names, for naming the models' record errors."""


class IrradianceOptionsSchema(OptionsSchema):
    """Request-wide options of ``POST /v1/irradiance``."""

    spectra = SPECTRA_OPTION
    include_spectrum = StrictBoolean(load_default=False)
    ozone_climatology = OZONE_CLIMATOLOGY_OPTION


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


def with_cloud_factor_from_measurement(columns: Mapping[str, np.ndarray], ids: np.ndarray) -> dict[str, np.ndarray]:
    """Replace a ``measured_ghi_w_m2`` column by the cloud factor it implies
    (:func:`models.clouds.cmf_from_measured_global_irradiance`), before the cache and the
    engine see the batch. A measurement above 1.5 times the clear-sky value rejects the
    batch (a 422 problem), naming each such record."""
    columns = dict(columns)
    measured = columns.pop("measured_ghi_w_m2", None)
    if measured is None or np.isnan(measured).all():
        return columns
    n = len(measured)
    nan = np.full(n, np.nan)
    with records_named(by_schema(_RECORD_NAMES, ids), n):
        cmf = clouds.cmf_from_measured_global_irradiance(
            measured, columns["time_unix_s"], columns["latitude_deg"], columns["longitude_deg"],
            columns.get("elevation_m", nan), columns.get("pressure_hpa", nan))
    given = columns.get("cloud_modification_factor", nan)
    columns["cloud_modification_factor"] = np.where(np.isnan(given), cmf, given)
    columns["cloud_source"] = clouds.cloud_source(given, measured=cmf)
    return columns


def result_columns(result: Mapping[str, np.ndarray], ids: np.ndarray, spectra: list[str]) -> dict[str, Any]:
    """Flat output columns: id, scalars, one effective irradiance per spectrum, used values.

    The effective irradiances keep the engine's column names (``engine.effective_column``)
    on the wire: flat in CSV, nested under their common prefix in JSON rows. Numbers stay
    float arrays (orjson writes them directly); text columns become lists."""
    out: dict[str, Any] = {"id": ids.tolist()}
    names = list(_SCALAR_OUTPUTS)
    names += [(effective_column(name), effective_column(name)) for name in spectra]
    names += list(_USED_OUTPUTS)
    for wire, column in names:
        values = np.asarray(result[column])
        out[wire] = values.tolist() if values.dtype.kind in "OUS" else np.ascontiguousarray(values, np.float64)
    out.update(uncertainty_fields.irradiance_columns(result, spectra))
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
    body: dict[str, Any] = {"model_version": MODEL_VERSION, "caution": cautions.CAUTION,
                            "figure_cautions": cautions.figure_cautions(spectra), "spectra": spectra,
                            "uncertainty_basis": uncertainty_fields.BASIS}
    if wavelength_nm is not None:
        body["wavelength_nm"] = wavelength_nm
    return body


def csv_columns(columns: Mapping[str, Any], wavelength_nm, spectrum, spectra: list[str]) -> dict[str, list]:
    """Flat columns, one ``spectrum_w_m2_nm.<nm>`` column per wavelength when there is a
    spectrum, and the ``caution`` column last (the caution and those of the ``spectra``)."""
    columns = as_lists(columns)
    if spectrum is not None:
        for index, nm in enumerate(wavelength_nm):
            columns[f"spectrum_w_m2_nm.{nm:g}"] = spectrum[:, index].tolist()
    text = cautions.csv_caution(cautions.CAUTION, cautions.figure_cautions(spectra))
    return cautions.with_caution_column(columns, text)


def result_rows(columns: Mapping[str, Any], spectrum) -> list[dict[str, Any]]:
    """One dict per record, effective irradiance nested under ``effective_w_m2``."""
    columns = as_lists(columns)
    columns["uncertainty"] = uncertainty_fields.nested_column(columns)
    if spectrum is not None:
        columns["spectrum_w_m2_nm"] = spectrum.tolist()
    return rows_from_columns(columns, nest="effective_w_m2")


def compute(gateway: Gateway, columns: Mapping[str, np.ndarray], ids: np.ndarray, spectra: list[str],
            include_spectrum: bool) -> tuple[dict[str, Any], np.ndarray | None, np.ndarray | None]:
    """Validated record columns through the engine; (flat output columns, wavelength_nm, spectrum)."""
    columns = with_cloud_factor_from_measurement(columns, ids)
    result = gateway.irradiance(columns, spectra, include_spectrum)
    wavelength_nm = spectrum = None
    if include_spectrum:
        wavelength_nm, spectrum = spectrum_matrix(result)
    return result_columns(result, ids, spectra), wavelength_nm, spectrum
