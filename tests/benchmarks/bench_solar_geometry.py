"""Speed of models.solar_geometry.solar_position at 10 000 records.

Baseline in the same process: pvlib.solarposition.spa_python (pandas DatetimeIndex
in, DataFrame out), the public pvlib entry point for the same algorithm. Prints
absolute times and the ratio. Run: python tests/benchmarks/bench_solar_geometry.py
"""


import numpy as np
import pandas as pd
import pvlib
import pvlib.spa

from uvdose.models.solar_geometry import pressure_from_elevation_hpa, solar_position
from timing import best_of  # noqa: E402  (this folder; see timing.py)

N_RECORDS = 10_000
REPEATS = 5


def _best_of(fn) -> float:
    return best_of(REPEATS, fn)


def main() -> None:
    rng = np.random.default_rng(7)
    t = rng.uniform(1.7e9, 1.8e9, N_RECORDS)
    lat = rng.uniform(-60.0, 70.0, N_RECORDS)
    lon = rng.uniform(-180.0, 180.0, N_RECORDS)
    elev = rng.uniform(0.0, 2500.0, N_RECORDS)

    # spa_python takes one location per call, so the baseline is one location,
    # N times; ours takes N locations. Same record count, same algorithm.
    times = pd.DatetimeIndex(pd.to_datetime(t, unit="s", utc=True))
    baseline = _best_of(lambda: pvlib.solarposition.spa_python(
        times, lat[0], lon[0], altitude=elev[0], how="numpy"))
    # The same SPA chain as pvlib ships it (Python loops over the periodic terms).
    spa_numpy = _best_of(lambda: pvlib.spa.solar_position_numpy(
        t, lat, lon, elev, 1013.25, 12.0, 67.0, 0.5667, 0))
    ours = _best_of(lambda: solar_position(t, lat, lon, elev))
    # A 100 x 100 field grid at one instant, and 100 sites x 100 hourly steps.
    one_instant = np.full(N_RECORDS, t[0])
    hourly = np.repeat(t[0] + 3600.0 * np.arange(100), N_RECORDS // 100)
    grid = _best_of(lambda: solar_position(one_instant, lat, lon, elev))
    steps = _best_of(lambda: solar_position(hourly, lat, lon, elev))
    # One record: the per-call cost a single-record request pays.
    single_spa = _best_of(lambda: pvlib.spa.solar_position_numpy(
        t[:1], lat[:1], lon[:1], elev[:1], 1013.25, 12.0, 67.0, 0.5667, 0))
    single = _best_of(lambda: solar_position(t[:1], lat[:1], lon[:1], elev[:1]))
    pressure = _best_of(lambda: pressure_from_elevation_hpa(elev))

    print(f"records: {N_RECORDS}, best of {REPEATS}")
    print(f"baseline pvlib.solarposition.spa_python (one site): {baseline * 1e3:8.2f} ms")
    print(f"pvlib.spa.solar_position_numpy (N sites):          {spa_numpy * 1e3:8.2f} ms"
          f"  ratio to baseline {spa_numpy / baseline:.2f}")
    print(f"models.solar_geometry.solar_position (N sites):    {ours * 1e3:8.2f} ms"
          f"  ratio to baseline {ours / baseline:.2f}")
    print(f"  same, one instant (field grid):                  {grid * 1e3:8.2f} ms"
          f"  ratio to baseline {grid / baseline:.3f}")
    print(f"  same, 100 distinct instants:                     {steps * 1e3:8.2f} ms"
          f"  ratio to baseline {steps / baseline:.3f}")
    print(f"one record: pvlib.spa.solar_position_numpy {single_spa * 1e3:.2f} ms, "
          f"solar_position {single * 1e3:.2f} ms, ratio {single / single_spa:.2f}")
    print(f"models.solar_geometry.pressure_from_elevation_hpa: {pressure * 1e3:8.3f} ms")
    print(f"per record: {ours / N_RECORDS * 1e6:.2f} us")


if __name__ == "__main__":
    main()
