"""The engine's wavelength grid and the extraterrestrial solar spectrum on it.

Grid
    ``WAVELENGTH_NM`` = 280, 281, ..., 400 nm (W = 121). Each grid value stands for the
    1 nm bin centred on it, [λ − 0.5, λ + 0.5] nm; spectral quantities on the grid are
    bin averages in W m⁻² nm⁻¹ (or cm² for cross sections).

Extraterrestrial spectrum
    ASTM G173-03 "Standard Tables for Reference Solar Spectral Irradiances", extraterrestrial
    column (derived by ASTM from Gueymard's 2002 compilation), at the mean Earth–Sun
    distance of 1 AU, as shipped by pvlib (``pvlib.spectrum.get_reference_spectra``).
    Between 280 and 400 nm the table is tabulated every 0.5 nm. The bin average is the
    exact integral of the table's piecewise-linear interpolant over the bin divided by the
    bin width; the first bin is cut at 280 nm, where the table starts (the half bin below
    it lies in the UVC, where the spectrum is 0.08 W m⁻² nm⁻¹ and falling).

Band integrals
    ``band_quadrature_weights(lower_nm, upper_nm)`` gives trapezoidal-rule weights in nm on
    the grid points (1 nm inside the band, 0.5 nm at the two limits), so that
    ``spectrum @ weights`` integrates a spectrum over the band in W m⁻². UVB (280–315 nm)
    and UVA (315–400 nm) follow the CIE band limits; their weights sum to the trapezoidal
    weights of the whole grid, so UVB + UVA equals the 280–400 nm integral.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

WAVELENGTH_NM = np.arange(280, 401).astype(float)
"""Grid wavelengths in nm, 280–400 at 1 nm (W = 121)."""
WAVELENGTH_NM.setflags(write=False)

BIN_WIDTH_NM = 1.0
"""Width of each wavelength bin in nm."""

UVB_BAND_NM = (280.0, 315.0)
"""UVB band limits in nm (CIE)."""

UVA_BAND_NM = (315.0, 400.0)
"""UVA band limits in nm (CIE)."""


def bin_average(table_wavelength_nm, table_values, wavelength_nm=WAVELENGTH_NM,
                bin_width_nm=BIN_WIDTH_NM):
    """Average a tabulated curve over 1 nm bins centred on ``wavelength_nm``.

    The curve is taken as the piecewise-linear interpolant of the table, integrated
    exactly over each bin [λ − w/2, λ + w/2] clipped to the table's range, and divided
    by the clipped bin width. Returns an array shaped like ``wavelength_nm``.
    """
    x = np.asarray(table_wavelength_nm, dtype=float)
    y = np.asarray(table_values, dtype=float)
    centres = np.asarray(wavelength_nm, dtype=float)
    lower = np.clip(centres - bin_width_nm / 2, x[0], x[-1])
    upper = np.clip(centres + bin_width_nm / 2, x[0], x[-1])
    cumulative = np.concatenate([[0.0], np.cumsum(0.5 * (y[1:] + y[:-1]) * np.diff(x))])

    def integral_to(point):
        index = np.clip(np.searchsorted(x, point, side="right") - 1, 0, len(x) - 2)
        x0, y0 = x[index], y[index]
        slope = (y[index + 1] - y0) / (x[index + 1] - x0)
        dx = point - x0
        return cumulative[index] + y0 * dx + 0.5 * slope * dx * dx

    return (integral_to(upper) - integral_to(lower)) / (upper - lower)


@lru_cache(maxsize=1)
def _extraterrestrial_on_grid() -> np.ndarray:
    from pvlib.spectrum import get_reference_spectra

    table = get_reference_spectra(standard="ASTM G173-03")
    values = bin_average(table.index.to_numpy(dtype=float),
                         table["extraterrestrial"].to_numpy(dtype=float))
    values.setflags(write=False)
    return values


def extraterrestrial_spectrum_w_m2_nm() -> np.ndarray:
    """ASTM G173-03 extraterrestrial spectral irradiance at 1 AU, W m⁻² nm⁻¹, shape (W,).

    Bin-averaged onto ``WAVELENGTH_NM`` (see the module docstring). Scale by
    1 / d² (d in AU) for the date. The returned array is read-only.
    """
    return _extraterrestrial_on_grid()


def band_quadrature_weights(lower_nm: float, upper_nm: float,
                            wavelength_nm=WAVELENGTH_NM) -> np.ndarray:
    """Trapezoidal-rule weights in nm for integrating over [lower_nm, upper_nm].

    ``lower_nm`` and ``upper_nm`` must be grid points. Weight 1 nm for points strictly
    inside the band, 0.5 nm at the two limits, 0 outside. ``spectrum @ weights`` is the
    band integral (W m⁻² for a spectrum in W m⁻² nm⁻¹).
    """
    wl = np.asarray(wavelength_nm, dtype=float)
    step = np.gradient(wl) if wl.size > 1 else np.ones_like(wl)
    inside = (wl >= lower_nm) & (wl <= upper_nm)
    if not np.any(np.isclose(wl, lower_nm)) or not np.any(np.isclose(wl, upper_nm)):
        raise ValueError(f"band limits {lower_nm}–{upper_nm} nm must lie on the grid")
    weights = np.where(inside, step, 0.0)
    weights[np.isclose(wl, lower_nm)] *= 0.5
    weights[np.isclose(wl, upper_nm)] *= 0.5
    return weights


def band_mask(lower_nm: float, upper_nm: float, wavelength_nm=WAVELENGTH_NM) -> np.ndarray:
    """Boolean mask of grid points with lower_nm <= λ <= upper_nm."""
    wl = np.asarray(wavelength_nm, dtype=float)
    return (wl >= lower_nm) & (wl <= upper_nm)


UVB_WEIGHTS_NM = band_quadrature_weights(*UVB_BAND_NM)
"""Trapezoidal weights (nm) for the UVB integral, 280–315 nm."""
UVB_WEIGHTS_NM.setflags(write=False)

UVA_WEIGHTS_NM = band_quadrature_weights(*UVA_BAND_NM)
"""Trapezoidal weights (nm) for the UVA integral, 315–400 nm."""
UVA_WEIGHTS_NM.setflags(write=False)


def band_integral_w_m2(spectrum_w_m2_nm, lower_nm: float, upper_nm: float,
                       wavelength_nm=WAVELENGTH_NM) -> np.ndarray:
    """Integral of spectra ``(..., W)`` over a band, W m⁻² (trapezoidal rule on the grid)."""
    return np.asarray(spectrum_w_m2_nm) @ band_quadrature_weights(lower_nm, upper_nm,
                                                                   wavelength_nm)
