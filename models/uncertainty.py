"""Estimated uncertainty of the engine's answers: by source, per record, and for doses.

Every figure here is a **1-sigma relative uncertainty** (a fractional standard
deviation of the true value about the answer, in ln): the true value lies inside
[v·exp(−1.645 s), v·exp(+1.645 s)] about nine times in ten (``interval``), and inside
[v·exp(−s), v·exp(+s)] about two times in three for a normal error (somewhat more for
the default aerosol's heavy-tailed one; measured in ``tests/models/test_uncertainty.py``).
Components are independent and add in quadrature (``combined``):

``ozone``
    RAF × relative ozone sigma. The radiation amplification factor RAF = −d ln E /
    d ln Ω of each weighted quantity comes from the engine itself
    (:func:`weighted_sensitivities`: central differences of the engine's clear-sky
    spectrum on a small zenith × ozone grid, weighted per action spectrum, interpolated
    per record). The ozone
    sigma depends on where the column came from (``models.ozone_grids``): a client
    value, a daily operator grid, or a climatology with its day-to-day variability.
``aerosol``
    |d ln E / d AOD(550)| × the standard deviation of a log-normal AOD about the one
    used: ln-sigma ``DEFAULT_AOD_LOG_SIGMA`` for the default, 10 % (at least 0.02
    absolute) for a given value.
``clouds``
    :func:`cloud_relative_sigma` of the cloud source kind: a given factor, cloud cover,
    a measured broadband irradiance, or none (then the answer is the clear-sky value:
    an upper bound apart from minutes of broken-cloud enhancement, and no sigma is
    given for clouds; ``CLEAR_SKY_UPPER_BOUND`` says so).
``surface_albedo``
    |d ln E / d ln a| × the sigma of ln a (default, surface type, or given).
``model``
    The transfer's own error against 16-stream DISORT and the precomputed table's
    interpolation error, by solar zenith (``model_relative_sigma``), and the spread of
    the extraterrestrial spectrum and cross sections.
``cache``
    Added by the service when a value comes from a rounded physics state (its cache;
    ``CACHE_RELATIVE_SIGMA``).

A dose sums samples whose errors are correlated: one ozone column and one cloud state
per day, one aerosol, albedo and model error per window. :func:`dose_relative_sigma`
adds, per component, the absolute errors of samples that share a group before
squaring, and the squares of independent groups.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Mapping

import numpy as np

COMPONENTS = ("ozone", "aerosol", "clouds", "surface_albedo", "model", "cache")
"""Names of the uncertainty components, in the order responses list them."""

INTERVAL_90_FACTOR = 1.645
"""Half-width of a 90 % interval in sigmas (standard normal, two-sided)."""

# --- ozone --------------------------------------------------------------------------
CLIENT_OZONE_SIGMA = 0.03
"""Relative sigma of a client's total ozone: ground-based Dobson/Brewer and satellite
daily columns agree within about 2-3 % (WMO GAW reports; from memory)."""
DAILY_GRID_OZONE_SIGMA = 0.03
"""Relative sigma of an operator's daily gridded column at a record (retrieval plus the
grid's spatial and temporal interpolation; from memory)."""

# --- aerosol ------------------------------------------------------------------------
DEFAULT_AOD_LOG_SIGMA = 0.7
"""1-sigma of ln AOD(550) about the default 0.1 of ``models.optics``: clean continental
sites see 0.03-0.3 on nine days in ten (AERONET climatologies; from memory), i.e.
ln(0.3/0.03) / (2 × 1.645) = 0.70. The single scattering albedo's spread is not carried
separately."""
CLIENT_AOD_RELATIVE_SIGMA = 0.10
CLIENT_AOD_MIN_SIGMA = 0.02
"""A client's AOD(550): 10 % of the value, at least 0.02 absolute (sun-photometer AOD is
good to about 0.01-0.02; an AOD interpolated to 550 nm or forecast is less certain;
from memory)."""

# --- surface albedo -------------------------------------------------------------------
DEFAULT_ALBEDO_LOG_SIGMA = 0.45
"""1-sigma of ln(albedo) about the default 0.05: most natural surfaces reflect 0.02-0.10
of UV (WHO 2002 Practical Guide), taken as a 90 % range: ln(0.10/0.024) / 3.29."""
TYPED_ALBEDO_LOG_SIGMA = 0.25
"""A surface type's albedo: 25 % (wetness, age and roughness; e.g. snow 0.5-0.9; from
memory)."""
CLIENT_ALBEDO_SIGMA = 0.02
"""Absolute sigma of a client's albedo (from memory, common practice)."""

# --- clouds -------------------------------------------------------------------------
CLOUD_SOURCES = ("none", "factor", "cover", "irradiance")
"""Where a record's cloud modification factor came from: not given (clear sky), given
as a factor, from total cloud cover, from a measured broadband global irradiance."""
CLEAR_SKY_UPPER_BOUND = "none"
CLIENT_CMF_SIGMA = 0.05
"""A client's own cloud modification factor, e.g. from a UV radiometer beside a
clear-sky model (from memory, common practice)."""
COVER_CMF_SIGMA_CLEAR = 0.05
COVER_CMF_SIGMA_PER_COVER = 0.35
"""Cloud cover alone: relative sigma 0.05 + 0.35 C for cover fraction C. Schwander et
al. (2002, J. Geophys. Res. 107(D16), 4296; volume from memory) found the actual cloud
modification factor deviating by 50 % and more from the cover-based estimate, worst
under broken and overcast skies; 0.40 at overcast puts 50 % at about 1.2 sigma (the
coefficients are ours)."""
IRRADIANCE_CMF_SIGMA = 0.10
"""From a concurrent broadband global irradiance: Schwander et al. (2002) found
deviations mostly below 15 %, i.e. about 1.5 sigma for 10 %."""
UV_TO_BROADBAND_EXPONENT_SIGMA = 0.2
"""Spread of the exponent p in CMF_UV = CMF_broadband^p. Thiel et al. (1997,
Photochem. Photobiol. 65:969) found no significant difference (p = 1, the service's
choice); Josefsson & Landelius (2000, J. Geophys. Res. 105(D4):4927, from memory) and most
studies of the review of Calbó, Pagès & González (2005, Rev. Geophys. 43, RG2002) found UV
attenuated
less than total irradiance (p below 1, about 0.6-0.9 there; from memory). The
ambiguity enters the sigma as |ln CMF| × 0.2."""

# --- model and cache ----------------------------------------------------------------
MODEL_ZENITH_NODES_DEG = np.array([0.0, 65.0, 80.0, 86.0, 88.0, 90.0, 94.0, 96.0])
MODEL_TRANSFER_SIGMA = np.array([0.01, 0.01, 0.015, 0.03, 0.04, 0.04, 0.08, 0.10])
"""The engine (table as served) against 16-stream pseudo-spherical DISORT, by true solar
zenith, the worst of the UV Index, plant-weighted and UVB/UVA integrals at sea level,
3600 m and over snow (measured, tests/models/test_low_sun.py and README "Low sun"):
within 1 % up to 65°, 1.5 % at 80°, 3.0 % at 86°, 4.0 % at 88°; in civil twilight 4 % at
90° and 8 % at 94° (UVB-weighted; the UV Index within 3.3 %) against finely layered
DISORT; 10 % at 96°, where the reference itself fails (extrapolated, no measurement)."""
MODEL_TABLE_SIGMA = 0.006
"""The precomputed table within 1 % of the full solve (measured): a uniform error of
±1 % has sigma 0.58 %."""
MODEL_INPUT_SIGMA = 0.02
"""Extraterrestrial spectrum (ASTM G173) and ozone cross sections in the UV, about
2 % (from memory)."""
CACHE_RELATIVE_SIGMA = {"uv_index": 0.0029, "effective": 0.0029}
"""Error of a value computed on a rounded physics state (the service's cache,
``service.cache.CACHE_ERROR_BOUND``): the UV Index and weighted quantities within 0.5 %
(measured, README "Cache"); a uniform error of ±0.5 % has this sigma."""

# --- sensitivity grid -----------------------------------------------------------------
_ZENITH_NODES_DEG = np.array([0.0, 10.0, 20.0, 30.0, 40.0, 50.0, 55.0, 60.0, 65.0, 70.0,
                              74.0, 78.0, 81.0, 84.0, 86.0, 88.0, 89.5])
_OZONE_NODES_DU = np.array([150.0, 200.0, 250.0, 300.0, 350.0, 400.0, 450.0, 520.0])
_OZONE_STEP = 0.05
"""Central differences in ln Ω with Ω(1 ± 5 %)."""
_AOD_STEP = 0.05
_ALBEDO_STEP = 0.05
_REFERENCE = {"pressure_hpa": 1013.25, "aod_550": 0.1, "surface_albedo": 0.05}


def interval(value, relative_sigma, factor: float = INTERVAL_90_FACTOR):
    """(low, high) = value·exp(∓factor·sigma): the log-normal interval of ``factor`` sigmas."""
    value = np.asarray(value, dtype=float)
    sigma = np.asarray(relative_sigma, dtype=float)
    return value * np.exp(-factor * sigma), value * np.exp(factor * sigma)


def combined(components: Mapping[str, np.ndarray]) -> np.ndarray:
    """Quadrature sum of independent relative sigmas."""
    return np.sqrt(sum(np.square(np.asarray(v, dtype=float)) for v in components.values()))


# ------------------------------------------------------------------ per-source sigmas
def aerosol_log_sigma(aod_550_given) -> np.ndarray:
    """1-sigma of ln AOD(550) per record: the default's where NaN, else the client's."""
    aod = np.asarray(aod_550_given, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        client = np.maximum(CLIENT_AOD_RELATIVE_SIGMA, CLIENT_AOD_MIN_SIGMA / np.nan_to_num(aod))
    return np.where(np.isnan(aod), DEFAULT_AOD_LOG_SIGMA, np.minimum(client, DEFAULT_AOD_LOG_SIGMA))


def albedo_log_sigma(surface_albedo_given, surface_albedo_used, typed) -> np.ndarray:
    """1-sigma of ln(surface UV albedo) per record: given, from a surface type, or default."""
    given = ~np.isnan(np.asarray(surface_albedo_given, dtype=float))
    used = np.asarray(surface_albedo_used, dtype=float)
    if used.ndim > 1:
        used = used.mean(axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        client = np.minimum(CLIENT_ALBEDO_SIGMA / used, DEFAULT_ALBEDO_LOG_SIGMA)
    return np.where(given, client,
                    np.where(np.asarray(typed, dtype=bool), TYPED_ALBEDO_LOG_SIGMA, DEFAULT_ALBEDO_LOG_SIGMA))


def cloud_relative_sigma(cloud_source, cloud_modification_factor) -> np.ndarray:
    """1-sigma relative uncertainty of the cloud modification factor, by its source.

    ``cloud_source`` (N,) of :data:`CLOUD_SOURCES`; ``cloud_modification_factor`` (N,)
    the factor used. ``"none"`` gives 0: the answer is the clear-sky value, an upper
    bound rather than an estimate with a sigma. ``"cover"`` inverts Kasten & Czeplak
    (``models.clouds``) for the cover fraction C and gives 0.05 + 0.35 C; ``"factor"``
    0.05; ``"irradiance"`` 0.10. Cover and irradiance add the UV-versus-broadband
    ambiguity |ln CMF| × 0.2 in quadrature (see the constants for the sources).
    Another engineer's cloud input (e.g. a measured irradiance time series) gets its
    sigma here by passing its kind.

    References
    ----------
    .. [1] Schwander, H., Koepke, P., Kaifel, A. and Seckmeyer, G. (2002). Modification
       of spectral UV irradiance by clouds. J. Geophys. Res. 107(D16), 4296 (authors and
       volume from memory).
    .. [2] Thiel, S., Steiner, K. and Seidlitz, H. K. (1997). Modification of global
       erythemally effective irradiance by clouds. Photochem. Photobiol. 65, 969-973
       (authors from memory).
    .. [3] Calbó, J., Pagès, D. and González, J.-A. (2005). Empirical studies of cloud
       effects on UV radiation: A review. Rev. Geophys. 43, RG2002.
    .. [4] Kasten, F. and Czeplak, G. (1980). Solar and terrestrial radiation dependent
       on the amount and type of cloud. Solar Energy 24, 177-189.
    """
    from uvdose.models.clouds import KASTEN_CZEPLAK_A, KASTEN_CZEPLAK_B

    source = np.asarray(cloud_source, dtype=object)
    cmf = np.asarray(cloud_modification_factor, dtype=float)
    unknown = ~np.isin(source, CLOUD_SOURCES)
    if unknown.any():
        i = int(np.flatnonzero(unknown)[0])
        raise ValueError(f"record {i}: unknown cloud source {source[i]!r}; expected one of {CLOUD_SOURCES}")
    ambiguity = UV_TO_BROADBAND_EXPONENT_SIGMA * np.abs(np.log(np.clip(cmf, 0.05, None)))
    cover = np.clip((1.0 - np.clip(cmf, 0.0, 1.0)) / KASTEN_CZEPLAK_A, 0.0, 1.0) ** (1.0 / KASTEN_CZEPLAK_B)
    by_cover = np.hypot(COVER_CMF_SIGMA_CLEAR + COVER_CMF_SIGMA_PER_COVER * cover, ambiguity)
    by_irradiance = np.hypot(IRRADIANCE_CMF_SIGMA, ambiguity)
    out = np.zeros(cmf.shape)
    out = np.where(source == "factor", CLIENT_CMF_SIGMA, out)
    out = np.where(source == "cover", by_cover, out)
    return np.where(source == "irradiance", by_irradiance, out)


def model_relative_sigma(solar_zenith_deg) -> np.ndarray:
    """The model's own 1-sigma error by solar zenith: transfer, table and inputs combined."""
    transfer = np.interp(np.asarray(solar_zenith_deg, dtype=float), MODEL_ZENITH_NODES_DEG,
                         MODEL_TRANSFER_SIGMA)
    return np.sqrt(transfer ** 2 + MODEL_TABLE_SIGMA ** 2 + MODEL_INPUT_SIGMA ** 2)


# ------------------------------------------------------------- engine sensitivities
@dataclass(frozen=True)
class SpectralSensitivityGrid:
    """Clear-sky global horizontal spectra and their log-derivatives, (Z, O, W).

    ``global_w_m2_nm``: the spectrum; ``d_ln_ozone``: d ln E(λ) / d ln Ω; ``d_aod``:
    d ln E(λ) / d AOD(550); ``d_albedo``: d ln E(λ) / d a; on ``zenith_nodes_deg`` ×
    ``ozone_nodes_du``, at sea level, the default aerosol type and AOD 0.1, albedo 0.05,
    1 AU. Zero where the sun is down.
    """

    zenith_nodes_deg: np.ndarray
    ozone_nodes_du: np.ndarray
    global_w_m2_nm: np.ndarray
    d_ln_ozone: np.ndarray
    d_aod: np.ndarray
    d_albedo: np.ndarray

    def weighted(self, weights) -> dict[str, np.ndarray]:
        """Log-derivatives of the weighted quantities on the grid, (Z, O, S), for
        action-spectrum weights (W, S): each spectral log-derivative averaged with
        w_s(λ) E(λ)."""
        weights = np.asarray(weights, dtype=float)
        total = self.global_w_m2_nm @ weights
        safe = np.where(total > 0.0, total, 1.0)
        return {name: np.where(total > 0.0, ((self.global_w_m2_nm * field_) @ weights) / safe, 0.0)
                for name, field_ in (("d_ln_ozone", self.d_ln_ozone), ("d_aod", self.d_aod),
                                     ("d_albedo", self.d_albedo))}


@lru_cache(maxsize=1)
def sensitivity_grid() -> SpectralSensitivityGrid:
    """Central differences of ``models.clear_sky.spectral_irradiance`` (table path), once
    per process (about 0.1 s)."""
    from uvdose.models import clear_sky, optics

    zenith, ozone = np.meshgrid(_ZENITH_NODES_DEG, _OZONE_NODES_DU, indexing="ij")
    zenith, ozone = zenith.ravel(), ozone.ravel()
    n = zenith.size

    def global_flux(ozone_du, aod, albedo):
        sky = clear_sky.spectral_irradiance(
            zenith, np.ones(n), ozone_du, np.full(n, _REFERENCE["pressure_hpa"]),
            np.full(n, albedo), np.full(n, aod), np.full(n, optics.DEFAULT_ANGSTROM_EXPONENT),
            np.full(n, optics.DEFAULT_SINGLE_SCATTERING_ALBEDO),
            np.full(n, optics.DEFAULT_ASYMMETRY_FACTOR), method="auto")
        return sky.global_horizontal_w_m2_nm

    def log_flux(*arguments):
        return np.log(np.maximum(global_flux(*arguments), 1e-300))

    aod, albedo = _REFERENCE["aod_550"], _REFERENCE["surface_albedo"]
    d_ln_ozone = (log_flux(ozone * (1 + _OZONE_STEP), aod, albedo)
                  - log_flux(ozone * (1 - _OZONE_STEP), aod, albedo)) / (
        np.log(1 + _OZONE_STEP) - np.log(1 - _OZONE_STEP))
    d_aod = (log_flux(ozone, aod + _AOD_STEP, albedo) - log_flux(ozone, aod - _AOD_STEP, albedo)) / (2 * _AOD_STEP)
    d_albedo = (log_flux(ozone, aod, albedo + _ALBEDO_STEP)
                - log_flux(ozone, aod, albedo - _ALBEDO_STEP)) / (2 * _ALBEDO_STEP)
    shape = (_ZENITH_NODES_DEG.size, _OZONE_NODES_DU.size, -1)
    spectrum = global_flux(ozone, aod, albedo)
    lit = spectrum > 0.0
    return SpectralSensitivityGrid(
        _ZENITH_NODES_DEG, _OZONE_NODES_DU, spectrum.reshape(shape),
        *(np.where(lit, d, 0.0).reshape(shape) for d in (d_ln_ozone, d_aod, d_albedo)))


def _bilinear(grid: np.ndarray, x_nodes, y_nodes, x, y) -> np.ndarray:
    """Bilinear interpolation of grid (X, Y, S) at (N,) points, ends held: (N, S)."""
    def bracket(nodes, values):
        values = np.clip(values, nodes[0], nodes[-1])
        i = np.clip(np.searchsorted(nodes, values, side="right") - 1, 0, nodes.size - 2)
        return i, (values - nodes[i]) / (nodes[i + 1] - nodes[i])

    i, wx = bracket(x_nodes, np.asarray(x, dtype=float))
    j, wy = bracket(y_nodes, np.asarray(y, dtype=float))
    wx, wy = wx[:, None], wy[:, None]
    return ((1 - wx) * ((1 - wy) * grid[i, j] + wy * grid[i, j + 1])
            + wx * ((1 - wy) * grid[i + 1, j] + wy * grid[i + 1, j + 1]))


def weighted_sensitivities(solar_zenith_deg, ozone_du, weights, surface_albedo=None) -> dict[str, np.ndarray]:
    """Log-derivatives of weighted quantities of N records: RAF, aerosol and albedo slopes.

    ``weights`` (W, S): action-spectrum weights (times a filter's transmittance where a
    filter stands in front of the receiver). Returns (N, S) arrays: ``raf`` =
    −d ln E_s / d ln Ω, ``d_aod`` = d ln E_s / d AOD(550), ``d_albedo`` = d ln E_s / d a;
    from :func:`sensitivity_grid` weighted per spectrum on the grid, then bilinear in
    solar zenith and ozone. The clear-sky global spectrum's shape stands for the
    record's own (clouds scale it uniformly; a tilted receiver's direct-to-diffuse mix
    is not followed). The albedo slope follows the record's albedo a through
    d ln E/d a = S/(1 − a S) (Tanré et al. 1979; S the sky's spherical albedo implied by
    the slope at a = 0.05).

    References
    ----------
    .. [1] Tanré, D., Herman, M., Deschamps, P. Y. and de Leffe, A. (1979). Atmospheric
       modeling for space measurements of ground reflectances, including bidirectional
       properties. Appl. Opt. 18, 3587-3594.
    .. [2] Madronich, S. (1993). The atmosphere and UV-B radiation at ground level. In:
       Environmental UV Photobiology, Plenum, 1-39 (the radiation amplification factor;
       from memory).
    """
    grid = sensitivity_grid()
    weighted = grid.weighted(weights)
    out = {name: _bilinear(field_, grid.zenith_nodes_deg, grid.ozone_nodes_du, solar_zenith_deg, ozone_du)
           for name, field_ in weighted.items()}
    raf = -out.pop("d_ln_ozone")
    slope = out["d_albedo"]
    if surface_albedo is not None:
        reference = _REFERENCE["surface_albedo"]
        spherical = slope / (1.0 + reference * slope)
        albedo = np.asarray(surface_albedo, dtype=float)
        albedo = albedo[:, None] if albedo.ndim == 1 else np.mean(albedo, axis=-1, keepdims=True)
        slope = spherical / (1.0 - albedo * spherical)
    return {"raf": raf, "d_aod": out["d_aod"], "d_albedo": slope}


def _lognormal_spread(log_sigma):
    """Standard deviation of a log-normal variable with median 1 and log-sigma ``log_sigma``:
    irradiance falls exponentially with the AOD itself, so its log follows the AOD's
    spread, which for a wide log-normal exceeds the log-sigma (0.70 -> 1.02)."""
    variance = np.exp(np.square(log_sigma))
    return np.sqrt(variance * (variance - 1.0))


def record_components(sensitivities: Mapping[str, np.ndarray], ozone_relative_sigma, aod_550, aod_log_sigma,
                      surface_albedo, albedo_log_sigma_, cloud_sigma, solar_zenith_deg) -> dict[str, np.ndarray]:
    """Relative 1-sigma components (N, S) of S weighted quantities of N records.

    ``sensitivities`` from :func:`weighted_sensitivities`; the other inputs (N,): the
    relative sigma of the ozone column, the AOD(550) used and the sigma of its log, the
    albedo used and the sigma of its log, the cloud factor's relative sigma. The
    ``cache`` component is zero here (the service sets it for cached values).
    """
    raf = np.asarray(sensitivities["raf"])
    zeros = np.zeros(raf.shape)

    def column(values):
        values = np.asarray(values, dtype=float)
        return (values if values.ndim == 1 else values.mean(axis=-1))[:, None]

    return {
        "ozone": np.abs(raf) * column(ozone_relative_sigma),
        "aerosol": np.abs(sensitivities["d_aod"]) * column(aod_550) * _lognormal_spread(column(aod_log_sigma)),
        "clouds": zeros + column(cloud_sigma),
        "surface_albedo": np.abs(sensitivities["d_albedo"]) * column(surface_albedo) * column(albedo_log_sigma_),
        "model": zeros + column(model_relative_sigma(solar_zenith_deg)),
        "cache": zeros,
    }


# ---------------------------------------------------------------------------- doses
CORRELATION_GROUPS = {"ozone": "day", "clouds": "day", "aerosol": "window",
                      "surface_albedo": "window", "model": "window", "cache": "sample"}
"""Over which samples each component's error is shared within a dose: one ozone column
and one cloud state per UTC day; one aerosol, albedo and model error per window (a
bias, not noise); cache-cell errors independent per sample."""


def dose_relative_sigma(owner, time_unix_s, contribution_j_m2, components: Mapping[str, np.ndarray],
                        n_windows: int) -> dict[str, np.ndarray]:
    """Relative 1-sigma components (K,) of K window doses from their samples.

    ``owner`` (M,) window index of each sample, ``time_unix_s`` (M,), ``contribution_j_m2``
    (M,) each sample's share of its dose (quadrature weight × rate), ``components``
    {name: (M,)} relative sigmas of the rate. For each component, absolute errors of the
    samples of one correlation group (``CORRELATION_GROUPS``) add linearly, groups add
    in quadrature; the result is divided by the window's dose (0 for a zero dose).
    """
    owner = np.asarray(owner, dtype=np.int64)
    contribution = np.asarray(contribution_j_m2, dtype=float)
    dose = np.bincount(owner, weights=contribution, minlength=n_windows)
    day = np.floor(np.asarray(time_unix_s, dtype=float) / 86400.0).astype(np.int64)
    out = {}
    for name, sigma in components.items():
        error = contribution * np.asarray(sigma, dtype=float)
        kind = CORRELATION_GROUPS.get(name, "window")
        if kind == "window":
            variance = np.bincount(owner, weights=error, minlength=n_windows) ** 2
        elif kind == "sample":
            variance = np.bincount(owner, weights=error ** 2, minlength=n_windows)
        else:
            keys, group = np.unique(np.stack([owner, day]), axis=1, return_inverse=True)
            per_group = np.bincount(group.ravel(), weights=error)
            variance = np.bincount(keys[0], weights=per_group ** 2, minlength=n_windows)
        out[name] = np.where(dose > 0.0, np.sqrt(variance) / np.where(dose > 0.0, dose, 1.0), 0.0)
    return out


def running_total_relative_sigma(daily_dose_j_m2, daily_sigma: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Relative 1-sigma components (F, D) of running totals of daily doses (F, D).

    Components shared within a day or a sample (``CORRELATION_GROUPS`` ``"day"`` and
    ``"sample"``) are independent from day to day and add in quadrature; the
    window-wide ones (a bias) add linearly. Zero where the running total is zero.
    """
    dose = np.asarray(daily_dose_j_m2, dtype=float)
    running = np.cumsum(dose, axis=-1)
    safe = np.where(running > 0.0, running, 1.0)
    out = {}
    for name, sigma in daily_sigma.items():
        error = dose * np.asarray(sigma, dtype=float)
        if CORRELATION_GROUPS.get(name, "window") == "window":
            spread = np.cumsum(error, axis=-1)
        else:
            spread = np.sqrt(np.cumsum(error ** 2, axis=-1))
        out[name] = np.where(running > 0.0, spread / safe, 0.0)
    return out
