"""Benchmark of the clear-sky optics and full solve (a script; pytest does not collect it).

    python tests/benchmarks/bench_clear_sky.py [--records 1024] [--repeats 5]

Scenario (invented, our own): a greenhouse-film supplier's planner asks for the clear-sky
UV spectrum over 1 024 growing sites (one solver chunk) at one instant, zenith 5–85°,
ozone 240–420 DU, sites from sea level to 2 500 m, light haze. Printed, each against a baseline run here:

1. ``optics.layer_optics`` vectorised over all records, against (a) a Python loop calling
   it one record at a time and (b) the plain-expression form (a fresh array for every
   intermediate), which is what the in-place form replaced.
2. ``clear_sky.spectral_irradiance_direct_solve`` over all records, against a Python loop
   of one-record solves on the first 200 records (scaled per record).

The machine is shared: read the ratios, and expect the absolute figures to move.
"""
from __future__ import annotations

import argparse
import statistics
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from uvdose.models import clear_sky, optics  # noqa: E402
from uvdose.models.atmosphere import (DOBSON_UNIT_CM2, exponential_layer_fraction,  # noqa: E402
                               pressure_scale, standard_layers)
from uvdose.models.spectral_grid import WAVELENGTH_NM  # noqa: E402
from timing import timings  # noqa: E402  (this folder; see timing.py)


def scenario(records: int, seed: int = 7) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    elevation_m = rng.uniform(0.0, 2500.0, records)
    return {
        "solar_zenith_deg": rng.uniform(5.0, 85.0, records),
        "earth_sun_distance_au": np.full(records, 1.003),
        "ozone_du": rng.uniform(240.0, 420.0, records),
        "pressure_hpa": 1013.25 * (1.0 - 2.25577e-5 * elevation_m) ** 5.25588,
        "surface_albedo": rng.uniform(0.03, 0.2, records),
        "aod_550": rng.uniform(0.05, 0.3, records),
        "angstrom_exponent": np.full(records, 1.3),
        "single_scattering_albedo": np.full(records, 0.93),
        "asymmetry_factor": np.full(records, 0.7),
    }


def optics_arguments(case, rows=slice(None)):
    return (case["ozone_du"][rows], case["pressure_hpa"][rows], case["aod_550"][rows],
            case["angstrom_exponent"][rows], case["single_scattering_albedo"][rows],
            case["asymmetry_factor"][rows])


def layer_optics_plain(ozone_du, pressure_hpa, aod_550, alpha, ssa_a, g_a):
    """Baseline: the same optics written as plain expressions, one array per term."""
    layers = standard_layers()
    sigma = optics.ozone_cross_section_cm2(WAVELENGTH_NM, layers.ozone_temperature_k)
    tau_r = (pressure_scale(pressure_hpa)[:, None, None] * layers.air_column_fraction[None, :, None]
             * optics.rayleigh_optical_depth(WAVELENGTH_NM)[None, None, :])
    tau_o = (ozone_du[:, None, None] * DOBSON_UNIT_CM2
             * layers.ozone_column_fraction[None, :, None] * sigma[None])
    column = aod_550[:, None] * (WAVELENGTH_NM[None, :] / 550.0) ** -alpha[:, None]
    tau_a = exponential_layer_fraction(2.0)[None, :, None] * column[:, None, :]
    tau = tau_r + tau_o + tau_a
    scattering = tau_r + ssa_a[:, None, None] * tau_a
    return tau, scattering / tau, ssa_a[:, None, None] * tau_a * g_a[:, None, None] / scattering


def best_and_median(repeats, function):
    times = timings(repeats, function)
    return min(times), statistics.median(times)


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--records", type=int, default=1024)
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    n, repeats = args.records, args.repeats
    case = scenario(n)
    clear_sky.spectral_irradiance_direct_solve(*[v[:4] for v in case.values()])  # warm caches

    fast = optics.layer_optics(*optics_arguments(case))
    plain = layer_optics_plain(*optics_arguments(case))
    for ours, theirs in zip((fast.tau, fast.ssa, fast.g), plain):
        np.testing.assert_allclose(ours, theirs, rtol=1e-12)
    del fast, plain

    vector_s, _ = best_and_median(repeats, lambda: optics.layer_optics(*optics_arguments(case)))
    plain_s, _ = best_and_median(repeats, lambda: layer_optics_plain(*optics_arguments(case)))
    loop_n = min(n, 200)
    loop_s, _ = best_and_median(repeats, lambda: [optics.layer_optics(*optics_arguments(case, slice(i, i + 1)))
                                          for i in range(loop_n)])
    loop_per_record = loop_s / loop_n
    print(f"layer_optics, {n} records x {standard_layers().count} layers x {WAVELENGTH_NM.size} wavelengths")
    print(f"  vectorised in place : {vector_s * 1e3:8.1f} ms  ({vector_s / n * 1e6:6.1f} us/record)")
    print(f"  plain expressions   : {plain_s * 1e3:8.1f} ms  -> in-place speed-up {plain_s / vector_s:5.2f}x")
    print(f"  per-record loop     : {loop_per_record * 1e6:8.1f} us/record -> vectorised speed-up "
          f"{loop_per_record * n / vector_s:5.1f}x")

    solve_s, solve_median = best_and_median(repeats, lambda: clear_sky.spectral_irradiance_direct_solve(
        *case.values()))
    single_s, _ = best_and_median(1, lambda: [clear_sky.spectral_irradiance_direct_solve(
        *[v[i:i + 1] for v in case.values()]) for i in range(loop_n)])
    print(f"spectral_irradiance_direct_solve, {n} records (chunks of {clear_sky.CHUNK_RECORDS})")
    print(f"  vectorised          : {solve_s * 1e3:8.1f} ms best, {solve_median * 1e3:.1f} ms median"
          f"  ({n / solve_s:8.0f} records/s)")
    print(f"  per-record loop     : {single_s / loop_n * 1e3:8.2f} ms/record -> vectorised speed-up "
          f"{single_s / loop_n * n / solve_s:5.1f}x")


if __name__ == "__main__":
    main()
