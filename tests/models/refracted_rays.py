"""Refracted solar rays through the layered standard atmosphere: a test-only reference.

Ray optics in a spherically symmetric atmosphere: along a ray the Bouguer invariant
``p = n r sin(theta)`` is constant (theta the local zenith angle of the ray, r the
distance from the Earth's centre, n the refractive index), the path element is
``ds = n r dr / sqrt(n^2 r^2 - p^2)`` and the bending from the start point to space is
``int -(p / n) (dn/dr) / sqrt(n^2 r^2 - p^2) dr`` (e.g. Thomas & Joseph 1996, *Ann.
Geophys.*; the formulation behind the air-mass tables of Kasten & Young 1989, *Appl. Opt.*
28:4735).

Refractive index: ``n - 1`` proportional to the air number density of the AFGL 1986 U.S.
Standard profile (``models.atmosphere``), 2.902e-4 for standard air (15 °C, 1013.25 hPa)
at 310 nm by the dispersion formula of Edlén (1966), *Metrologia* 2:71 (2.83e-4 to
2.93e-4 over 280-400 nm; one value is used for all wavelengths).

It gives, per level of the engine's layers, the path of the refracted ray reaching that
level on the site's vertical from a sun at a given true (airless) zenith angle, in the
form ``models.atmosphere.beam_path_factors`` returns, so that the engine's solver can
run on it; and the refracted relative air mass at the surface, which the tests hold to
Kasten & Young (1989).
"""
from __future__ import annotations

import numpy as np

from uvdose.models import atmosphere

STANDARD_AIR_REFRACTIVITY = 2.902e-4
"""n - 1 of standard air at 310 nm (Edlén 1966), 15 °C and 1013.25 hPa."""
STANDARD_AIR_NUMBER_DENSITY_CM3 = 2.5469e19
"""Air molecules per cm³ at 15 °C and 1013.25 hPa (Loschmidt's number times 273.15/288.15)."""
_POINTS = 20000
_TOP_KM = 100.0


def refractive_index(altitude_km):
    """Refractive index of air at ``altitude_km`` (standard profile density)."""
    profile = atmosphere.standard_profile()
    density = np.exp(np.interp(altitude_km, profile.altitude_km,
                               np.log(profile.air_number_density_cm3)))
    return 1.0 + STANDARD_AIR_REFRACTIVITY * density / STANDARD_AIR_NUMBER_DENSITY_CM3


def _rays(start_km, local_zenith_deg):
    """Bending (deg) and cumulative path (km) on the altitude grid of rays leaving
    ``start_km`` (K,) upwards at ``local_zenith_deg`` (K,) (at most 90)."""
    start = np.asarray(start_km, float)[:, None]
    # Points cluster at the start, where a grazing ray's integrand is singular.
    s = np.linspace(0.0, 1.0, _POINTS + 1)[None, :]
    z = start + (_TOP_KM - start) * s ** 2
    mid = 0.5 * (z[:, 1:] + z[:, :-1])
    dz = np.diff(z, axis=1)
    n = refractive_index(mid)
    dn_dz = (refractive_index(mid + 1e-3) - refractive_index(mid - 1e-3)) / 2e-3
    radius = atmosphere.EARTH_RADIUS_KM + mid
    p = (refractive_index(start) * (atmosphere.EARTH_RADIUS_KM + start)
         * np.sin(np.radians(np.asarray(local_zenith_deg, float)))[:, None])
    root = np.sqrt(np.maximum(n * n * radius * radius - p * p, 1e-30))
    bending = np.degrees(np.sum(-(p / n) * dn_dz / root * dz, axis=1))
    path = np.concatenate([np.zeros((z.shape[0], 1)),
                           np.cumsum(n * radius / root * dz, axis=1)], axis=1)
    return bending, z, path


def true_zenith_deg(apparent_zenith_deg):
    """True zenith of a sun seen at ``apparent_zenith_deg`` from the surface, (K,)."""
    apparent = np.atleast_1d(np.asarray(apparent_zenith_deg, float))
    bending, _, _ = _rays(np.zeros_like(apparent), apparent)
    return apparent + bending


def relative_air_mass(apparent_zenith_deg):
    """Air column along the refracted surface ray over the vertical column, (K,)."""
    apparent = np.atleast_1d(np.asarray(apparent_zenith_deg, float))
    _, z, path = _rays(np.zeros_like(apparent), apparent)
    profile = atmosphere.standard_profile()
    density = np.exp(np.interp(z, profile.altitude_km, np.log(profile.air_number_density_cm3)))
    slant = np.sum(0.5 * (density[:, 1:] + density[:, :-1]) * np.diff(path, axis=1), axis=1)
    vertical = np.sum(0.5 * (density[:, 1:] + density[:, :-1]) * np.diff(z, axis=1), axis=1)
    return slant / vertical


def level_path_factors(true_zenith):
    """Refracted beam through the engine's layers for a sun at ``true_zenith`` (< 90 deg):
    ``(factors (L + 1, L), local_zenith_deg (L + 1,))``, the path of the ray reaching each
    level through each layer over the layer's thickness, and its local zenith there."""
    layers = atmosphere.standard_layers()
    levels = np.concatenate([layers.top_km, layers.bottom_km[-1:]])
    low = np.full(levels.size, true_zenith - 2.0)
    high = np.full(levels.size, min(true_zenith, 90.0))
    for _ in range(40):  # bisection on the local zenith: local + bending = true
        middle = 0.5 * (low + high)
        bending, _, _ = _rays(levels, middle)
        too_low = middle + bending < true_zenith
        low, high = np.where(too_low, middle, low), np.where(too_low, high, middle)
    local = 0.5 * (low + high)
    _, z, path = _rays(levels, local)
    factors = np.zeros((levels.size, layers.count))
    for i in range(levels.size):
        at = np.interp(np.clip(np.concatenate([layers.top_km, layers.bottom_km[-1:]]),
                               levels[i], _TOP_KM), z[i], path[i])
        factors[i] = np.where(layers.bottom_km >= levels[i] - 1e-9,
                              (at[:-1] - at[1:]) / layers.thickness_km, 0.0)
    return factors, local
