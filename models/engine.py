"""The engine facade: per-record conditions in, UV quantities out.

This is the one entry point the service uses for physics. It runs the pipeline

    solar position ─► pressure, ozone, albedo, aerosol defaults ─► clear-sky spectrum
    ─► clouds ─► receiver orientation ─► glazing/film ─► action-spectrum weighting

on arrays of N records at once. Every optional input is ``NaN`` (or ``""`` for the
surface type) when the client did not give it; the defaults applied here are the
documented ones and the result says which values were used.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass, field, fields
from typing import Callable, Mapping, Sequence

import numpy as np

from uvdose.models import MODEL_VERSION, clear_sky, optics, receivers, surfaces, uncertainty, uv_index
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


TRANSFER_STATE_COLUMNS: tuple[str, ...] = (
    "true_zenith_deg",
    "ozone_du",
    "pressure_hpa",
    "surface_albedo",
    "aod_550",
    "angstrom_exponent",
    "single_scattering_albedo",
    "asymmetry_factor",
)
"""The inputs of the radiative transfer of one record (its *physics state*): the true
(airless) solar zenith the transfer uses (``models.atmosphere``, "Which zenith angle"), the total ozone, the surface pressure, the surface albedo and
the aerosol (optical depth at 550 nm, Ångström exponent, single scattering albedo,
asymmetry factor), every default applied. Two records with the same state get the same
horizontal irradiance per unit extraterrestrial irradiance, wherever and whenever they
are; the Earth–Sun distance, the cloud factor and the receiver's orientation then act
on it linearly (:func:`compute`)."""

TransferMemo = Callable[[str, Mapping[str, np.ndarray], Callable[[Mapping[str, np.ndarray]],
                                                                 dict[str, np.ndarray]]],
                        dict[str, np.ndarray]]
"""``memo(description, state, transfer) -> columns``: how a caller may keep transfer
results. ``state`` holds the :data:`TRANSFER_STATE_COLUMNS` of N records, ``transfer``
computes the transfer columns of any such state columns, ``description`` names
everything besides the state that its results depend on (weights, filter, method). The
memo must return what ``transfer(state)`` returns, for every record, or values the caller
computed with ``transfer`` for states it treats as the same (e.g. a cache that rounds
each state column to a stated step)."""

DIRECT_PREFIX = "direct_w_m2."
"""Transfer columns of weighted direct horizontal irradiance: this prefix + spectrum name."""
DIFFUSE_PREFIX = "diffuse_w_m2."
"""Transfer columns of weighted diffuse horizontal irradiance: this prefix + spectrum name."""
OPEN_SKY_ERYTHEMA = "global_w_m2.open_sky_erythema"
"""Transfer column of the unfiltered erythemal global horizontal irradiance (UV Index)."""
SPECTRAL_DIRECT_PREFIX = "direct_w_m2_nm."
"""Transfer columns of direct horizontal spectral irradiance: prefix + wavelength index."""
SPECTRAL_DIFFUSE_PREFIX = "diffuse_w_m2_nm."
"""Transfer columns of diffuse horizontal spectral irradiance: prefix + wavelength index."""


def is_spectral_column(name: str) -> bool:
    """Whether a result or transfer column holds one wavelength of a spectrum."""
    return name.startswith((SPECTRUM_PREFIX, SPECTRAL_DIRECT_PREFIX, SPECTRAL_DIFFUSE_PREFIX))


@dataclass(frozen=True)
class TransferPlan:
    """What the transfer of one engine call returns, per record and at 1 AU under a
    clear sky on a horizontal surface.

    ``spectral``: the direct and diffuse spectra (then the filter, the receiver and the
    weights are applied per record afterwards); otherwise the direct and diffuse
    integrals weighted by ``names`` behind ``transmittance`` (W,), plus the open-sky
    (unfiltered) erythemal global irradiance for the UV Index.
    """

    names: tuple[str, ...]
    transmittance: np.ndarray | None
    spectral: bool
    method: str

    def description(self) -> str:
        """Text naming everything the transfer columns depend on besides the state."""
        if self.spectral:
            return f"transfer:spectral;method={self.method}"
        curve = "none"
        if self.transmittance is not None:
            data = np.ascontiguousarray(self.transmittance, dtype=np.float64).tobytes()
            curve = hashlib.sha256(data).hexdigest()[:20]
        return f"transfer:weighted;names={','.join(self.names)};filter={curve};method={self.method}"

    def run(self, state: Mapping[str, np.ndarray], full_solve_budget=None) -> dict[str, np.ndarray]:
        """The transfer columns of ``state`` (see the class docstring)."""
        arguments = [np.asarray(state[name], dtype=np.float64) for name in TRANSFER_STATE_COLUMNS]
        zenith, ozone, pressure, albedo, aod, alpha, ssa, g = arguments
        if self.spectral:
            sky = clear_sky.spectral_irradiance(zenith, 1.0, ozone, pressure, albedo, aod, alpha, ssa,
                                                g, method=self.method,
                                                full_solve_budget=full_solve_budget)
            columns = {}
            for prefix, spectrum in ((SPECTRAL_DIRECT_PREFIX, sky.direct_horizontal_w_m2_nm),
                                     (SPECTRAL_DIFFUSE_PREFIX, sky.diffuse_horizontal_w_m2_nm)):
                columns.update({f"{prefix}{i}": spectrum[:, i] for i in range(spectrum.shape[1])})
            return columns
        direct, diffuse, open_sky = clear_sky.weighted_irradiance(
            zenith, ozone, pressure, albedo, aod, alpha, ssa, g, self.names,
            transmittance=self.transmittance, method=self.method,
            full_solve_budget=full_solve_budget)
        columns = {}
        for index, name in enumerate(self.names):
            columns[DIRECT_PREFIX + name] = direct[:, index]
            columns[DIFFUSE_PREFIX + name] = diffuse[:, index]
        columns[OPEN_SKY_ERYTHEMA] = open_sky
        return columns


def transfer_state(conditions: Conditions, ozone_resolver: OzoneResolver | None = None):
    """Solar position, the physics state and the per-record factors of N records.

    Returns ``(sun, state, ozone_source, cloud_modification_factor)``: the
    ``models.solar_geometry.SolarPosition`` for each record's own time and place, the
    :data:`TRANSFER_STATE_COLUMNS` as a dict of (N,) arrays (defaults applied), the
    source label of each record's ozone and its cloud modification factor (1 unless given).
    """
    c = conditions
    elevation_m = _given(c.elevation_m, 0.0)
    pressure_hpa = surface_pressure_hpa(elevation_m, c.pressure_hpa)
    sun = solar_position(c.time_unix_s, c.latitude_deg, c.longitude_deg, elevation_m, pressure_hpa)
    resolver = ozone_resolver if ozone_resolver is not None else OzoneResolver()
    ozone_du, ozone_source = resolver.resolve(c.latitude_deg, c.longitude_deg, c.time_unix_s, c.ozone_du)
    state = {
        "true_zenith_deg": sun.true_zenith_deg,
        "ozone_du": ozone_du,
        "pressure_hpa": pressure_hpa,
        "surface_albedo": _surface_albedo(c),
        "aod_550": _given(c.aod_550, optics.DEFAULT_AOD_550),
        "angstrom_exponent": _given(c.angstrom_exponent, optics.DEFAULT_ANGSTROM_EXPONENT),
        "single_scattering_albedo": _given(c.single_scattering_albedo,
                                           optics.DEFAULT_SINGLE_SCATTERING_ALBEDO),
        "asymmetry_factor": _given(c.asymmetry_factor, optics.DEFAULT_ASYMMETRY_FACTOR),
    }
    return sun, state, ozone_source, _given(c.cloud_modification_factor, 1.0)


def compute(
    conditions: Conditions,
    spectra: Sequence[str] = DEFAULT_SPECTRA,
    include_spectrum: bool = False,
    transmittance: np.ndarray | None = None,
    ozone_resolver: OzoneResolver | None = None,
    method: str = "auto",
    full_solve_budget: clear_sky.FullSolveBudget | None = None,
    transfer_memo: TransferMemo | None = None,
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
    transfer_memo : keeps transfer results between calls (see :data:`TransferMemo`);
        ``None`` computes the transfer of every record.

    Method
    ------
    The solar position is computed for every record's own time and place. The radiative
    transfer depends on the record's physics state only (:data:`TRANSFER_STATE_COLUMNS`)
    and gives the horizontal direct and diffuse irradiance at 1 AU under a clear sky
    (:class:`TransferPlan`). Everything else acts on it linearly and exactly, per record:
    the Earth–Sun distance (1/d²), the cloud modification factor (direct and diffuse
    alike, see ``models.clouds``), the receiver's orientation (isotropic transposition,
    ``models.receivers``: a weighted integral of the receiver's irradiance is the same
    combination of the horizontal direct and diffuse weighted integrals) and a filter
    (folded into the weights).
    """
    resolver = ozone_resolver if ozone_resolver is not None else OzoneResolver()
    sun, state, ozone_source, cmf = transfer_state(conditions, resolver)
    c = conditions
    names = tuple(dict.fromkeys(("erythema", *spectra, *_BANDS)))
    curve = None if transmittance is None else np.asarray(transmittance, dtype=np.float64)
    spectral = include_spectrum or (curve is not None and curve.ndim == 2)
    plan = TransferPlan(names, None if spectral else curve, spectral, method)

    def transfer(part: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
        return plan.run(part, full_solve_budget)

    if transfer_memo is None:
        horizontal = transfer(state)
    else:
        horizontal = transfer_memo(plan.description(), state, transfer)

    scale = cmf / sun.earth_sun_distance_au ** 2
    tilt_deg = _given(c.tilt_deg, 0.0)
    sky_view = _given(c.sky_view_factor, 1.0)
    tilted = bool(np.any(tilt_deg != 0.0) or np.any(sky_view != 1.0))
    if tilted:
        f_direct, f_diffuse, f_ground = receivers.transposition_factors(
            sun.zenith_deg, sun.azimuth_deg, tilt_deg, _given(c.receiver_azimuth_deg, 180.0),
            sky_view, state["surface_albedo"])
        f_direct, f_diffuse = f_direct + f_ground, f_diffuse + f_ground

    spectrum = None
    if spectral:
        direct = np.column_stack([horizontal[f"{SPECTRAL_DIRECT_PREFIX}{i}"] for i in range(WAVELENGTH_NM.size)])
        diffuse = np.column_stack([horizontal[f"{SPECTRAL_DIFFUSE_PREFIX}{i}"] for i in range(WAVELENGTH_NM.size)])
        direct *= scale[:, None]
        diffuse *= scale[:, None]
        weights = clear_sky.grid_weights(names)
        erythemal_horizontal = (direct + diffuse) @ weights[:, 0]
        on_receiver = (direct * f_direct[:, None] + diffuse * f_diffuse[:, None]) if tilted else direct + diffuse
        if curve is not None:
            on_receiver = on_receiver * curve
        effective = on_receiver @ weights
        by_name = {name: effective[:, index] for index, name in enumerate(names)}
        spectrum = on_receiver if include_spectrum else None
    else:
        by_name = {}
        for name in names:
            direct_part = horizontal[DIRECT_PREFIX + name]
            diffuse_part = horizontal[DIFFUSE_PREFIX + name]
            on_receiver = (direct_part * f_direct + diffuse_part * f_diffuse) if tilted else direct_part + diffuse_part
            by_name[name] = on_receiver * scale
        erythemal_horizontal = horizontal[OPEN_SKY_ERYTHEMA] * scale

    uvi = uv_index.uv_index(erythemal_horizontal)

    cloud_source = _cloud_source(c)
    ozone_sigma = resolver.relative_sigma(ozone_source, c.latitude_deg, c.longitude_deg, c.time_unix_s)
    requested = list(dict.fromkeys(spectra))
    relative_sigma = _relative_sigma(
        c, sun.true_zenith_deg, state["ozone_du"], ozone_sigma, state["aod_550"], state["surface_albedo"],
        cloud_source, cmf, transmittance, clear_sky.grid_weights(names), names, requested,
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
        ozone_du=state["ozone_du"],
        ozone_source=ozone_source,
        pressure_hpa=state["pressure_hpa"],
        surface_albedo=state["surface_albedo"],
        cloud_modification_factor=cmf,
        cloud_source=cloud_source,
        ozone_relative_sigma=ozone_sigma,
        relative_sigma=relative_sigma,
        spectrum_w_m2_nm=spectrum,
    )
