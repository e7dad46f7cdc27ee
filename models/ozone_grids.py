"""Operator-supplied total-ozone grids and the per-record ozone resolution.

An operator can load gridded daily or monthly total-ozone columns (for example
re-gridded satellite products) at start-up. Records inside a grid's time span and
spatial extent take the grid's value; everything else falls back to the embedded
climatology (``models.ozone_climatology``). A value supplied by the client for a
record always wins.

File layouts (both of our own design, documented in README "Total ozone"):

CSV (UTF-8, comma-separated, ``#`` starts a comment line, one header line)::

    date,latitude_deg,longitude_deg,ozone_du
    2026-06-01,40.0,-5.0,318.2

* ``date`` is ``YYYY-MM-DD`` (a daily value for that UTC day) or ``YYYY-MM`` (a
  monthly mean for that UTC calendar month); one form per file.
* ``latitude_deg`` in [-90, 90], ``longitude_deg`` in [-180, 360] (east positive).
* ``ozone_du`` the total column in Dobson units, within ``PLAUSIBLE_OZONE_DU``.
* Every (date, latitude, longitude) of the rectangular grid appears exactly once:
  at least two latitudes and two longitudes, the same nodes at every date.

NetCDF (optional; needs the ``netcdf`` extra, i.e. the netCDF4 package): variables
``time`` (CF units such as ``days since 2026-01-01``), ``latitude`` and ``longitude``
(1-D coordinates), and ``ozone_column`` with dimensions (time, latitude, longitude)
and ``units = "DU"``; global attribute ``ozone_period`` = ``"day"`` or ``"month"``
saying which UTC day or month each time value stands for. Missing values (masked or
NaN) are rejected, not skipped.

Interpolation: each value stands at the centre of its day or month; between
consecutive centres the column is linear in time, and within the first and last
half-period it holds the end value. A grid covers a record when the record's time
lies within [start of first period, end of last period) and its position lies
within the grid's latitude and longitude extent (the longitude extent wraps when the
grid's uniform longitude nodes span the whole circle). Inside, the value is bilinear
in latitude and longitude.
"""
from __future__ import annotations

import csv
import hashlib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from uvdose.models.grid_interpolation import GridAxis, TrilinearGrid
from uvdose.models.ozone_climatology import (DEFAULT_CLIMATOLOGY, check_climatology, climatological_ozone_du,
                                             climatological_ozone_sigma_fraction, day_of_year_from_unix)
from uvdose.models.record_errors import check_records

PLAUSIBLE_OZONE_DU = (50.0, 700.0)
"""Accepted range for any total-ozone column [DU], grid or client; the same range the
API enforces on ``ozone_du``. Observed columns lie roughly in 90-600 DU; the margin
only catches unit mistakes (atm-cm, mol m-2). Common practice, no source."""

CSV_COLUMNS = ("date", "latitude_deg", "longitude_deg", "ozone_du")

SOURCE_CLIENT = "client"
SOURCE_CLIMATOLOGY = "climatology"
GRID_SOURCE_PREFIX = "grid:"

_SECONDS_PER_DAY = 86400.0



class OzoneGridError(ValueError):
    """A grid file that cannot be used; the message names the file, line and column."""


@dataclass(frozen=True)
class _Periods:
    """Start, centre and end [unix s] of each grid period, in increasing order."""

    start_s: np.ndarray
    centre_s: np.ndarray
    end_s: np.ndarray


def _period_bounds(labels: list[str], kind: str) -> _Periods:
    if kind == "day":
        start = np.array(labels, dtype="datetime64[D]")
        end = start + np.timedelta64(1, "D")
    else:
        start = np.array(labels, dtype="datetime64[M]")
        end = start + np.timedelta64(1, "M")
    start_s = start.astype("datetime64[s]").astype("int64").astype(float)
    end_s = end.astype("datetime64[s]").astype("int64").astype(float)
    return _Periods(start_s, 0.5 * (start_s + end_s), end_s)


class OzoneGrid:
    """One operator grid: ``ozone_du`` of shape (times, latitudes, longitudes).

    Build it with ``OzoneGrid.from_csv``, ``OzoneGrid.from_netcdf`` or ``OzoneGrid.load``
    (by file suffix). ``name`` is the file name, used in source labels.
    """

    def __init__(self, name, periods: _Periods, latitude_deg, longitude_deg, ozone_du):
        self.name = str(name)
        self._periods = periods
        self.latitude_deg = np.asarray(latitude_deg, dtype=float)
        self.longitude_deg = np.asarray(longitude_deg, dtype=float)
        self.ozone_du = np.asarray(ozone_du, dtype=float)
        steps = np.diff(self.longitude_deg)
        self.wraps_longitude = bool(
            np.allclose(steps, steps[0]) and np.isclose(steps[0] * self.longitude_deg.size, 360.0)
        )
        # A wrapping grid's extent runs on to its first column a circle later.
        self._lon_extent = (self.longitude_deg[0], (self.longitude_deg[0] + 360.0
                                                    if self.wraps_longitude
                                                    else self.longitude_deg[-1]))
        self._grid = TrilinearGrid(
            (GridAxis(periods.centre_s), GridAxis(self.latitude_deg),
             GridAxis(self.longitude_deg, 360.0 if self.wraps_longitude else None)),
            self.ozone_du)

    @property
    def label(self) -> str:
        return GRID_SOURCE_PREFIX + self.name

    @property
    def period_kind(self) -> str:
        """``"day"`` for daily values, ``"month"`` for monthly means."""
        first = self._periods.end_s[0] - self._periods.start_s[0]
        return "day" if first <= _SECONDS_PER_DAY else "month"

    @property
    def time_span_unix_s(self) -> tuple[float, float]:
        """[start, end) of the grid's coverage in time, unix seconds."""
        return float(self._periods.start_s[0]), float(self._periods.end_s[-1])

    @property
    def node_times_unix_s(self) -> np.ndarray:
        """The instant each time slice stands for (centre of its day or month)."""
        return self._periods.centre_s.copy()

    # ----------------------------------------------------------------- loading
    @classmethod
    def load(cls, path) -> "OzoneGrid":
        path = Path(path)
        if path.suffix.lower() in (".nc", ".nc4", ".netcdf"):
            return cls.from_netcdf(path)
        if path.suffix.lower() == ".csv":
            return cls.from_csv(path)
        raise OzoneGridError(f"{path}: unknown ozone grid format (expected .csv or .nc)")

    @classmethod
    def from_csv(cls, path) -> "OzoneGrid":
        """Read the CSV layout described in the module docstring."""
        path = Path(path)
        where = path.name
        try:
            handle = path.open(newline="", encoding="utf-8")
        except OSError as exc:
            raise OzoneGridError(f"{path}: cannot open ozone grid: {exc.strerror}") from exc
        with handle:
            lines = ((number, line) for number, line in enumerate(handle, start=1))
            body = [(n, line) for n, line in lines if line.strip() and not line.lstrip().startswith("#")]
        if not body:
            raise OzoneGridError(f"{where}: empty file, expected header {','.join(CSV_COLUMNS)}")
        header_line, header_text = body[0]
        header = [cell.strip() for cell in next(csv.reader([header_text]))]
        if header != list(CSV_COLUMNS):
            raise OzoneGridError(
                f"{where} line {header_line}: header must be {','.join(CSV_COLUMNS)}, got {','.join(header)}"
            )
        if len(body) == 1:
            raise OzoneGridError(f"{where}: no data lines after the header")

        line_numbers = np.empty(len(body) - 1, dtype=np.int64)
        dates: list[str] = []
        numbers = np.empty((len(body) - 1, 3))
        for row_index, (line_number, text) in enumerate(body[1:]):
            cells = [cell.strip() for cell in next(csv.reader([text]))]
            if len(cells) != len(CSV_COLUMNS):
                raise OzoneGridError(
                    f"{where} line {line_number}: expected {len(CSV_COLUMNS)} columns, got {len(cells)}"
                )
            line_numbers[row_index] = line_number
            dates.append(cells[0])
            for column, cell in enumerate(cells[1:], start=1):
                try:
                    numbers[row_index, column - 1] = float(cell)
                except ValueError:
                    raise OzoneGridError(
                        f"{where} line {line_number}, column {CSV_COLUMNS[column]}: not a number: {cell!r}"
                    ) from None

        kind = _date_kind(where, dates, line_numbers)
        latitude, longitude, ozone = numbers.T
        _check_range(where, "latitude_deg", latitude, -90.0, 90.0, line_numbers)
        _check_range(where, "longitude_deg", longitude, -180.0, 360.0, line_numbers)
        _check_range(where, "ozone_du", ozone, *PLAUSIBLE_OZONE_DU, line_numbers)

        date_keys, date_index = np.unique(np.array(dates), return_inverse=True)
        lat_nodes, lat_index = np.unique(latitude, return_inverse=True)
        lon_nodes, lon_index = np.unique(longitude, return_inverse=True)
        _check_axis(where, "latitude_deg", lat_nodes)
        _check_axis(where, "longitude_deg", lon_nodes)
        shape = (date_keys.size, lat_nodes.size, lon_nodes.size)
        cell = np.ravel_multi_index((date_index, lat_index, lon_index), shape)
        order = np.argsort(cell, kind="stable")
        repeated = np.flatnonzero(np.diff(cell[order]) == 0)
        if repeated.size:
            first, second = line_numbers[order[repeated[0]]], line_numbers[order[repeated[0] + 1]]
            raise OzoneGridError(
                f"{where} line {second}: same date, latitude_deg and longitude_deg as line {first}"
            )
        if cell.size != np.prod(shape):
            missing = np.setdiff1d(np.arange(np.prod(shape)), cell)[0]
            d, j, i = np.unravel_index(missing, shape)
            raise OzoneGridError(
                f"{where}: grid is not complete: no line for date {date_keys[d]}, "
                f"latitude_deg {lat_nodes[j]:g}, longitude_deg {lon_nodes[i]:g} "
                f"(every date needs every latitude x longitude node)"
            )
        values = np.empty(np.prod(shape))
        values[cell] = ozone
        periods = _period_bounds(list(date_keys), kind)
        return cls(path.name, periods, lat_nodes, lon_nodes, values.reshape(shape))

    @classmethod
    def from_netcdf(cls, path) -> "OzoneGrid":
        """Read the NetCDF layout described in the module docstring (needs netCDF4)."""
        path = Path(path)
        where = path.name
        try:
            import netCDF4
        except ImportError as exc:  # pragma: no cover - depends on the installation
            raise OzoneGridError(
                f"{where}: NetCDF ozone grids need the netCDF4 package (pip install 'uvdose[netcdf]')"
            ) from exc
        try:
            dataset = netCDF4.Dataset(path, "r")
        except OSError as exc:
            raise OzoneGridError(f"{where}: cannot open as NetCDF: {exc}") from exc
        with dataset:
            for name in ("time", "latitude", "longitude", "ozone_column"):
                if name not in dataset.variables:
                    raise OzoneGridError(f"{where}: missing variable {name!r}")
            variable = dataset.variables["ozone_column"]
            if tuple(variable.dimensions) != ("time", "latitude", "longitude"):
                raise OzoneGridError(
                    f"{where}: variable 'ozone_column' must have dimensions (time, latitude, longitude), "
                    f"got {tuple(variable.dimensions)}"
                )
            units = str(getattr(variable, "units", "")).strip()
            if units not in ("DU", "Dobson units", "Dobson unit"):
                raise OzoneGridError(f"{where}: variable 'ozone_column' must have units 'DU', got {units!r}")
            kind = str(getattr(dataset, "ozone_period", "")).strip()
            if kind not in ("day", "month"):
                raise OzoneGridError(
                    f"{where}: global attribute 'ozone_period' must be 'day' or 'month', got {kind!r}"
                )
            time_var = dataset.variables["time"]
            try:
                instants = netCDF4.num2date(
                    time_var[:], time_var.units, getattr(time_var, "calendar", "standard"),
                    only_use_cftime_datetimes=False, only_use_python_datetimes=True,
                )
            except Exception as exc:
                raise OzoneGridError(f"{where}: variable 'time' has unusable units or values: {exc}") from exc
            latitude = np.ma.filled(np.ma.asarray(dataset.variables["latitude"][:], dtype=float), np.nan)
            longitude = np.ma.filled(np.ma.asarray(dataset.variables["longitude"][:], dtype=float), np.nan)
            ozone = np.ma.filled(np.ma.asarray(variable[:], dtype=float), np.nan)

        labels = [moment.strftime("%Y-%m-%d" if kind == "day" else "%Y-%m") for moment in np.ravel(instants)]
        if len(set(labels)) != len(labels) or labels != sorted(labels):
            raise OzoneGridError(f"{where}: 'time' values must fall in distinct, increasing {kind}s")
        _check_range(where, "latitude", latitude, -90.0, 90.0)
        _check_range(where, "longitude", longitude, -180.0, 360.0)
        for axis_name, axis in (("latitude", latitude), ("longitude", longitude)):
            if np.any(np.diff(axis) <= 0):
                raise OzoneGridError(f"{where}: variable {axis_name!r} must be strictly increasing")
            _check_axis(where, axis_name, axis)
        bad = ~np.isfinite(ozone) | (ozone < PLAUSIBLE_OZONE_DU[0]) | (ozone > PLAUSIBLE_OZONE_DU[1])
        if bad.any():
            t, j, i = np.unravel_index(np.flatnonzero(bad)[0], ozone.shape)
            raise OzoneGridError(
                f"{where}: 'ozone_column' at time {labels[t]}, latitude {latitude[j]:g}, "
                f"longitude {longitude[i]:g} is {float(ozone[t, j, i]):g}; must be within "
                f"[{PLAUSIBLE_OZONE_DU[0]:g}, {PLAUSIBLE_OZONE_DU[1]:g}] DU and not missing"
            )
        return cls(path.name, _period_bounds(labels, kind), latitude, longitude, ozone)

    # ------------------------------------------------------------------ lookup
    def lookup(self, latitude_deg, longitude_deg, time_unix_s) -> tuple[np.ndarray, np.ndarray]:
        """Grid ozone [DU] and a coverage mask for each record.

        Bilinear in latitude/longitude, linear in time between period centres (see
        the module docstring). Where ``covered`` is False the returned value is NaN.
        """
        lat = np.asarray(latitude_deg, dtype=float)
        lon = np.asarray(longitude_deg, dtype=float)
        t = np.asarray(time_unix_s, dtype=float)
        lat, lon, t = np.broadcast_arrays(lat, lon, t)
        lon = self._longitude_into_extent(lon)
        start_s, end_s = self.time_span_unix_s
        with np.errstate(invalid="ignore"):
            covered = (
                (t >= start_s) & (t < end_s)
                & (lat >= self.latitude_deg[0]) & (lat <= self.latitude_deg[-1])
                & (lon >= self._lon_extent[0]) & (lon <= self._lon_extent[1])
            )
        result = np.full(lat.shape, np.nan)
        if covered.any():
            result[covered] = self._grid.interpolate(t[covered], lat[covered], lon[covered])
        return result, covered

    def _longitude_into_extent(self, lon: np.ndarray) -> np.ndarray:
        """Shift longitudes by ±360° where that brings them into the node range."""
        low, high = self._lon_extent
        shifted = np.where(lon < low, lon + 360.0, lon)
        shifted = np.where(shifted > high, shifted - 360.0, shifted)
        return np.where((shifted >= low) & (shifted <= high), shifted, lon)


def _date_kind(where: str, dates: list[str], line_numbers: np.ndarray) -> str:
    lengths = {len(text) for text in dates}
    kind = "day" if len(dates[0]) == 10 else "month"
    for text, line_number in zip(dates, line_numbers):
        expected = 10 if kind == "day" else 7
        valid = len(text) == expected and text[4] == "-" and (expected == 7 or text[7] == "-")
        if valid:
            try:
                np.datetime64(text, "D" if kind == "day" else "M")
            except ValueError:
                valid = False
        if not valid:
            form = "YYYY-MM-DD" if kind == "day" else "YYYY-MM"
            detail = " (one date form per file)" if len(lengths) > 1 else ""
            raise OzoneGridError(f"{where} line {line_number}, column date: expected {form}, got {text!r}{detail}")
    return kind


def _check_range(where, column, values, low, high, line_numbers=None) -> None:
    with np.errstate(invalid="ignore"):
        bad = ~np.isfinite(values) | (values < low) | (values > high)
    if bad.any():
        first = np.flatnonzero(bad)[0]
        place = f"{where} line {line_numbers[first]}, column {column}" if line_numbers is not None else (
            f"{where}: variable {column!r}"
        )
        raise OzoneGridError(f"{place}: {float(values[first]):g} is outside [{low:g}, {high:g}]")


def _check_axis(where, name, nodes) -> None:
    if nodes.size < 2:
        raise OzoneGridError(f"{where}: {name} needs at least two distinct values for bilinear interpolation")
    if nodes[-1] - nodes[0] > 360.0:
        raise OzoneGridError(f"{where}: {name} spans more than 360 degrees")


class OzoneResolver:
    """Per-record total ozone: client value, else the first covering grid, else climatology.

    ``climatology`` names the embedded climatology of the last step
    (``models.ozone_climatology.CLIMATOLOGY_NAMES``).
    """

    def __init__(self, grids=(), climatology: str = DEFAULT_CLIMATOLOGY):
        self.grids = list(grids)
        self.climatology = check_climatology(climatology)

    def with_climatology(self, climatology: str | None) -> "OzoneResolver":
        """The same grids with another climatology (``None``: this resolver itself)."""
        if climatology is None or climatology == self.climatology:
            return self
        return OzoneResolver(self.grids, climatology)

    @classmethod
    def from_paths(cls, paths) -> "OzoneResolver":
        """Load the grid files ``paths`` (CSV or NetCDF, see the module docstring), tried
        in the order given; no paths means the climatology only. A file that cannot be
        used raises ``OzoneGridError`` naming it, rather than being skipped."""
        return cls([OzoneGrid.load(path) for path in paths])

    @property
    def fingerprint(self) -> str:
        """Short digest of the loaded grids (names, nodes, values, order); "none" without grids.

        Put it in a cache context: a result cached under one set of grids must not be
        served after the operator changes them (the climatology is covered by MODEL_VERSION).
        """
        suffix = "" if self.climatology == DEFAULT_CLIMATOLOGY else f";climatology={self.climatology}"
        if not self.grids:
            return "none" + suffix
        digest = hashlib.sha256()
        for grid in self.grids:
            digest.update(grid.name.encode())
            for array in (grid._periods.start_s, grid._periods.end_s, grid.latitude_deg,
                          grid.longitude_deg, grid.ozone_du):
                digest.update(np.ascontiguousarray(array, dtype=float).tobytes())
        return digest.hexdigest()[:16] + suffix

    def describe(self) -> list[dict]:
        """Name and coverage of each loaded grid, in resolution order."""
        out = []
        for grid in self.grids:
            start_s, end_s = grid.time_span_unix_s
            out.append(
                {
                    "source": grid.label,
                    "start": np.datetime64(int(start_s), "s").astype(str) + "Z",
                    "end": np.datetime64(int(end_s), "s").astype(str) + "Z",
                    "latitude_deg": [float(grid.latitude_deg[0]), float(grid.latitude_deg[-1])],
                    "longitude_deg": [float(grid.longitude_deg[0]), float(grid.longitude_deg[-1])],
                }
            )
        return out

    def resolve(self, latitude_deg, longitude_deg, time_unix_s, client_ozone_du=None):
        """Return ``(ozone_du, source_labels)`` for each record.

        ``client_ozone_du`` NaN (or None for all records) means "not given". Given
        values must lie within ``PLAUSIBLE_OZONE_DU``; latitude in [-90, 90],
        longitude in [-180, 360] and finite times are required. Violations raise
        ``RecordErrors`` naming the records. Labels are ``"client"``,
        ``"grid:<file name>"`` or ``"climatology"`` (object array).
        """
        lat = np.atleast_1d(np.asarray(latitude_deg, dtype=float))
        lon = np.atleast_1d(np.asarray(longitude_deg, dtype=float))
        t = np.atleast_1d(np.asarray(time_unix_s, dtype=float))
        if client_ozone_du is None:
            client = np.full(lat.shape, np.nan)
        else:
            client = np.atleast_1d(np.asarray(client_ozone_du, dtype=float))
        lat, lon, t, client = np.broadcast_arrays(lat, lon, t, client)
        check_records(~np.isfinite(t), "time_unix_s", "must be finite", t)
        with np.errstate(invalid="ignore"):
            check_records(~((lat >= -90.0) & (lat <= 90.0)), "latitude_deg",
                          "must be within [-90, 90]", lat)
            check_records(~((lon >= -180.0) & (lon <= 360.0)), "longitude_deg",
                          "must be within [-180, 360]", lon)
        given = ~np.isnan(client)
        with np.errstate(invalid="ignore"):
            check_records(
                given & ~((client >= PLAUSIBLE_OZONE_DU[0]) & (client <= PLAUSIBLE_OZONE_DU[1])),
                "ozone_du", f"must be within [{PLAUSIBLE_OZONE_DU[0]:g}, {PLAUSIBLE_OZONE_DU[1]:g}] DU",
                client)

        ozone = np.where(given, client, np.nan)
        labels = np.empty(lat.shape, dtype=object)
        labels.fill(SOURCE_CLIMATOLOGY)  # much faster than np.full for object arrays
        labels[given] = SOURCE_CLIENT
        pending = ~given
        for grid in self.grids:
            if not pending.any():
                break
            index = np.flatnonzero(pending)
            values, covered = grid.lookup(lat[index], lon[index], t[index])
            hit = index[covered]
            ozone[hit] = values[covered]
            labels[hit] = grid.label
            pending[hit] = False
        if pending.any():
            ozone[pending] = climatological_ozone_du(
                lat[pending], lon[pending], day_of_year_from_unix(t[pending]), self.climatology
            )
        return ozone, labels

    def relative_sigma(self, labels, latitude_deg, longitude_deg, time_unix_s) -> np.ndarray:
        """1-sigma relative uncertainty of each record's column, by its source label.

        ``labels`` as returned by :meth:`resolve`. A client value: ``CLIENT_OZONE_SIGMA``;
        a daily grid: ``DAILY_GRID_OZONE_SIGMA``; a monthly grid and the climatology: the
        day-to-day variability of the observed climatology at the record
        (``models.ozone_climatology.climatological_ozone_sigma_fraction``; for the
        1979 fit combined with its bias).
        """
        from uvdose.models.uncertainty import CLIENT_OZONE_SIGMA, DAILY_GRID_OZONE_SIGMA

        labels = np.asarray(labels, dtype=object)
        lat, lon, t = np.broadcast_arrays(*(np.atleast_1d(np.asarray(v, dtype=float))
                                            for v in (latitude_deg, longitude_deg, time_unix_s)))
        sigma = np.full(labels.shape, CLIENT_OZONE_SIGMA)
        daily = {grid.label for grid in self.grids if grid.period_kind == "day"}
        from_grid = np.isin(labels, list(daily)) if daily else np.zeros(labels.shape, bool)
        sigma[from_grid] = DAILY_GRID_OZONE_SIGMA
        by_climatology = ~from_grid & (labels != SOURCE_CLIENT)
        if by_climatology.any():
            monthly_grid = by_climatology & (labels != SOURCE_CLIMATOLOGY)
            climatology = np.where(monthly_grid, "observed", self.climatology)
            for name in np.unique(climatology[by_climatology]):
                pick = by_climatology & (climatology == name)
                sigma[pick] = climatological_ozone_sigma_fraction(
                    lat[pick], lon[pick], day_of_year_from_unix(t[pick]), str(name))
        return sigma
