"""Cloud modification factors (CMF) for UV irradiance.

A CMF is the ratio of the UV irradiance under the actual sky to the clear-sky value
at the same place and time (the usual definition in the empirical literature, e.g.
Calbó, Pagès & González 2005, "Empirical studies of cloud effects on UV radiation:
A review", Rev. Geophys. 43, RG2002). The engine multiplies the clear-sky direct and
diffuse horizontal spectra alike by the CMF (``models.engine``): a CMF is defined on
the global irradiance, and scaling both parts keeps it so on a horizontal receiver.
On tilted receivers this keeps the clear-sky direct/diffuse split, which is an
approximation: real clouds turn beam into diffuse light.

Three ways to obtain a CMF, each vectorised over records:

* given directly (0–1.5; values above 1 are legitimate broken-cloud enhancement);
* from total cloud cover (fraction or oktas) by the power-law form of Kasten &
  Czeplak (1980), Solar Energy 24:177–189, CMF = 1 − 0.75 C^3.4, derived for global
  solar radiation;
* from a measured broadband global horizontal irradiance: the clear-sky index
  K = GHI_measured / GHI_clear, with GHI_clear from pvlib's simplified Solis model
  (Ineichen 2008, Solar Energy 82:758–762), mapped to UV by CMF_UV = K^p.

Broadband to UV: the choice. Both broadband routes take the UV factor equal to the
broadband one (p = 1). Thiel et al. (1997), Photochem. Photobiol. 65:969–973, compared
erythemally weighted and total global irradiance under the same clouds and found no
statistically significant difference in their attenuation. Josefsson & Landelius
(2000, J. Geophys. Res. 105(D4):4927, from memory) found the cloud effect smaller in the
UV than for global radiation, as do most of the studies reviewed by Calbó, Pagès &
González (2005), "Empirical studies of cloud effects on UV radiation: A review", Rev.
Geophys. 43, RG2002: UV is attenuated less (p below 1, roughly 0.6–0.9 there, from
memory), mostly because thick cloud passes relatively more diffuse short-wave light.
We keep p = 1: it is the one relation of these with a significance test on erythemal
weighting, the difference it makes is well inside the spread of cover-based factors
(Schwander et al. 2002, J. Geophys. Res. 107(D16), 4296: deviations of 50 % and more
from cover alone, mostly below 15 % with a concurrent broadband measurement), and a
client with a better relation can set ``exponent`` or send its own factor. If the
majority of studies is right, the factor errs low (too little UV) under heavy cloud,
so the uncertainty carries the ambiguity: ``models.uncertainty.cloud_relative_sigma``
adds |ln CMF| × 0.2 (a 1-sigma spread of p of 0.2) to the measured spread of each
route, 0.05 + 0.35 C for cover and 0.10 with a measured irradiance.
"""
from __future__ import annotations

import numpy as np
from pvlib import clearsky

from uvdose.models.record_errors import RecordError, RecordErrors, check_records
from uvdose.models.solar_geometry import solar_position, surface_pressure_hpa

CMF_RANGE = (0.0, 1.5)
"""Accepted cloud modification factors. Above 1: broken-cloud enhancement, observed
for minutes at a time (e.g. Feister et al. 2015, Atmosphere 6:1211); 1.5 bounds
what such enhancement reaches in the UV (from memory, common practice)."""

KASTEN_CZEPLAK_A = 0.75
KASTEN_CZEPLAK_B = 3.4
"""Coefficients of CMF = 1 − A·C^B, Kasten & Czeplak (1980), from memory."""

IMPLAUSIBLE_MEASUREMENT = ("is more than 1.5 times the clear-sky global irradiance at that "
                           "place and time: check units and sensor")
"""Why a measured global irradiance implying a CMF above 1.5 is refused."""

MIN_SOLAR_ELEVATION_FOR_CLEAR_SKY_INDEX_DEG = 5.0
"""Below this solar elevation the clear-sky reference is too small for the ratio to mean
anything (common practice, no source); the CMF is NaN there = "not determinable"."""

# Extraterrestrial normal irradiance at 1 AU that the simplified Solis fit is evaluated
# with, W m⁻²: pvlib's default for ``simplified_solis`` (1364), inside the 1361-1367 of
# the solar constants in use; within 0.2 % of the TSI of Kopp & Lean (2011), 1360.8.
SOLIS_EXTRATERRESTRIAL_W_M2 = 1364.0


def cmf_from_value(cloud_modification_factor) -> np.ndarray:
    """Validate client CMFs (N,) in [0, 1.5]; NaN passes through as "not given"."""
    cmf = np.atleast_1d(np.asarray(cloud_modification_factor, dtype=float))
    bad = ~np.isnan(cmf) & ((cmf < CMF_RANGE[0]) | (cmf > CMF_RANGE[1]) | ~np.isfinite(cmf))
    check_records(bad, "cloud_modification_factor", "must be a number in [0, 1.5]", cmf)
    return cmf


def cloud_fraction_from_oktas(oktas) -> np.ndarray:
    """Cloud cover in oktas (whole numbers 0–8) as a fraction of the sky.

    Okta 9 (sky obscured, WMO code) has no cover fraction and is rejected.
    NaN passes through.
    """
    o = np.atleast_1d(np.asarray(oktas, dtype=float))
    given = ~np.isnan(o)
    bad = given & ((o < 0) | (o > 8) | (o != np.round(o)))
    check_records(bad, "cloud_cover_oktas", "must be a whole number 0–8 (9, sky obscured, has no cover)", o)
    return o / 8.0


def cmf_from_cloud_fraction(cloud_fraction, a: float = KASTEN_CZEPLAK_A,
                            b: float = KASTEN_CZEPLAK_B) -> np.ndarray:
    """CMF = 1 − a·C^b for total cloud cover C in [0, 1] (Kasten & Czeplak 1980).

    NaN passes through as "not given".
    """
    c = np.atleast_1d(np.asarray(cloud_fraction, dtype=float))
    bad = ~np.isnan(c) & ((c < 0) | (c > 1))
    check_records(bad, "cloud_cover_fraction", "must be a fraction in [0, 1]", c)
    return 1.0 - a * c ** b


def clear_sky_global_horizontal_w_m2(solar_zenith_deg, pressure_hpa=1013.25,
                                     aod_700=0.1, precipitable_water_cm=1.0,
                                     earth_sun_distance_au=1.0) -> np.ndarray:
    """Broadband clear-sky global horizontal irradiance, W m⁻² (simplified Solis,
    Ineichen 2008, via ``pvlib.clearsky.simplified_solis``); zero with the sun down.

    The extraterrestrial irradiance is ``SOLIS_EXTRATERRESTRIAL_W_M2`` at 1 AU, scaled by
    the inverse square of ``earth_sun_distance_au``: without it the clear sky errs by the
    ±3.4 % of the orbit's eccentricity, high in July and low in January.
    """
    elevation = 90.0 - np.asarray(solar_zenith_deg, dtype=float)
    dni_extra = SOLIS_EXTRATERRESTRIAL_W_M2 / np.asarray(earth_sun_distance_au, dtype=float) ** 2
    ghi = clearsky.simplified_solis(np.clip(elevation, 0.0, 90.0), aod700=aod_700,
                                    precipitable_water=precipitable_water_cm,
                                    pressure=np.asarray(pressure_hpa, dtype=float) * 100.0,
                                    dni_extra=dni_extra)["ghi"]
    return np.where(elevation > 0.0, np.asarray(ghi, dtype=float), 0.0)


def cmf_from_global_irradiance(measured_ghi_w_m2, solar_zenith_deg, pressure_hpa=1013.25,
                               exponent: float = 1.0, earth_sun_distance_au=1.0) -> np.ndarray:
    """UV CMF from a measured broadband global horizontal irradiance (W m⁻²).

    CMF_UV = (GHI_measured / GHI_clear)^exponent, GHI_clear from
    :func:`clear_sky_global_horizontal_w_m2`. NaN where the measurement is NaN or the
    sun is below 5° elevation (not determinable; the engine then applies CMF 1).
    Raises ``RecordErrors`` (``models.record_errors``) for negative measurements and for
    those implying a CMF above 1.5.
    """
    ghi = np.atleast_1d(np.asarray(measured_ghi_w_m2, dtype=float))
    zenith = np.broadcast_to(np.asarray(solar_zenith_deg, dtype=float), ghi.shape)
    check_records(~np.isnan(ghi) & ((ghi < 0) | ~np.isfinite(ghi)), "measured_ghi_w_m2",
                  "must be a non-negative number of W m-2", ghi)
    if not 0.0 < exponent <= 2.0:
        raise ValueError(f"exponent must be in (0, 2], got {exponent!r}")
    clear = clear_sky_global_horizontal_w_m2(zenith, pressure_hpa,
                                             earth_sun_distance_au=earth_sun_distance_au)
    usable = (90.0 - zenith) >= MIN_SOLAR_ELEVATION_FOR_CLEAR_SKY_INDEX_DEG
    index = np.where(usable, ghi / np.where(usable, clear, 1.0), np.nan)
    cmf = index ** exponent
    check_records(np.nan_to_num(cmf, nan=0.0) > CMF_RANGE[1], "measured_ghi_w_m2",
                  IMPLAUSIBLE_MEASUREMENT, ghi)
    return cmf


def cmf_from_measured_global_irradiance(measured_ghi_w_m2, time_unix_s, latitude_deg, longitude_deg,
                                        elevation_m, pressure_hpa, exponent: float = 1.0):
    """UV CMF per record from a measured broadband GHI (W m⁻²) at a place and time.

    The same relation as :func:`cmf_from_global_irradiance`, with the solar zenith from
    ``models.solar_geometry`` (NREL SPA) and the surface pressure resolved as the engine
    resolves it (given, else from elevation). NaN inputs mean "not given".

    Returns the CMF (N,), NaN where no measurement was given or the sun is below 5° (not
    determinable). Measurements above 1.5 times the clear-sky value, which no cloud
    enhancement reaches (``CMF_RANGE``) and which are most likely a unit or sensor error,
    raise ``RecordErrors`` naming every such record (field ``measured_ghi_w_m2``).
    """
    ghi = np.asarray(measured_ghi_w_m2, dtype=float)
    elevation = np.where(np.isnan(elevation_m), 0.0, elevation_m)
    pressure = surface_pressure_hpa(elevation, pressure_hpa)
    sun = solar_position(time_unix_s, latitude_deg, longitude_deg, elevation, pressure)
    zenith = sun.zenith_deg
    usable = ~np.isnan(ghi) & ((90.0 - zenith) >= MIN_SOLAR_ELEVATION_FOR_CLEAR_SKY_INDEX_DEG)
    clear = clear_sky_global_horizontal_w_m2(zenith, pressure, earth_sun_distance_au=sun.earth_sun_distance_au)
    cmf = np.full(ghi.shape, np.nan)
    cmf[usable] = (ghi[usable] / clear[usable]) ** exponent
    check_records(cmf > CMF_RANGE[1], "measured_ghi_w_m2", IMPLAUSIBLE_MEASUREMENT, ghi)
    return cmf


def resolve_cmf(cloud_modification_factor=None, cloud_cover_fraction=None,
                cloud_cover_oktas=None) -> np.ndarray:
    """One CMF per record from whichever cloud input each record gives.

    Each argument is (N,) with NaN = not given, or None. A record that gives more
    than one of them is an error (they could disagree: ``RecordErrors`` naming the last
    one it gives); a record with none gets NaN (the engine's default, CMF 1 = clear sky).
    """
    given = [(name, np.atleast_1d(np.asarray(v, dtype=float)))
             for name, v in (("cloud_modification_factor", cloud_modification_factor),
                             ("cloud_cover_fraction", cloud_cover_fraction),
                             ("cloud_cover_oktas", cloud_cover_oktas)) if v is not None]
    if not given:
        return np.array([np.nan])
    n = given[0][1].shape
    present = np.stack(np.broadcast_arrays(*(~np.isnan(v) for _, v in given)))  # (inputs, N)
    too_many = np.flatnonzero(present.sum(axis=0) > 1)
    if too_many.size:
        last = present.shape[0] - 1 - np.argmax(present[::-1], axis=0)  # each record's last input
        raise RecordErrors(RecordError(i, given[last[i]][0], "is given with another cloud input; "
                                       "give only one") for i in too_many.tolist())
    out = np.full(n, np.nan)
    converters = {"cloud_modification_factor": cmf_from_value,
                  "cloud_cover_fraction": cmf_from_cloud_fraction,
                  "cloud_cover_oktas": lambda v: cmf_from_cloud_fraction(cloud_fraction_from_oktas(v))}
    for name, values in given:
        cmf = converters[name](values)
        out = np.where(np.isnan(values), out, cmf)
    return out


def cloud_source(cloud_modification_factor=None, cloud_cover_fraction=None, cloud_cover_oktas=None,
                 measured=None) -> np.ndarray:
    """Where each record's cloud factor comes from (``models.uncertainty.CLOUD_SOURCES``).

    Each argument (N,) with NaN = not given, or None: ``"factor"`` where a factor is given,
    ``"cover"`` where a cover fraction or oktas are, ``"irradiance"`` where ``measured``
    holds a factor derived from a measured broadband irradiance (NaN where none could be,
    e.g. with the sun below 5°), ``"none"`` otherwise (clear sky).
    """
    given = [np.atleast_1d(np.asarray(v, dtype=float)) for v in
             (cloud_modification_factor, cloud_cover_fraction, cloud_cover_oktas, measured) if v is not None]
    n = given[0].shape if given else (1,)
    out = np.full(n, "none", dtype=object)

    def mark(values, label):
        if values is not None:
            out[~np.isnan(np.atleast_1d(np.asarray(values, dtype=float)))] = label

    mark(measured, "irradiance")
    mark(cloud_cover_fraction, "cover")
    mark(cloud_cover_oktas, "cover")
    mark(cloud_modification_factor, "factor")
    return out
