"""Speed of the fast clear-sky path: client aerosol, a field season, the default path.

    python tests/benchmarks/bench_fast_path.py [--fields 1000] [--days 183]

Scenario (invented, our own): the daytime van positions of ``bench_engine.py`` (mid-
latitudes over a year, ozone given), and a farm cooperative's fields with their own
sun-photometer aerosol (AOD(550) 0.05-0.6, Ångström exponent 0.6-1.8, single scattering
albedo 0.82-0.97, asymmetry factor 0.62-0.75). Printed, all in one process on one core:

1. ``models.engine.compute`` on 10 000 records with the default aerosol (the default
   path, and the spectral path those answers take behind a filter) against the same
   records with the client aerosol (target: at most 2x the time), and against the full
   solve on the first 200 of them (scaled), the path such records took before.
2. A season of field doses (``models.dose.field_season``, Gauss-Legendre days) for
   ``--fields`` fields over ``--days`` days with the client aerosol, answered in full with
   a full-solve budget of 0 (no record may need the full solve), against the same season
   with the default aerosol.
3. The default path (UV Index and the default spectra, no filter, no spectrum) in
   records/s at 10 000 records (target at least 80 000), as a multiple of the solar-position
   step alone on the same records (target at most 1.6x), and against the spectral path
   the same answers took before (forced here by a filter of transmittance 1).

The machine is shared: read the ratios; the absolute figures move with the load.
"""
from __future__ import annotations

import os

for _variable in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_variable] = "1"

import argparse  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))

from uvdose.models import clear_sky, dose, engine  # noqa: E402
from uvdose.models.solar_geometry import surface_pressure_hpa, solar_position  # noqa: E402
from uvdose.models.spectral_grid import WAVELENGTH_NM  # noqa: E402
from bench_engine import daytime_records  # noqa: E402
from timing import best_of  # noqa: E402

SEASON_START_UNIX_S = 1775001600.0  # 2026-04-01 00:00 UTC


def client_aerosol(n: int, seed: int = 5) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    return {"aod_550": rng.uniform(0.05, 0.6, n), "angstrom_exponent": rng.uniform(0.6, 1.8, n),
            "single_scattering_albedo": rng.uniform(0.82, 0.97, n),
            "asymmetry_factor": rng.uniform(0.62, 0.75, n)}


def compute(columns, **options):
    return engine.compute(engine.Conditions.from_columns(columns), **options)


def bench_client_aerosol(repeats: int) -> None:
    records = daytime_records(10_000)
    own = records | client_aerosol(10_000)
    compute(records)  # load the tables and build the weighted integrals before timing
    compute(own)
    t_default = best_of(repeats, lambda: compute(records))
    clear = np.ones(WAVELENGTH_NM.size)  # a filter of transmittance 1: the spectral path
    t_default_spectral = best_of(repeats, lambda: compute(records, transmittance=clear))
    t_own = best_of(repeats, lambda: compute(own))
    first = {key: value[:200] for key, value in own.items()}
    t_full = best_of(1, lambda: compute(first, method="direct")) * 50
    print("1. 10 000 records, engine.compute")
    print(f"   default aerosol {t_default:7.3f} s  {10_000 / t_default:9.0f} rec/s")
    print(f"   default aerosol, spectral path {t_default_spectral:7.3f} s  "
          f"{10_000 / t_default_spectral:9.0f} rec/s")
    print(f"   client aerosol  {t_own:7.3f} s  {10_000 / t_own:9.0f} rec/s   "
          f"ratio {t_own / t_default:.2f}x the default path (target <= 2x), "
          f"{t_own / t_default_spectral:.2f}x its spectral path")
    print(f"   client aerosol by the full solve (200 records, scaled) {t_full:7.1f} s   "
          f"{t_full / t_own:.0f}x the fast path")


def bench_season(n_fields: int, n_days: int) -> None:
    rng = np.random.default_rng(17)
    fields = {"latitude_deg": rng.uniform(35.0, 55.0, n_fields),
              "longitude_deg": rng.uniform(-10.0, 30.0, n_fields),
              "surface_albedo": np.full(n_fields, 0.05)}
    days = SEASON_START_UNIX_S + 86400.0 * np.arange(n_days)
    spectra = ["plant_damage", "erythema"]
    timings = {}
    for label, per_field in (("default aerosol", fields),
                             ("client aerosol", fields | client_aerosol(n_fields))):
        budget = clear_sky.FullSolveBudget(0)
        evaluate = dose.engine_evaluator(spectra, full_solve_budget=budget)
        start = time.perf_counter()
        season = dose.field_season(per_field, days, evaluate, spectra=spectra)
        timings[label] = time.perf_counter() - start
        total = season.season_dose_j_m2["erythema"][:, -1]
        print(f"   {label:16s} {timings[label]:7.1f} s  {season.samples} samples  "
              f"{season.samples / timings[label]:8.0f} samples/s  full solves {budget.used}  "
              f"every field answered: {bool(np.all(np.isfinite(total) & (total > 0)))}")
    print(f"2. season of {n_fields} fields x {n_days} days: client / default aerosol "
          f"{timings['client aerosol'] / timings['default aerosol']:.2f}x")


def bench_default_path(repeats: int) -> None:
    records = daytime_records(10_000, seed=23)
    compute(records)
    pressure = surface_pressure_hpa(records["elevation_m"], np.full(10_000, np.nan))
    t_sun = best_of(repeats, lambda: solar_position(records["time_unix_s"], records["latitude_deg"],
                                                    records["longitude_deg"], records["elevation_m"],
                                                    pressure))
    t_engine = best_of(repeats, lambda: compute(records))
    clear = np.ones(WAVELENGTH_NM.size)
    compute(records, transmittance=clear)
    t_spectral = best_of(repeats, lambda: compute(records, transmittance=clear))
    print("3. default path, 10 000 records (UV Index + default spectra)")
    print(f"   solar position alone {t_sun:7.4f} s  {10_000 / t_sun:9.0f} rec/s")
    print(f"   engine (weighted integrals) {t_engine:7.4f} s  {10_000 / t_engine:9.0f} rec/s  "
          f"{t_engine / t_sun:.2f}x the solar step (targets >= 80 000 rec/s, <= 1.6x)")
    print(f"   engine (spectral path, as before) {t_spectral:7.4f} s  {10_000 / t_spectral:9.0f} rec/s  "
          f"{t_spectral / t_sun:.2f}x the solar step; integrals {t_spectral / t_engine:.2f}x faster")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--fields", type=int, default=1000)
    parser.add_argument("--days", type=int, default=183)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    bench_client_aerosol(args.repeats)
    bench_season(args.fields, args.days)
    bench_default_path(args.repeats)


if __name__ == "__main__":
    main()
