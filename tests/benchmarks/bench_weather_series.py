"""A field season under a weather series against the same season with daily values.

1 000 fields (invented: the orchards of a cooperative spread over 43–46° N, 3–7° E, each
with its own station) over the growing season 1 April – 30 September (183 days), through
``models.dose.field_season`` with the engine as evaluator (plant damage, plant growth,
erythema; the default Gauss–Legendre days):

* baseline: one cloud factor per field and day (the ``daily`` table);
* series: an hourly series of measured global irradiance per field (24 readings a day,
  4.4 million readings), turned into cloud steps (``models.weather_series.cloud_steps``:
  intervals, interval-mean clear sky, plausibility checks) and integrated by product
  weights.

Both runs in the same process; the ratio is the figure to read (target: series at most
1.5× the daily values' time). The series run also reports its preparation alone (the
readings to steps) and its engine samples, which should equal the baseline's.
Run: python tests/benchmarks/bench_weather_series.py [--fields N] [--days D]
"""
import argparse
import resource
import time

import numpy as np

from uvdose.models import dose, weather_series

FIRST_DAY = float(np.datetime64("2026-04-01", "s").astype(np.int64))
SPECTRA = ["plant_damage", "plant_growth", "erythema"]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--fields", type=int, default=1000)
    parser.add_argument("--days", type=int, default=183)
    args = parser.parse_args()
    rng = np.random.default_rng(18)
    n_fields, n_days = args.fields, args.days
    fields = {"latitude_deg": rng.uniform(43.0, 46.0, n_fields), "longitude_deg": rng.uniform(3.0, 7.0, n_fields),
              "elevation_m": rng.uniform(50.0, 600.0, n_fields)}
    days = FIRST_DAY + 86400.0 * np.arange(n_days)
    evaluate = dose.engine_evaluator(SPECTRA)
    evaluate({"time_unix_s": np.array([FIRST_DAY + 43200.0]), "latitude_deg": np.zeros(1),
              "longitude_deg": np.zeros(1)})  # load the tables before timing

    daily_cmf = rng.uniform(0.3, 1.0, (n_fields, n_days))
    started = time.perf_counter()
    baseline = dose.field_season(fields, days, evaluate, cloud_modification_factor=daily_cmf, spectra=SPECTRA)
    daily_s = time.perf_counter() - started

    # Hourly readings: the clear-sky hourly mean times an invented factor (0.2-1.1),
    # built outside the timing; zero at night.
    stamps = FIRST_DAY + 3600.0 * np.arange(1, 24 * n_days + 1)
    owner = np.repeat(np.arange(n_fields), stamps.size)
    times = np.tile(stamps, n_fields)
    lat, lon, height = (fields[k][owner] for k in ("latitude_deg", "longitude_deg", "elevation_m"))
    clear = np.concatenate([
        weather_series.clear_sky_ghi_mean_w_m2(times[i:i + 500_000] - 3600.0, times[i:i + 500_000],
                                               lat[i:i + 500_000], lon[i:i + 500_000], height[i:i + 500_000])[0]
        for i in range(0, times.size, 500_000)])
    ghi = np.round(clear * rng.uniform(0.2, 1.1, times.size), 1)

    started = time.perf_counter()
    steps = weather_series.cloud_steps(owner, times, {"measured_ghi_w_m2": ghi}, n_fields,
                                       fields["latitude_deg"], fields["longitude_deg"], fields["elevation_m"])
    prepare_s = time.perf_counter() - started
    series = dose.field_season(fields, days, evaluate, spectra=SPECTRA, cloud_steps=steps)
    series_s = time.perf_counter() - started

    field_days = n_fields * n_days
    print(f"{n_fields} fields x {n_days} days = {field_days} field-days; {times.size} hourly readings")
    print(f"daily values : {daily_s:8.2f} s  ({field_days / daily_s:8.0f} field-days/s, {baseline.samples} samples)")
    print(f"hourly series: {series_s:8.2f} s  ({field_days / series_s:8.0f} field-days/s, {series.samples} samples; "
          f"readings to steps {prepare_s:.2f} s)")
    print(f"ratio series / daily: {series_s / daily_s:.3f}  (target <= 1.5)")
    print(f"peak resident memory: {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MiB")
    share = series.series_share_of_daylight
    print(f"series share of daylight: min {share.min():.3f}, median {np.median(share):.3f}")


if __name__ == "__main__":
    main()
