"""Embedded total-ozone climatologies by latitude, longitude and day of year.

Two climatologies, selectable by name (``CLIMATOLOGY_NAMES``):

``"observed"`` (the default)
    Monthly zonal means of total ozone from the McPeters-Labow ozone profile
    climatology (sondes and satellite limb profiles of the depleted-era atmosphere),
    integrated to total columns by ``models/data/build_ozone_climatology_observed.py``
    and stored in ``models/data/ozone_climatology_observed.npz``: 18 bands 10° wide
    (nodes at the band centres 85° S … 85° N), one node per calendar month at its
    centre, no longitude structure. It shows the Antarctic spring depletion and the
    Arctic spring maximum as observed. The same file carries the 1-sigma day-to-day
    variability of a day's column about the monthly mean
    (``climatological_ozone_sigma_fraction``).

    McPeters, R. D., Labow, G. J. and Logan, J. A. (2007). Ozone climatological
    profiles for satellite retrieval algorithms. J. Geophys. Res. 112, D05308.

``"van_heuklon_1979"``
    The analytic fit of Van Heuklon, T. K. (1979). Estimating atmospheric ozone for
    solar radiation models. Solar Energy 22(1), 63-68. doi:10.1016/0038-092X(79)90060-4
    (its equation 4 with the coefficients of its Table 1), sampled once onto a 2.5°
    latitude × 5° longitude × 5-day table by ``models/data/build_ozone_climatology.py``
    (``models/data/ozone_climatology.npz``). It describes the undisturbed (pre-1979)
    ozone layer: no Antarctic spring depletion, the equator at 235 DU all year,
    northern mid-latitudes about 10 % high. Its published fit switches its longitude
    phase at 0° and 180° in the northern hemisphere (jumps up to about 15 DU); the
    table, sampled at cell centres, ramps across one 5° cell instead.

At run time a table is interpolated linearly along each axis
(``models.grid_interpolation``), periodic in day of year (and in longitude where the
table has more than one longitude), holding the outermost latitude rows constant
towards the poles.
"""
from __future__ import annotations

from functools import lru_cache
from pathlib import Path

import numpy as np

from uvdose.models.grid_interpolation import GridAxis, TrilinearGrid
from uvdose.models.record_errors import check_records

TABLE_PATH = Path(__file__).with_name("data") / "ozone_climatology.npz"
"""The tabulated Van Heuklon (1979) fit."""
OBSERVED_TABLE_PATH = Path(__file__).with_name("data") / "ozone_climatology_observed.npz"
"""The observed monthly zonal means (McPeters-Labow), with day-to-day variability."""

CLIMATOLOGY_PATHS = {"observed": OBSERVED_TABLE_PATH, "van_heuklon_1979": TABLE_PATH}
CLIMATOLOGY_NAMES = tuple(CLIMATOLOGY_PATHS)
"""Names of the embedded climatologies."""
DEFAULT_CLIMATOLOGY = "observed"
"""The climatology used when a caller names none."""

YEAR_TO_YEAR_SIGMA_FRACTION = 0.03
"""1-sigma relative year-to-year variation of a monthly mean about its climatology, and
of today's ozone layer about the climatology's years: the quasi-biennial oscillation
moves tropical columns by about ±3 %, monthly means at mid-latitudes vary by 2-4 % from
year to year (from memory)."""

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
    """A tabulated climatology and its interpolation.

    ``ozone_du`` has shape (days, latitudes, longitudes) on strictly increasing axes:
    ``day_nodes`` (1-based day of year within one 365-day year; the last node is
    followed by the first one a period later; need not be evenly spaced),
    ``latitude_nodes_deg`` (south to north), ``longitude_nodes_deg`` (either evenly
    spaced across the whole circle, or one node for a zonal climatology).
    ``sigma_fraction``, when the table has one, is the 1-sigma relative day-to-day
    variability on the same nodes.
    """

    def __init__(self, day_nodes, latitude_nodes_deg, longitude_nodes_deg, ozone_du, metadata,
                 sigma_fraction=None):
        self.day_nodes = np.asarray(day_nodes, dtype=float)
        self.latitude_nodes_deg = np.asarray(latitude_nodes_deg, dtype=float)
        self.longitude_nodes_deg = np.asarray(longitude_nodes_deg, dtype=float)
        self.ozone_du = np.ascontiguousarray(ozone_du, dtype=np.float32)
        self.metadata = dict(metadata)
        n_day, n_lat, n_lon = self.ozone_du.shape
        if not (
            n_day == self.day_nodes.size
            and n_lat == self.latitude_nodes_deg.size
            and n_lon == self.longitude_nodes_deg.size
        ):
            raise ValueError("climatology table axes do not match its array shape")
        if n_lon > 1:
            lon_step = float(self.longitude_nodes_deg[1] - self.longitude_nodes_deg[0])
            if not np.isclose(n_lon * lon_step, 360.0):
                raise ValueError("climatology table longitudes must span the whole circle")
        if not (self.day_nodes[0] >= 1.0 and self.day_nodes[-1] < 1.0 + DAYS_PER_CLIMATOLOGICAL_YEAR):
            raise ValueError("climatology table days must lie within one 365-day year")
        axes = (GridAxis(self.day_nodes, DAYS_PER_CLIMATOLOGICAL_YEAR), GridAxis(self.latitude_nodes_deg),
                GridAxis(self.longitude_nodes_deg, 360.0))
        self._grid = TrilinearGrid(axes, self.ozone_du)
        self._sigma_grid = None if sigma_fraction is None else TrilinearGrid(
            axes, np.ascontiguousarray(sigma_fraction, dtype=np.float32))

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
                data["ozone_sigma_fraction"] if "ozone_sigma_fraction" in data.files else None,
            )

    @staticmethod
    def write(path: Path, day_nodes, latitude_nodes_deg, longitude_nodes_deg, ozone_du,
              provenance: dict[str, str], ozone_sigma_fraction=None) -> None:
        """Write a table file in the layout :meth:`load` reads (compressed ``.npz``; the
        provenance as ``meta_*`` entries). For the build scripts in ``models/data/``."""
        sigma = {} if ozone_sigma_fraction is None else {"ozone_sigma_fraction": ozone_sigma_fraction}
        np.savez_compressed(path, day_nodes=day_nodes, latitude_nodes_deg=latitude_nodes_deg,
                            longitude_nodes_deg=longitude_nodes_deg, ozone_du=ozone_du, **sigma,
                            **{f"meta_{key}": np.array(value) for key, value in provenance.items()})
        print(f"wrote {path} {ozone_du.shape} {ozone_du.min():.1f}..{ozone_du.max():.1f} DU")

    @property
    def has_sigma(self) -> bool:
        return self._sigma_grid is not None

    def interpolate(self, latitude_deg, longitude_deg, day_of_year) -> np.ndarray:
        """Trilinear interpolation, periodic in longitude and day (``models.grid_interpolation``).

        Inputs must already be validated: latitude in [-90, 90], longitude in
        [-180, 360], day of year in [1, 367). Poleward of the outermost latitude rows
        their values hold.
        """
        return self._grid.interpolate(day_of_year, latitude_deg, longitude_deg)

    def interpolate_sigma(self, latitude_deg, longitude_deg, day_of_year) -> np.ndarray:
        """The day-to-day relative sigma, interpolated like :meth:`interpolate`."""
        if self._sigma_grid is None:
            raise ValueError("this climatology table carries no day-to-day variability")
        return self._sigma_grid.interpolate(day_of_year, latitude_deg, longitude_deg)


def check_climatology(name: str) -> str:
    """``name`` if it names an embedded climatology, else ValueError listing the names."""
    if name not in CLIMATOLOGY_PATHS:
        raise ValueError(f"unknown ozone climatology {name!r}; expected one of {list(CLIMATOLOGY_NAMES)}")
    return name


@lru_cache(maxsize=len(CLIMATOLOGY_PATHS))
def climatology_table(name: str = DEFAULT_CLIMATOLOGY) -> ClimatologyTable:
    """The embedded table of climatology ``name``, loaded once per process."""
    return ClimatologyTable.load(CLIMATOLOGY_PATHS[check_climatology(name)])


def _validated(name: str, values, low: float, high: float, high_inclusive: bool) -> np.ndarray:
    arr = np.atleast_1d(np.asarray(values, dtype=float))
    with np.errstate(invalid="ignore"):
        bad = ~np.isfinite(arr) | (arr < low) | ((arr > high) if high_inclusive else (arr >= high))
    upper = "]" if high_inclusive else ")"
    check_records(bad, name, f"must be finite and within [{low:g}, {high:g}{upper}", arr)
    return arr


def _validated_position(latitude_deg, longitude_deg, day_of_year):
    lat = _validated("latitude_deg", latitude_deg, -90.0, 90.0, True)
    lon = _validated("longitude_deg", longitude_deg, -180.0, 360.0, True)
    day = _validated("day_of_year", day_of_year, 1.0, 367.0, False)
    return np.broadcast_arrays(lat, lon, day)


def climatological_ozone_du(latitude_deg, longitude_deg, day_of_year,
                            climatology: str = DEFAULT_CLIMATOLOGY) -> np.ndarray:
    """Climatological total ozone column [DU] at each record.

    Parameters
    ----------
    latitude_deg : array, [-90, 90], north positive.
    longitude_deg : array, [-180, 360], east positive (wrapped).
    day_of_year : array, [1, 367), 1.0 = 00:00 on 1 January (fractional; use
        ``day_of_year_from_unix`` for times). Arrays broadcast together.
    climatology : one of ``CLIMATOLOGY_NAMES`` (see the module docstring).

    Raises ``RecordErrors`` naming the offending records for out-of-range or NaN input.

    References
    ----------
    .. [1] McPeters, R. D., Labow, G. J. and Logan, J. A. (2007). Ozone climatological
       profiles for satellite retrieval algorithms. J. Geophys. Res. 112, D05308.
    .. [2] Van Heuklon, T. K. (1979). Estimating atmospheric ozone for solar radiation
       models. Solar Energy 22(1), 63-68.
    """
    table = climatology_table(check_climatology(climatology))
    return table.interpolate(*_validated_position(latitude_deg, longitude_deg, day_of_year))


def climatological_ozone_sigma_fraction(latitude_deg, longitude_deg, day_of_year,
                                        climatology: str = DEFAULT_CLIMATOLOGY) -> np.ndarray:
    """1-sigma relative deviation of a day's true column from climatology ``climatology``.

    For ``"observed"``: the day-to-day variability about the monthly mean stored with
    the table (from memory of the literature; see its build script) combined in
    quadrature with ``YEAR_TO_YEAR_SIGMA_FRACTION``. For ``"van_heuklon_1979"``: that,
    combined in quadrature with the fit's relative difference from the observed
    monthly means at the record (its bias). Arguments as for
    :func:`climatological_ozone_du`.
    """
    position = _validated_position(latitude_deg, longitude_deg, day_of_year)
    observed = climatology_table("observed")
    sigma = np.hypot(observed.interpolate_sigma(*position), YEAR_TO_YEAR_SIGMA_FRACTION)
    if check_climatology(climatology) == "observed":
        return sigma
    bias = climatology_table(climatology).interpolate(*position) / observed.interpolate(*position) - 1.0
    return np.hypot(sigma, bias)


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
