"""Benchmark: climatological ozone lookup and resolution against the spectral engine.

Target: looking up 100 000 records is at least 10x faster than the spectral engine
on the same records. The engine is timed on the first ENGINE_RECORDS of those records
and scaled linearly (it is vectorised over records, so its cost is proportional to N);
lookups are timed on all of them. Baseline in the same process: the analytic Van
Heuklon (1979) expression evaluated directly (what the table replaces).

Run:  python tests/benchmarks/bench_ozone.py
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from uvdose.models.ozone_climatology import (  # noqa: E402
    climatological_ozone_du,
    day_of_year_from_unix,
    van_heuklon_ozone_du,
)
from uvdose.models.ozone_grids import OzoneResolver  # noqa: E402
from timing import best_of  # noqa: E402  (this folder; see timing.py)

N = 100_000
ENGINE_RECORDS = 2_000
REPEATS = 7


def _best_of(fn, repeats=REPEATS) -> float:
    return best_of(repeats, fn, warmup=True)


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
    print(f"engine    compute (scaled from {ENGINE_RECORDS})     : {engine_s * 1e3:8.0f} ms")
    print(f"engine / resolver: {engine_s / resolve:.0f}x  (target >= 10x)")


if __name__ == "__main__":
    main()
