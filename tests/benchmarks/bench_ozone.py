"""Benchmark: climatological ozone lookup and resolution against the spectral engine.

Target: looking up 100 000 records is at least 10x faster than the spectral engine
on the same records. The engine is timed on the first ENGINE_RECORDS of those records
and scaled linearly (it is vectorised over records, so its cost is proportional to N);
lookups are timed on all of them. Baseline in the same process: the analytic Van
Heuklon (1979) expression evaluated directly (what the table replaces). The table's
trilinear interpolation (``models.grid_interpolation``) is also timed against the two
scipy interpolators that could replace it, on the same wrap-padded table: the evenly
spaced 73 x 72 x 72 table of the 1979 fit (``INTERPOLATION_TABLE``).

Run:  python tests/benchmarks/bench_ozone.py
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from uvdose.models.ozone_climatology import (  # noqa: E402
    climatological_ozone_du,
    climatology_table,
    day_of_year_from_unix,
    van_heuklon_ozone_du,
)
from uvdose.models.ozone_grids import OzoneResolver  # noqa: E402
from timing import best_of  # noqa: E402  (this folder; see timing.py)

N = 100_000
ENGINE_RECORDS = 2_000
REPEATS = 7
INTERPOLATION_TABLE = "van_heuklon_1979"


def _best_of(fn, repeats=REPEATS) -> float:
    return best_of(repeats, fn, warmup=True)


def scipy_interpolators(lat, lon, day):
    """The evenly spaced climatology table through scipy: (map_coordinates call,
    RegularGridInterpolator call)."""
    from scipy import ndimage
    from scipy.interpolate import RegularGridInterpolator

    table = climatology_table(INTERPOLATION_TABLE)
    n_day, n_lat, n_lon = table.ozone_du.shape
    padded = np.empty((n_day + 1, n_lat, n_lon + 1))
    padded[:n_day, :, :n_lon] = table.ozone_du
    padded[:n_day, :, n_lon] = table.ozone_du[:, :, 0]
    padded[n_day] = padded[0]
    days = np.append(table.day_nodes, table.day_nodes[0] + 365.0)
    lats = table.latitude_nodes_deg
    lons = np.append(table.longitude_nodes_deg, table.longitude_nodes_deg[0] + 360.0)
    steps = [nodes[1] - nodes[0] for nodes in (days, lats, lons)]
    grid = RegularGridInterpolator((days, lats, lons), padded)

    def wrapped():
        return (days[0] + np.mod(day - days[0], 365.0), np.clip(lat, lats[0], lats[-1]),
                lons[0] + np.mod(lon - lons[0], 360.0))

    def by_map_coordinates():
        position = [(x - nodes[0]) / step
                    for x, nodes, step in zip(wrapped(), (days, lats, lons), steps)]
        return ndimage.map_coordinates(padded, np.stack(position), order=1, mode="nearest",
                                       prefilter=False)

    return by_map_coordinates, lambda: grid(np.column_stack(wrapped()))


def main() -> None:
    rng = np.random.default_rng(20261202)
    lat = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, N)))
    lon = rng.uniform(-180.0, 180.0, N)
    t = rng.uniform(1.77e9, 1.80e9, N)
    day = day_of_year_from_unix(t)
    resolver = OzoneResolver()

    baseline = _best_of(lambda: van_heuklon_ozone_du(lat, lon, day))
    table = _best_of(lambda: climatological_ozone_du(lat, lon, day))
    resolve = _best_of(lambda: resolver.resolve(lat, lon, t, None))
    table_only = _best_of(lambda: climatology_table(INTERPOLATION_TABLE).interpolate(lat, lon, day))
    by_map_coordinates, by_grid_interpolator = scipy_interpolators(lat, lon, day)
    map_coordinates = _best_of(by_map_coordinates)
    grid_interpolator = _best_of(by_grid_interpolator)
    ours = climatology_table(INTERPOLATION_TABLE).interpolate(lat, lon, day)
    scipy_gap = max(np.max(np.abs(by_map_coordinates() - ours)),
                    np.max(np.abs(by_grid_interpolator() - ours)))

    from uvdose.models import engine

    subset = slice(0, ENGINE_RECORDS)
    conditions = engine.Conditions.from_columns(
        {"time_unix_s": t[subset], "latitude_deg": lat[subset], "longitude_deg": lon[subset]}
    )
    engine_s = _best_of(lambda: engine.compute(conditions), repeats=2) * (N / ENGINE_RECORDS)

    print(f"records: {N}")
    print(f"baseline  analytic Van Heuklon expression : {baseline * 1e3:8.2f} ms")
    print(f"table     climatological_ozone_du         : {table * 1e3:8.2f} ms  ({table / baseline:.2f}x baseline)")
    print(f"resolver  OzoneResolver().resolve         : {resolve * 1e3:8.2f} ms  ({resolve / baseline:.2f}x baseline)")
    print(f"interpolation only ({INTERPOLATION_TABLE}), TrilinearGrid: {table_only * 1e3:8.2f} ms")
    print(f"  scipy.ndimage.map_coordinates (order 1)  : {map_coordinates * 1e3:8.2f} ms  "
          f"({map_coordinates / table_only:.2f}x ours)")
    print(f"  scipy RegularGridInterpolator (linear)   : {grid_interpolator * 1e3:8.2f} ms  "
          f"({grid_interpolator / table_only:.2f}x ours)")
    print(f"  largest difference from ours             : {scipy_gap:.1e} DU")
    print(f"engine    compute (scaled from {ENGINE_RECORDS})     : {engine_s * 1e3:8.0f} ms")
    print(f"engine / resolver: {engine_s / resolve:.0f}x  (target >= 10x)")


if __name__ == "__main__":
    main()
