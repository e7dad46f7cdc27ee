"""Speed of daily field totals and of route doses, with the engine's share.

Fields: 10 000 fields for one day (daily totals of plant_damage, plant_growth and
erythema) through ``models.dose.field_season`` with the engine as evaluator.
Baseline in the same process: the straightforward integration of the same fields over
the whole UTC day with a 10-minute trapezoid (145 engine samples per field-day), on a
subset and scaled per field-day.

Routes: 1 000 routes of 500 points (1-minute fixes, two parked stops each) through
``models.vehicle_routes.route_doses`` behind clear side glass. Baseline: the same function
called route by route in a Python loop, on a subset, scaled per point.

Scenario (invented): vans out of a depot at 51.2 N, 6.8 E on 2026-07-15; fields
scattered over 55 S–65 N. Targets: ≥ 2 000 field-days/s, ≥ 50 000 route points/s on
one core. Run: python tests/benchmarks/bench_doses.py [--fields N] [--routes N] [--method M]
"""
import argparse
import time

import numpy as np

from uvdose.models import dose, filters, vehicle_routes
from uvdose.models.spectral_grid import WAVELENGTH_NM

DAY = 1781827200.0
ROUTE_DAY_START = 1784098800.0  # 2026-07-15 07:00 UTC


class Timed:
    """Wrap an evaluator and add up the time spent inside it."""

    def __init__(self, evaluate):
        self.evaluate, self.seconds, self.samples = evaluate, 0.0, 0

    def __call__(self, columns):
        start = time.perf_counter()
        out = self.evaluate(columns)
        self.seconds += time.perf_counter() - start
        self.samples += len(columns["time_unix_s"])
        return out


def bench_fields(n_fields: int, n_baseline: int, method: str) -> None:
    rng = np.random.default_rng(11)
    fields = {"latitude_deg": rng.uniform(-55.0, 65.0, n_fields),
              "longitude_deg": rng.uniform(-180.0, 180.0, n_fields),
              "surface_albedo": np.full(n_fields, 0.05)}
    spectra = ["plant_damage", "plant_growth", "erythema"]
    engine = dose.engine_evaluator(spectra, method=method)
    engine({"time_unix_s": np.array([DAY + 43200.0]), "latitude_deg": np.zeros(1),
            "longitude_deg": np.zeros(1)})  # load tables before timing

    timed = Timed(engine)
    start = time.perf_counter()
    dose.field_season(fields, [DAY], timed, spectra=spectra)
    ours = time.perf_counter() - start

    subset = {k: v[:n_baseline] for k, v in fields.items()}
    base_timed = Timed(engine)
    start = time.perf_counter()
    dose.window_doses(subset, np.full(n_baseline, DAY), np.full(n_baseline, DAY + 86400.0),
                      base_timed, step_s=600, spectra=spectra)
    baseline = (time.perf_counter() - start) / n_baseline * n_fields

    print(f"fields: {n_fields} field-days")
    print(f"  ours (sunrise-sunset, Gauss-Legendre {dose.DEFAULT_GAUSS_NODES} nodes): {ours:7.2f} s"
          f"  {n_fields / ours:9.0f} field-days/s  engine share {timed.seconds / ours:5.1%}"
          f"  samples {timed.samples}")
    print(f"  baseline (whole UTC day, 10-min trapezoid, {n_baseline} fields scaled): {baseline:7.2f} s"
          f"  {n_fields / baseline:9.0f} field-days/s  engine share {base_timed.seconds / (baseline * n_baseline / n_fields):5.1%}")
    print(f"  ratio ours/baseline speed: {baseline / ours:.1f}x   target >= 2000 field-days/s")


def synthetic_routes(n_routes: int, n_points: int, rng) -> vehicle_routes.RoutePoints:
    depot_lat, depot_lon = 51.2, 6.8
    start = ROUTE_DAY_START + rng.uniform(0.0, 3600.0, n_routes)
    t = start[:, None] + 60.0 * np.arange(n_points)[None, :]
    heading = np.cumsum(rng.normal(0.0, 0.3, (n_routes, n_points)), axis=1) + rng.uniform(0, 6.3, (n_routes, 1))
    speed_deg = 0.008  # about 0.9 km per minute
    lat = depot_lat + np.cumsum(speed_deg * np.cos(heading), axis=1)
    lon = depot_lon + np.cumsum(speed_deg * np.sin(heading) / np.cos(np.radians(depot_lat)), axis=1)
    stop = np.zeros((n_routes, n_points), bool)
    stop[:, [n_points // 3, 2 * n_points // 3]] = True
    return vehicle_routes.RoutePoints(np.repeat(np.arange(n_routes), n_points), t.ravel(), lat.ravel(),
                              lon.ravel(), stop.ravel(), np.zeros(n_routes * n_points, bool))


def bench_routes(n_routes: int, n_points: int, n_baseline: int, method: str) -> None:
    rng = np.random.default_rng(5)
    points = synthetic_routes(n_routes, n_points, rng)
    spectra = ["erythema", "actinic_icnirp"]
    glass = filters.FILTERS["clear_side_glass"].transmittance(WAVELENGTH_NM)
    engine = dose.engine_evaluator(spectra, transmittance=glass, method=method)
    timed = Timed(engine)
    start = time.perf_counter()
    vehicle_routes.route_doses(points, timed, spectra=spectra)
    ours = time.perf_counter() - start

    base_timed = Timed(engine)
    start = time.perf_counter()
    for r in range(n_baseline):
        mask = points.route == r
        one = vehicle_routes.RoutePoints(np.zeros(mask.sum(), np.int64), points.time_unix_s[mask],
                                 points.latitude_deg[mask], points.longitude_deg[mask],
                                 points.stop[mask], points.gap[mask])
        vehicle_routes.route_doses(one, base_timed, spectra=spectra)
    baseline = (time.perf_counter() - start) / n_baseline * n_routes
    total = n_routes * n_points
    print(f"routes: {n_routes} x {n_points} points = {total}")
    print(f"  ours (all routes at once, 5-min step): {ours:7.2f} s  {total / ours:9.0f} points/s"
          f"  engine share {timed.seconds / ours:5.1%}  samples {timed.samples}")
    print(f"  baseline (route by route, {n_baseline} routes scaled): {baseline:7.2f} s"
          f"  {total / baseline:9.0f} points/s")
    print(f"  ratio ours/baseline speed: {baseline / ours:.1f}x   target >= 50000 points/s")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--fields", type=int, default=10_000)
    parser.add_argument("--routes", type=int, default=1_000)
    parser.add_argument("--points", type=int, default=500)
    parser.add_argument("--method", default="auto", help="clear-sky method: auto, table or direct")
    args = parser.parse_args()
    print(f"clear-sky method: {args.method}")
    bench_fields(args.fields, max(1, min(200, args.fields // 10)), args.method)
    bench_routes(args.routes, args.points, max(1, min(20, args.routes // 10)), args.method)


if __name__ == "__main__":
    main()
