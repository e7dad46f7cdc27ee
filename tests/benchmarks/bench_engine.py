"""Speed and memory of the full spectral engine (a script; pytest does not collect it).

    python tests/benchmarks/bench_engine.py [--sizes 1000 10000 100000] [--repeats 3]

Scenario (invented, our own): a logistics planner sends daytime positions of delivery
vans spread over the mid-latitudes across one year (sun above the horizon, ozone given by
the client, default aerosol and ground), and asks for the UV Index and the default action
spectra. Printed, all in the same process on one core (BLAS/OpenMP threads pinned to 1):

1. ``models.engine.compute`` (method "auto": the precomputed table) at each size, in
   records per second.
2. Baseline: the closed-form Madronich (2007) UV Index fed by the same solar-position
   step (``models.solar_geometry.solar_position``), and the engine's cost per record as
   a multiple of it (target: at most 20x; engine at least 20 000 records/s at 10 000).
3. The full solve (method "direct") on the first 1 000 records, against the table path.
4. Total-ozone lookup on 100 000 records (climatology alone and the resolver with no
   client values), and how many times faster it is than the spectral engine (target 10x).
5. Peak memory of the engine at the largest size: traced numpy/Python allocations
   (tracemalloc) and the process's peak resident set (target under 2 GiB).

The machine is shared: read the ratios; the absolute figures move with the load.
"""
from __future__ import annotations

import os

for _variable in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_variable] = "1"

import argparse  # noqa: E402
import resource  # noqa: E402
import sys  # noqa: E402
import tracemalloc  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from uvdose.models import engine  # noqa: E402
from uvdose.models.ozone_climatology import climatological_ozone_du  # noqa: E402
from uvdose.models.ozone_grids import OzoneResolver  # noqa: E402
from uvdose.models.solar_geometry import pressure_from_elevation_hpa, solar_position  # noqa: E402
from uvdose.models.uv_index import madronich_uv_index  # noqa: E402
from timing import best_of  # noqa: E402  (this folder; see timing.py)

YEAR_2026_UNIX_S = 1767225600.0


def daytime_records(n: int, seed: int = 11) -> dict[str, np.ndarray]:
    """n records with the sun up (zenith below 89 deg), ozone given."""
    rng = np.random.default_rng(seed)
    chosen: list[dict[str, np.ndarray]] = []
    found = 0
    while found < n:
        m = 3 * (n - found) + 16
        batch = dict(
            time_unix_s=YEAR_2026_UNIX_S + rng.uniform(0.0, 365.0 * 86400.0, m),
            latitude_deg=rng.uniform(-55.0, 65.0, m),
            longitude_deg=rng.uniform(-180.0, 180.0, m),
            elevation_m=rng.uniform(0.0, 2000.0, m),
            ozone_du=rng.uniform(230.0, 420.0, m),
        )
        zenith = solar_position(batch["time_unix_s"], batch["latitude_deg"],
                                batch["longitude_deg"], batch["elevation_m"]).zenith_deg
        keep = zenith < 89.0
        chosen.append({key: value[keep] for key, value in batch.items()})
        found += int(keep.sum())
    return {key: np.concatenate([part[key] for part in chosen])[:n] for key in chosen[0]}


def madronich_path(columns):
    """The baseline: same solar-position step, then the closed form."""
    pressure = pressure_from_elevation_hpa(columns["elevation_m"])
    sun = solar_position(columns["time_unix_s"], columns["latitude_deg"],
                         columns["longitude_deg"], columns["elevation_m"], pressure)
    return madronich_uv_index(np.cos(np.deg2rad(sun.zenith_deg)), columns["ozone_du"])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1_000, 10_000, 100_000])
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()

    largest = max(args.sizes)
    columns = daytime_records(largest)
    conditions = {n: engine.Conditions.from_columns({k: v[:n] for k, v in columns.items()})
                  for n in args.sizes}
    engine.compute(conditions[min(args.sizes)])  # load tables, warm caches

    print(f"uvdose engine benchmark: one core, daytime records, best of {args.repeats}"
          f" (1 run at >= 100 000)")
    print(f"{'records':>9} | {'engine s':>9} {'rec/s':>10} | {'Madronich s':>11} {'rec/s':>10}"
          f" | {'cost ratio':>10}")
    engine_rate = {}
    for n in args.sizes:
        repeats = 1 if n >= 100_000 else args.repeats
        sub = {k: v[:n] for k, v in columns.items()}
        t_engine = best_of(repeats, lambda: engine.compute(conditions[n]))
        t_madronich = best_of(repeats, lambda: madronich_path(sub))
        engine_rate[n] = n / t_engine
        print(f"{n:>9} | {t_engine:>9.3f} {n / t_engine:>10.0f} | {t_madronich:>11.3f}"
              f" {n / t_madronich:>10.0f} | {t_engine / t_madronich:>9.1f}x")

    n_direct = min(1_000, largest)
    direct_conditions = engine.Conditions.from_columns({k: v[:n_direct] for k, v in columns.items()})
    t_direct = best_of(1, lambda: engine.compute(direct_conditions, method="direct"))
    t_table = best_of(args.repeats, lambda: engine.compute(direct_conditions, method="auto"))
    print(f"\nfull solve (method 'direct') on {n_direct} records: {t_direct:.3f} s"
          f" ({n_direct / t_direct:.0f} rec/s); table path {t_table:.4f} s;"
          f" table is {t_direct / t_table:.0f}x faster")

    n_ozone = 100_000
    oz = daytime_records(n_ozone, seed=5) if largest < n_ozone else {k: v[:n_ozone] for k, v in columns.items()}
    day_of_year = 1.0 + (oz["time_unix_s"] - YEAR_2026_UNIX_S) / 86400.0
    resolver = OzoneResolver()
    missing = np.full(n_ozone, np.nan)
    t_climatology = best_of(args.repeats, lambda: climatological_ozone_du(
        oz["latitude_deg"], oz["longitude_deg"], day_of_year))
    t_resolver = best_of(args.repeats, lambda: resolver.resolve(
        oz["latitude_deg"], oz["longitude_deg"], oz["time_unix_s"], missing))
    spectral_rate = engine_rate.get(n_ozone, engine_rate[largest])
    print(f"\nozone lookup, {n_ozone} records: climatology {t_climatology:.4f} s"
          f" ({n_ozone / t_climatology:.0f} rec/s), resolver {t_resolver:.4f} s"
          f" ({n_ozone / t_resolver:.0f} rec/s); resolver is"
          f" {(n_ozone / t_resolver) / spectral_rate:.0f}x the spectral engine's rate")

    tracemalloc.start()
    engine.compute(conditions[largest])
    _, traced_peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    peak_rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # Linux: KiB
    print(f"\npeak memory at {largest} records: traced allocations {traced_peak / 2**20:.0f} MiB,"
          f" process peak RSS {peak_rss / 2**20:.0f} MiB (limit 2048 MiB)")


if __name__ == "__main__":
    main()
