"""The engine facade: per-record conditions in, UV quantities out.

This is the one entry point the service uses for physics. It runs the pipeline

    solar position ─► pressure, ozone, albedo, aerosol defaults ─► clear-sky spectrum
    ─► clouds ─► receiver orientation ─► glazing/film ─► action-spectrum weighting

on arrays of N records at once. Every optional input is ``NaN`` (or ``""`` for the
surface type) when the client did not give it; the defaults applied here are the
documented ones and the result says which values were used.
"""
from __future__ import annotations

from dataclasses import dataclass, field, fields
from functools import lru_cache
from typing import Mapping, Sequence

import numpy as np

from uvdose.models import MODEL_VERSION, action_spectra, clear_sky, optics, receivers, surfaces, uncertainty, uv_index
from uvdose.models.ozone_grids import OzoneResolver
from uvdose.models.solar_geometry import solar_position, surface_pressure_hpa
from uvdose.models.spectral_grid import WAVELENGTH_NM

DEFAULT_SPECTRA: tuple[str, ...] = ("erythema", "actinic_icnirp", "plant_damage")
"""Spectra weighted when a request names none."""

DEFAULT_SURFACE_ALBEDO = 0.05
"""UV albedo used when neither an albedo nor a surface type is given: green vegetation
and most soils reflect a few per cent of UV (WHO 2002 Practical Guide: grass, soil and
water reflect less than 10 %); 0.05 is common practice, no source."""

EFFECTIVE_PREFIX = "effective_w_m2."
"""Result columns (``EngineResult.as_columns``) of effective irradiance, W m⁻², are named
this prefix plus the action spectrum's name: :func:`effective_column`."""
SPECTRUM_PREFIX = "spectrum_w_m2_nm."
"""Result columns of the spectral irradiance, W m⁻² nm⁻¹, are named this prefix plus the
wavelength's index on ``WAVELENGTH_NM``: :func:`spectrum_column`."""


SIGMA_PREFIX = "relative_sigma."
"""Result columns of the relative 1-sigma uncertainty are named this prefix plus
``<quantity>.<component>``: :func:`sigma_column`."""


def sigma_column(quantity: str, component: str) -> str:
    """Result-column name of ``component``'s relative 1-sigma of ``quantity`` ("uv_index" or
    an action spectrum's name; components in ``models.uncertainty.COMPONENTS``)."""
    return f"{SIGMA_PREFIX}{quantity}.{component}"


def effective_column(spectrum_name: str) -> str:
    """Result-column name of the effective irradiance weighted by ``spectrum_name``."""
    return EFFECTIVE_PREFIX + spectrum_name


def spectrum_column(index: int) -> str:
    """Result-column name of the spectral irradiance at wavelength index ``index``."""
    return f"{SPECTRUM_PREFIX}{index}"


def effective_names(columns: Mapping[str, object]) -> list[str]:
    """Action-spectrum names of the effective-irradiance columns among ``columns``, in order."""
    return [key[len(EFFECTIVE_PREFIX):] for key in columns if key.startswith(EFFECTIVE_PREFIX)]


_BANDS = ("uvb", "uva")
_FLOAT_FIELDS = (
    "time_unix_s",
    "latitude_deg",
    "longitude_deg",
    "elevation_m",
    "pressure_hpa",
    "ozone_du",
    "aod_550",
    "angstrom_exponent",
    "single_scattering_albedo",
    "asymmetry_factor",
    "surface_albedo",
    "cloud_modification_factor",
    "tilt_deg",
    "receiver_azimuth_deg",
    "sky_view_factor",
)


@dataclass(frozen=True)
class Conditions:
    """Inputs of N records, each field an array of shape (N,).

    Times are Unix seconds (UTC); angles in degrees; elevation in metres above sea
    level; pressure in hPa; ozone in Dobson units; aerosol optical depth at 550 nm;
    albedo and cloud modification factor dimensionless. ``NaN`` means "not given".
    """

    time_unix_s: np.ndarray
    latitude_deg: np.ndarray
    longitude_deg: np.ndarray
    elevation_m: np.ndarray
    pressure_hpa: np.ndarray
    ozone_du: np.ndarray
    aod_550: np.ndarray
    angstrom_exponent: np.ndarray
    single_scattering_albedo: np.ndarray
    asymmetry_factor: np.ndarray
    surface_albedo: np.ndarray
    cloud_modification_factor: np.ndarray
    tilt_deg: np.ndarray
    receiver_azimuth_deg: np.ndarray
    sky_view_factor: np.ndarray
    surface_type: np.ndarray = field(default=None)
    cloud_source: np.ndarray = field(default=None)

    @classmethod
    def from_columns(cls, columns: Mapping[str, np.ndarray]) -> "Conditions":
        """Build conditions from a dict of arrays; absent optional keys become NaN/""."""
        n = len(columns["time_unix_s"])
        values = {}
        for name in _FLOAT_FIELDS:
            column = columns.get(name)
            values[name] = (
                np.full(n, np.nan) if column is None else np.asarray(column, dtype=np.float64)
            )
        surface_type = columns.get("surface_type")
        values["surface_type"] = (
            np.full(n, "", dtype=object) if surface_type is None else np.asarray(surface_type, dtype=object)
        )
        cloud_source = columns.get("cloud_source")
        values["cloud_source"] = (
            np.full(n, "", dtype=object) if cloud_source is None else np.asarray(cloud_source, dtype=object)
        )
        for name, column in values.items():
            if column.shape != (n,):
                raise ValueError(f"column {name!r} has shape {column.shape}, expected ({n},)")
        return cls(**values)

    def __len__(self) -> int:
        return len(self.time_unix_s)


@dataclass
class EngineResult:
    """Outputs of N records, each an array of shape (N,) unless stated.

    ``effective_w_m2`` maps action-spectrum name to weighted irradiance (W m⁻²) on the
    receiver, after clouds and any filter. ``uv_index`` is always for a horizontal,
    unfiltered surface under the record's clouds. ``spectrum_w_m2_nm`` is (N, W) on
    ``wavelength_nm`` when asked for, else ``None``.

    ``relative_sigma`` maps ``"<quantity>.<component>"`` to the 1-sigma relative
    uncertainty (N,) of ``uv_index`` and of each effective irradiance (quantity = the
    spectrum name) from each source of ``models.uncertainty.COMPONENTS``; zero where
    the quantity is zero. ``cloud_source`` says where the cloud factor came from
    (``models.uncertainty.CLOUD_SOURCES``; ``"none"``: clear sky, an upper bound),
    ``ozone_relative_sigma`` the relative 1-sigma of the ozone column used.
    """

    solar_zenith_deg: np.ndarray
    solar_azimuth_deg: np.ndarray
    earth_sun_distance_au: np.ndarray
    uv_index: np.ndarray
    exposure_category: np.ndarray
    effective_w_m2: dict[str, np.ndarray]
    uvb_w_m2: np.ndarray
    uva_w_m2: np.ndarray
    ozone_du: np.ndarray
    ozone_source: np.ndarray
    pressure_hpa: np.ndarray
    surface_albedo: np.ndarray
    cloud_modification_factor: np.ndarray
    cloud_source: np.ndarray
    ozone_relative_sigma: np.ndarray
    relative_sigma: dict[str, np.ndarray]
    spectrum_w_m2_nm: np.ndarray | None = None
    wavelength_nm: np.ndarray = field(default_factory=lambda: WAVELENGTH_NM)
    model_version: str = MODEL_VERSION

    _NESTED = ("effective_w_m2", "relative_sigma")

    def components_of(self, quantity: str) -> dict[str, np.ndarray]:
        """The relative 1-sigma components of ``quantity`` ("uv_index" or a spectrum name)."""
        return {component: self.relative_sigma[f"{quantity}.{component}"]
                for component in uncertainty.COMPONENTS}

    def as_columns(self) -> dict[str, np.ndarray]:
        """Flatten to a dict of (N,) arrays: effective values under :func:`effective_column`
        names, spectrum columns under :func:`spectrum_column` names, the rest by field name."""
        columns: dict[str, np.ndarray] = {}
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name in self._NESTED:
                for name, column in value.items():
                    columns[effective_column(name) if f.name == "effective_w_m2" else SIGMA_PREFIX + name] = column
            elif f.name == "spectrum_w_m2_nm":
                if value is not None:
                    for index in range(value.shape[1]):
                        columns[spectrum_column(index)] = value[:, index]
            elif f.name not in ("wavelength_nm", "model_version"):
                columns[f.name] = value
        return columns

    @classmethod
    def from_columns(cls, columns: Mapping[str, np.ndarray]) -> "EngineResult":
        """Inverse of :meth:`as_columns`."""
        effective = {name: columns[effective_column(name)] for name in effective_names(columns)}
        sigma = {key[len(SIGMA_PREFIX):]: value for key, value in columns.items() if key.startswith(SIGMA_PREFIX)}
        spectrum_keys = sorted(
            (key for key in columns if key.startswith(SPECTRUM_PREFIX)),
            key=lambda key: int(key[len(SPECTRUM_PREFIX):]),
        )
        spectrum = np.column_stack([columns[key] for key in spectrum_keys]) if spectrum_keys else None
        plain = {
            f.name: columns[f.name]
            for f in fields(cls)
            if f.name not in (*cls._NESTED, "spectrum_w_m2_nm", "wavelength_nm", "model_version")
        }
        return cls(effective_w_m2=effective, relative_sigma=sigma, spectrum_w_m2_nm=spectrum, **plain)


@lru_cache(maxsize=16)
def _weights(names: tuple[str, ...]) -> np.ndarray:
    return action_spectra.weight_matrix(names, WAVELENGTH_NM)


def _given(values: np.ndarray, default: float | np.ndarray) -> np.ndarray:
    return np.where(np.isnan(values), default, values)


def _surface_albedo(conditions: Conditions) -> np.ndarray:
    albedo = np.full(len(conditions), DEFAULT_SURFACE_ALBEDO)
    typed = conditions.surface_type != ""
    if typed.any():
        albedo[typed] = surfaces.albedo_for(conditions.surface_type[typed])
    return _given(conditions.surface_albedo, albedo)


def _cloud_source(conditions: Conditions) -> np.ndarray:
    """Each record's cloud source: as given, else "factor" with a factor, "none" without."""
    given = conditions.cloud_source.astype(str) != ""
    inferred = np.where(np.isnan(conditions.cloud_modification_factor), "none", "factor").astype(object)
    return np.where(given, conditions.cloud_source, inferred).astype(object)


def _relative_sigma(c: Conditions, zenith_deg, ozone_du, ozone_sigma, aod_550, surface_albedo, cloud_source, cmf,
                    transmittance, weights, names, requested, values) -> dict[str, np.ndarray]:
    """Relative 1-sigma components of the UV Index and the requested effective irradiances
    (``models.uncertainty``), keyed ``"<quantity>.<component>"``."""
    columns = [0, *(names.index(name) for name in requested)]  # the UV Index's erythema first
    chosen = weights[:, columns].copy()
    if transmittance is not None:
        # A filter weights the spectra it stands in front of (per-record curves by their mean).
        curve = np.asarray(transmittance, dtype=float)
        chosen[:, 1:] *= (curve if curve.ndim == 1 else curve.mean(axis=0))[:, None]
    sensitivities = uncertainty.weighted_sensitivities(zenith_deg, ozone_du, chosen, surface_albedo)
    typed = c.surface_type != ""
    components = uncertainty.record_components(
        sensitivities, ozone_sigma, aod_550, uncertainty.aerosol_log_sigma(c.aod_550),
        surface_albedo, uncertainty.albedo_log_sigma(c.surface_albedo, surface_albedo, typed),
        uncertainty.cloud_relative_sigma(cloud_source, cmf), zenith_deg)
    out = {}
    for index, quantity in enumerate(("uv_index", *requested)):
        lit = np.asarray(values[quantity]) > 0.0
        for component, sigma in components.items():
            out[f"{quantity}.{component}"] = np.where(lit, sigma[:, index], 0.0)
    return out


def compute(
    conditions: Conditions,
    spectra: Sequence[str] = DEFAULT_SPECTRA,
    include_spectrum: bool = False,
    transmittance: np.ndarray | None = None,
    ozone_resolver: OzoneResolver | None = None,
    method: str = "auto",
    full_solve_budget: clear_sky.FullSolveBudget | None = None,
) -> EngineResult:
    """Compute UV quantities for N records.

    Parameters
    ----------
    conditions : per-record inputs (see :class:`Conditions`).
    spectra : action-spectrum names from ``models.action_spectra.ACTION_SPECTRA``.
    include_spectrum : also return the spectral irradiance on the receiver (W m⁻² nm⁻¹).
    transmittance : spectral transmittance of a glazing or film on ``WAVELENGTH_NM``,
        shape (W,) or (N, W); ``None`` for an unobstructed receiver.
    ozone_resolver : where ozone comes from when a record gives none; ``None`` means the
        embedded climatology alone (``OzoneResolver()``; operator grids enter only here).
    method : clear-sky method, see :func:`models.clear_sky.spectral_irradiance`.
    full_solve_budget : bounds the records sent to the full solve (see
        :class:`models.clear_sky.FullSolveBudget`); ``None`` for no bound.
    """
    c = conditions
    elevation_m = _given(c.elevation_m, 0.0)
    pressure_hpa = surface_pressure_hpa(elevation_m, c.pressure_hpa)
    sun = solar_position(c.time_unix_s, c.latitude_deg, c.longitude_deg, elevation_m, pressure_hpa)

    resolver = ozone_resolver if ozone_resolver is not None else OzoneResolver()
    ozone_du, ozone_source = resolver.resolve(c.latitude_deg, c.longitude_deg, c.time_unix_s, c.ozone_du)
    surface_albedo = _surface_albedo(c)
    aod_550 = _given(c.aod_550, optics.DEFAULT_AOD_550)

    # The radiative transfer takes the beam's direction at the top of the atmosphere (the
    # true zenith, models.atmosphere); receivers and the reported position the apparent one.
    sky = clear_sky.spectral_irradiance(
        sun.true_zenith_deg,
        sun.earth_sun_distance_au,
        ozone_du,
        pressure_hpa,
        surface_albedo,
        aod_550,
        _given(c.angstrom_exponent, optics.DEFAULT_ANGSTROM_EXPONENT),
        _given(c.single_scattering_albedo, optics.DEFAULT_SINGLE_SCATTERING_ALBEDO),
        _given(c.asymmetry_factor, optics.DEFAULT_ASYMMETRY_FACTOR),
        method=method,
        full_solve_budget=full_solve_budget,
    )
    # The cloud modification factor scales direct and diffuse alike (see models.clouds).
    cmf = _given(c.cloud_modification_factor, 1.0)
    direct = sky.direct_horizontal_w_m2_nm * cmf[:, None]
    diffuse = sky.diffuse_horizontal_w_m2_nm * cmf[:, None]
    horizontal = direct + diffuse

    names = tuple(dict.fromkeys(("erythema", *spectra, *_BANDS)))
    weights = _weights(names)
    erythemal_horizontal = horizontal @ weights[:, 0]

    tilt_deg = _given(c.tilt_deg, 0.0)
    sky_view = _given(c.sky_view_factor, 1.0)
    on_receiver = horizontal
    if np.any(tilt_deg != 0.0) or np.any(sky_view != 1.0):
        on_receiver = receivers.receiver_spectral_irradiance(
            direct,
            diffuse,
            sun.zenith_deg,
            sun.azimuth_deg,
            tilt_deg,
            _given(c.receiver_azimuth_deg, 180.0),
            sky_view,
            surface_albedo,
        )
    if transmittance is not None:
        on_receiver = on_receiver * transmittance

    effective = on_receiver @ weights
    by_name = {name: effective[:, index] for index, name in enumerate(names)}
    uvi = uv_index.uv_index(erythemal_horizontal)

    cloud_source = _cloud_source(c)
    ozone_sigma = resolver.relative_sigma(ozone_source, c.latitude_deg, c.longitude_deg, c.time_unix_s)
    requested = list(dict.fromkeys(spectra))
    relative_sigma = _relative_sigma(
        c, sun.true_zenith_deg, ozone_du, ozone_sigma, aod_550, surface_albedo, cloud_source, cmf,
        transmittance, weights, names, requested,
        {"uv_index": uvi, **{name: by_name[name] for name in requested}})
    return EngineResult(
        solar_zenith_deg=sun.zenith_deg,
        solar_azimuth_deg=sun.azimuth_deg,
        earth_sun_distance_au=sun.earth_sun_distance_au,
        uv_index=uvi,
        exposure_category=uv_index.exposure_category(uvi),
        effective_w_m2={name: by_name[name] for name in dict.fromkeys(spectra)},
        uvb_w_m2=by_name["uvb"],
        uva_w_m2=by_name["uva"],
        ozone_du=ozone_du,
        ozone_source=ozone_source,
        pressure_hpa=pressure_hpa,
        surface_albedo=surface_albedo,
        cloud_modification_factor=cmf,
        cloud_source=cloud_source,
        ozone_relative_sigma=ozone_sigma,
        relative_sigma=relative_sigma,
        spectrum_w_m2_nm=on_receiver if include_spectrum else None,
    )
