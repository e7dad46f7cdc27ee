"""Layered standard atmosphere for the UV radiative transfer, and the beam path through it.

Profile
    AFGL 1986 U.S. Standard atmosphere (Anderson et al. 1986, *AFGL Atmospheric
    Constituent Profiles (0–120 km)*, AFGL-TR-86-0110), 50 levels from 0 to 120 km,
    extracted once from the PyPI package joseki into ``models/data/afgl_us_standard.csv``
    by ``models/data/build_afgl_us_standard.py``. Its ozone column is 345.7 DU.

Layers
    27 layers between 0 and 100 km, 1 km thick up to 6 km, 2 km to 30 km (the ozone peak
    lies near 22 km), then 3–20 km above; listed top to bottom (the solver's order). Air
    and ozone columns per layer are integrals of the number densities, interpolated
    log-linearly in altitude between the profile's levels (exponential within each
    interval), on a 10 m grid. The 0.00003 % of air and the trace of ozone above 100 km
    are left out and the column fractions renormalised to 1.

Scaling to a record
    * Ozone: the record's total column (DU) is spread over the layers with the standard
      profile's shape, ``ozone_du × ozone_column_fraction``.
    * Air: the Rayleigh optical depth of every layer is scaled by p / 1013.25 hPa, the
      profile shape being kept (the alternative, cutting the profile at the site's
      altitude, gives the same total Rayleigh depth for a site whose pressure follows the
      standard atmosphere; scaling also holds for a client-given pressure that does not).
      The beam geometry keeps the sea-level Earth radius; for a 3 km site this changes
      the ozone slant path by under 0.01 % at zenith angles below 85° (measured).
    * Temperatures: each layer carries the ozone-weighted mean temperature of the
      standard profile, used for the temperature dependence of the ozone cross sections.

Beam path (pseudo-spherical)
    ``beam_air_mass`` returns, per layer, the length of the straight solar ray through the
    spherical shell between the layer's bounding altitudes, on its way to the surface
    point, divided by the layer thickness (Earth radius 6371 km, no refraction bending).
    For thin layers this equals 1 / cos of the local zenith angle at mid-layer; it stays
    finite at 90°. Valid for solar zenith angles 0–90°; larger angles are treated as 90°
    here (the clear-sky code returns zero irradiance for them anyway).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np

EARTH_RADIUS_KM = 6371.0
"""Mean Earth radius used for the spherical-shell beam geometry, km."""

STANDARD_PRESSURE_HPA = 1013.25
"""Reference surface pressure of the Rayleigh optical depth, hPa (Bodhaine et al. 1999)."""

DOBSON_UNIT_CM2 = 2.686763e16
"""Molecules per cm² in one Dobson unit (0.01 mm of pure ozone at 273.15 K, 1013.25 hPa)."""

LAYER_BOUNDARIES_KM = np.array([
    100.0, 80.0, 70.0, 60.0, 50.0, 45.0, 40.0, 36.0, 33.0, 30.0, 28.0, 26.0, 24.0, 22.0,
    20.0, 18.0, 16.0, 14.0, 12.0, 10.0, 8.0, 6.0, 5.0, 4.0, 3.0, 2.0, 1.0, 0.0,
])
"""Layer boundaries, km above the surface, top to bottom (L + 1 = 28 values)."""
LAYER_BOUNDARIES_KM.setflags(write=False)

PROFILE_FILE = Path(__file__).with_name("data") / "afgl_us_standard.csv"
_INTEGRATION_STEP_KM = 0.01


@dataclass(frozen=True)
class StandardProfile:
    """The AFGL 1986 U.S. Standard levels as read from the data file."""

    altitude_km: np.ndarray
    pressure_hpa: np.ndarray
    temperature_k: np.ndarray
    air_number_density_cm3: np.ndarray
    ozone_number_density_cm3: np.ndarray


@dataclass(frozen=True)
class StandardLayers:
    """Per-layer quantities of the standard atmosphere, each shape (L,), top to bottom.

    ``air_column_fraction`` and ``ozone_column_fraction`` each sum to 1.
    ``ozone_temperature_k`` is the ozone-weighted mean temperature of the layer.
    ``total_ozone_du`` is the unscaled profile's column between 0 and 100 km.
    """

    top_km: np.ndarray
    bottom_km: np.ndarray
    air_column_fraction: np.ndarray
    ozone_column_fraction: np.ndarray
    ozone_temperature_k: np.ndarray
    air_temperature_k: np.ndarray
    total_ozone_du: float
    total_air_column_cm2: float

    @property
    def count(self) -> int:
        return self.top_km.size

    @property
    def thickness_km(self) -> np.ndarray:
        return self.top_km - self.bottom_km

    @property
    def mid_km(self) -> np.ndarray:
        return 0.5 * (self.top_km + self.bottom_km)


def read_data_table(path: Path) -> tuple[list[str], np.ndarray]:
    """Read one of the ``models/data`` CSV tables: '#' provenance lines, a header, numbers.

    Returns the column names and the values, shape (rows, columns).
    """
    with open(path) as handle:
        lines = [line for line in handle if line.strip() and not line.startswith("#")]
    names = lines[0].strip().split(",")
    data = np.loadtxt(lines[1:], delimiter=",", ndmin=2)
    return names, data


@lru_cache(maxsize=1)
def standard_profile() -> StandardProfile:
    """Read ``models/data/afgl_us_standard.csv`` (AFGL 1986 U.S. Standard)."""
    _, data = read_data_table(PROFILE_FILE)
    columns = [np.ascontiguousarray(data[:, i]) for i in range(5)]
    for column in columns:
        column.setflags(write=False)
    return StandardProfile(*columns)


@lru_cache(maxsize=1)
def standard_layers() -> StandardLayers:
    """Integrate the standard profile over ``LAYER_BOUNDARIES_KM`` (see module docstring)."""
    profile = standard_profile()
    top = LAYER_BOUNDARIES_KM[:-1].copy()
    bottom = LAYER_BOUNDARIES_KM[1:].copy()
    fine_km = np.linspace(0.0, LAYER_BOUNDARIES_KM[0],
                          int(round(LAYER_BOUNDARIES_KM[0] / _INTEGRATION_STEP_KM)) + 1)
    air = np.exp(np.interp(fine_km, profile.altitude_km, np.log(profile.air_number_density_cm3)))
    ozone = np.exp(np.interp(fine_km, profile.altitude_km,
                             np.log(profile.ozone_number_density_cm3)))
    temperature = np.interp(fine_km, profile.altitude_km, profile.temperature_k)

    def layer_integrals(density):
        # Cumulative trapezoid, read at the boundaries: columns in cm⁻² (km → cm is 1e5).
        cumulative = np.concatenate([[0.0], np.cumsum(
            0.5 * (density[1:] + density[:-1]) * np.diff(fine_km) * 1e5)])
        at_top = np.interp(top, fine_km, cumulative)
        at_bottom = np.interp(bottom, fine_km, cumulative)
        return at_top - at_bottom

    air_columns = layer_integrals(air)
    ozone_columns = layer_integrals(ozone)
    ozone_temperature = layer_integrals(ozone * temperature) / ozone_columns
    air_temperature = layer_integrals(air * temperature) / air_columns
    layers = StandardLayers(
        top_km=top,
        bottom_km=bottom,
        air_column_fraction=air_columns / air_columns.sum(),
        ozone_column_fraction=ozone_columns / ozone_columns.sum(),
        ozone_temperature_k=ozone_temperature,
        air_temperature_k=air_temperature,
        total_ozone_du=float(ozone_columns.sum() / DOBSON_UNIT_CM2),
        total_air_column_cm2=float(air_columns.sum()),
    )
    for name in ("top_km", "bottom_km", "air_column_fraction", "ozone_column_fraction",
                 "ozone_temperature_k", "air_temperature_k"):
        getattr(layers, name).setflags(write=False)
    return layers


def ozone_layer_columns_du(ozone_du, layers: StandardLayers | None = None) -> np.ndarray:
    """Ozone column of each layer, DU, shape (N, L): the total column spread by profile shape."""
    layers = layers or standard_layers()
    return np.asarray(ozone_du, dtype=float)[:, None] * layers.ozone_column_fraction[None, :]


def pressure_scale(pressure_hpa) -> np.ndarray:
    """Ratio of the record's surface pressure to 1013.25 hPa, shape (N,)."""
    return np.asarray(pressure_hpa, dtype=float) / STANDARD_PRESSURE_HPA


def exponential_layer_fraction(scale_height_km: float,
                               layers: StandardLayers | None = None) -> np.ndarray:
    """Fraction of a column whose density falls as exp(−z / H) that lies in each layer, (L,).

    Normalised over 0–100 km, so the fractions sum to 1.
    """
    layers = layers or standard_layers()
    above_bottom = np.exp(-layers.bottom_km / scale_height_km)
    above_top = np.exp(-layers.top_km / scale_height_km)
    share = above_bottom - above_top
    return share / share.sum()


def beam_air_mass(solar_zenith_deg, layers: StandardLayers | None = None) -> np.ndarray:
    """Slant-to-vertical path ratio of the direct solar beam in each layer, shape (N, L).

    Spherical-shell geometry (radius ``EARTH_RADIUS_KM``) for a straight ray ending at the
    surface: the chord between radii R + z_top and R + z_bottom at impact parameter
    R sin θ, divided by z_top − z_bottom. Zenith angles above 90° are treated as 90°.
    """
    layers = layers or standard_layers()
    zenith_rad = np.deg2rad(np.minimum(np.asarray(solar_zenith_deg, dtype=float), 90.0))
    impact_sq = (EARTH_RADIUS_KM * np.sin(zenith_rad))[:, None] ** 2
    radius_top = EARTH_RADIUS_KM + layers.top_km[None, :]
    radius_bottom = EARTH_RADIUS_KM + layers.bottom_km[None, :]
    chord = (np.sqrt(np.maximum(radius_top ** 2 - impact_sq, 0.0))
             - np.sqrt(np.maximum(radius_bottom ** 2 - impact_sq, 0.0)))
    # A chord is never shorter than the vertical path; the floor only absorbs rounding.
    return np.maximum(chord / layers.thickness_km[None, :], 1.0)
