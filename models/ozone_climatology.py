"""Embedded total-ozone climatology by latitude, longitude and day of year.

The climatology is the analytic fit of

    Van Heuklon, T. K. (1979). Estimating atmospheric ozone for solar radiation
    models. Solar Energy 22(1), 63-68. doi:10.1016/0038-092X(79)90060-4

(its equation 4 with the coefficients of its Table 1), sampled once onto a
2.5° latitude × 5° longitude × 5-day table by ``models/data/build_ozone_climatology.py``
and stored in ``models/data/ozone_climatology.npz`` with its provenance. At run time
the table is interpolated: bilinear in latitude and longitude, linear in day of year,
with longitude wrapping across the date line and the year wrapping from its last
node back to day 1.

Limits worth knowing:

* The fit describes the undisturbed (pre-1979) climatology. The Antarctic spring
  depletion that developed after it cannot appear here: spring columns over
  Antarctica (September-November) are far too high. Polar spring values need a
  client-supplied column or an operator grid (``models.ozone_grids``).
* The published fit switches its longitude phase at 0° and 180° in the northern
  hemisphere, so the fit itself jumps there by up to about 15 DU. The table is
  sampled at cell centres, never on those meridians, so the interpolated field
  ramps linearly across one 5° cell instead of jumping.
* Poleward of the outermost table rows (±88.75°) the row value holds constant.
"""
from __future__ import annotations

from functools import lru_cache
from pathlib import Path

import numpy as np

from uvdose.models.grid_interpolation import GridAxis, TrilinearGrid

TABLE_PATH = Path(__file__).with_name("data") / "ozone_climatology.npz"

DAYS_PER_CLIMATOLOGICAL_YEAR = 365.0
"""Period of the table's day-of-year axis. Day-of-year values are 1-based: day 1.0 is
00:00 on 1 January; ``day_of_year_from_unix`` rescales leap years onto this period."""

# Coefficients of Van Heuklon (1979), Table 1, for its equation 4:
#   O3 = J + (A + C sin(D (E + F)) + G sin(H (lambda + I))) sin^2(beta phi)
# E is the day of year (1 Jan = 1), lambda the longitude (east positive), phi the
# latitude (north positive); all angles in degrees. In the northern hemisphere I is
# 20 for east longitudes and 0 for west longitudes.
_VH_J_DU = 235.0
_VH_D = 0.9865
_VH_G_DU = 20.0
_VH_NORTH = {"A": 150.0, "beta": 1.28, "C": 40.0, "F": -30.0, "H": 3.0}
_VH_SOUTH = {"A": 100.0, "beta": 1.5, "C": 30.0, "F": 152.625, "H": 2.0, "I": -75.0}
_VH_NORTH_I_EAST = 20.0
_VH_NORTH_I_WEST = 0.0


def van_heuklon_ozone_du(latitude_deg, longitude_deg, day_of_year):
    """Total ozone column [DU] from the analytic fit of Van Heuklon (1979), eq. 4, Table 1.

    Parameters are arrays that broadcast together: latitude in degrees north,
    longitude in degrees east (any value; wrapped to [-180, 180)), day of year with
    1 January = 1 (fractional days allowed). Latitude 0 uses the southern
    coefficients; both sets give J = 235 DU there, so the field is continuous.

    This is the published fit evaluated exactly, including its jumps at 0° and 180°
    longitude in the northern hemisphere. The service uses the tabulated form
    (``climatological_ozone_du``) instead.
    """
    lat = np.asarray(latitude_deg, dtype=float)
    lon = (np.asarray(longitude_deg, dtype=float) + 180.0) % 360.0 - 180.0
    day = np.asarray(day_of_year, dtype=float)
    north = lat > 0.0

    def pick(key):
        return np.where(north, _VH_NORTH[key], _VH_SOUTH[key])

    phase_i = np.where(
        north, np.where(lon > 0.0, _VH_NORTH_I_EAST, _VH_NORTH_I_WEST), _VH_SOUTH["I"]
    )
    seasonal = pick("C") * np.sin(np.radians(_VH_D * (day + pick("F"))))
    zonal = _VH_G_DU * np.sin(np.radians(pick("H") * (lon + phase_i)))
    latitudinal = np.sin(np.radians(pick("beta") * lat)) ** 2
    return _VH_J_DU + (pick("A") + seasonal + zonal) * latitudinal


class ClimatologyTable:
    """The tabulated climatology and its interpolation.

    ``ozone_du`` has shape (days, latitudes, longitudes); the axes are uniform:
    ``day_nodes`` (1-based day of year, last node followed by the first one a
    period later), ``latitude_nodes_deg`` (south to north, cell centres),
    ``longitude_nodes_deg`` (west to east, cell centres spanning the whole circle).
    """

    def __init__(self, day_nodes, latitude_nodes_deg, longitude_nodes_deg, ozone_du, metadata):
        self.day_nodes = np.asarray(day_nodes, dtype=float)
        self.latitude_nodes_deg = np.asarray(latitude_nodes_deg, dtype=float)
        self.longitude_nodes_deg = np.asarray(longitude_nodes_deg, dtype=float)
        self.ozone_du = np.ascontiguousarray(ozone_du, dtype=np.float32)
        self.metadata = dict(metadata)
        day_step = float(self.day_nodes[1] - self.day_nodes[0])
        lon_step = float(self.longitude_nodes_deg[1] - self.longitude_nodes_deg[0])
        n_day, n_lat, n_lon = self.ozone_du.shape
        if not (
            n_day == self.day_nodes.size
            and n_lat == self.latitude_nodes_deg.size
            and n_lon == self.longitude_nodes_deg.size
        ):
            raise ValueError("climatology table axes do not match its array shape")
        if not np.isclose(n_lon * lon_step, 360.0):
            raise ValueError("climatology table longitudes must span the whole circle")
        if not np.isclose(n_day * day_step, DAYS_PER_CLIMATOLOGICAL_YEAR):
            raise ValueError("climatology table days must span one 365-day year")
        self._grid = TrilinearGrid(
            (GridAxis(self.day_nodes, DAYS_PER_CLIMATOLOGICAL_YEAR), GridAxis(self.latitude_nodes_deg),
             GridAxis(self.longitude_nodes_deg, 360.0)),
            self.ozone_du)

    @classmethod
    def load(cls, path: Path = TABLE_PATH) -> "ClimatologyTable":
        with np.load(path, allow_pickle=False) as data:
            metadata = {
                key[len("meta_"):]: str(data[key]) for key in data.files if key.startswith("meta_")
            }
            return cls(
                data["day_nodes"],
                data["latitude_nodes_deg"],
                data["longitude_nodes_deg"],
                data["ozone_du"],
                metadata,
            )

    def interpolate(self, latitude_deg, longitude_deg, day_of_year) -> np.ndarray:
        """Trilinear interpolation, periodic in longitude and day (``models.grid_interpolation``).

        Inputs must already be validated: latitude in [-90, 90], longitude in
        [-180, 360], day of year in [1, 367). Poleward of the outermost latitude rows
        their values hold.
        """
        return self._grid.interpolate(day_of_year, latitude_deg, longitude_deg)


@lru_cache(maxsize=1)
def climatology_table() -> ClimatologyTable:
    """The embedded table, loaded once per process."""
    return ClimatologyTable.load()


def _validated(name: str, values, low: float, high: float, high_inclusive: bool) -> np.ndarray:
    arr = np.atleast_1d(np.asarray(values, dtype=float))
    with np.errstate(invalid="ignore"):
        bad = ~np.isfinite(arr) | (arr < low) | ((arr > high) if high_inclusive else (arr >= high))
    if bad.any():
        index = np.flatnonzero(bad)
        upper = "]" if high_inclusive else ")"
        raise ValueError(
            f"{name} must be finite and within [{low:g}, {high:g}{upper}; "
            f"records {index[:10].tolist()} are not (first value {float(arr.reshape(-1)[index[0]]):g})"
        )
    return arr


def climatological_ozone_du(latitude_deg, longitude_deg, day_of_year) -> np.ndarray:
    """Climatological total ozone column [DU] at each record.

    ``latitude_deg`` in [-90, 90] (north positive), ``longitude_deg`` in [-180, 360]
    (east positive; wrapped), ``day_of_year`` in [1, 367) with 1.0 = 00:00 on 1 January
    (fractional; use ``day_of_year_from_unix`` for times). Arrays broadcast together.

    Source: Van Heuklon (1979) fit, tabulated (see the module docstring); bilinear in
    space, linear in day, periodic across the date line and the year boundary.
    Raises ``ValueError`` naming the offending records for out-of-range or NaN input.
    """
    lat = _validated("latitude_deg", latitude_deg, -90.0, 90.0, True)
    lon = _validated("longitude_deg", longitude_deg, -180.0, 360.0, True)
    day = _validated("day_of_year", day_of_year, 1.0, 367.0, False)
    lat, lon, day = np.broadcast_arrays(lat, lon, day)
    return climatology_table().interpolate(lat, lon, day)


def _days_to_1_january(year: np.ndarray) -> np.ndarray:
    """Days from 1970-01-01 to 1 January of ``year`` (proleptic Gregorian calendar)."""
    before = year - 1
    # 477 = leap days counted the same way up to 1969 (492 - 19 + 4)
    return 365 * (year - 1970) + before // 4 - before // 100 + before // 400 - 477


def day_of_year_from_unix(time_unix_s) -> np.ndarray:
    """Day of year on the climatology's 365-day axis for UTC instants (seconds since 1970).

    1.0 is 00:00 UTC on 1 January; the calendar year (365 or 366 days) is mapped
    linearly onto [1, 366) so that 31 December 24:00 meets 1 January of the next year.
    Integer calendar arithmetic (Gregorian leap rule), no datetime objects.
    """
    t = np.asarray(time_unix_s, dtype=float)
    days = np.floor(t / 86400.0).astype(np.int64)
    year = 1970 + np.floor(days / 365.2425).astype(np.int64)
    year -= days < _days_to_1_january(year)
    year += days >= _days_to_1_january(year + 1)
    start = _days_to_1_january(year) * 86400.0
    end = _days_to_1_january(year + 1) * 86400.0
    return 1.0 + DAYS_PER_CLIMATOLOGICAL_YEAR * (t - start) / (end - start)
