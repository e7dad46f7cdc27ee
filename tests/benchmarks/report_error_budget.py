"""The error budget of a default answer, by latitude band and season (prints the README table).

    python tests/benchmarks/report_error_budget.py

Not a speed benchmark: it reproduces the figures the README quotes. Records: local
solar noon on the 15th of January, April, July and October, at latitudes 5°-85° in both
hemispheres every 10° and 8 longitudes, with nothing but place and time given (the
default answer: observed ozone climatology, default aerosol and albedo, no clouds,
exact inputs without the cache). For each band and month it prints the median 1-sigma
relative uncertainty of the UV Index and of its components (per cent), and the ozone
part of the same answer with the 1979 fit (``ozone_climatology=van_heuklon_1979``),
whose sigma includes its bias against the observed climatology; then the median
reduction when the client sends each input.
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from uvdose.models import engine, uncertainty  # noqa: E402
from uvdose.models.ozone_grids import OzoneResolver  # noqa: E402

BANDS = (("60-90 S", -85, -55), ("30-60 S", -55, -25), ("30 S-30 N", -25, 25), ("30-60 N", 25, 55),
         ("60-90 N", 55, 85))
MONTHS = (("Jan", "2026-01-15"), ("Apr", "2026-04-15"), ("Jul", "2026-07-15"), ("Oct", "2026-10-15"))
LONGITUDES = np.arange(-157.5, 180.0, 45.0)


def noon_records(date: str, lat_low: float, lat_high: float) -> dict[str, np.ndarray]:
    lat = np.arange(lat_low, lat_high + 1, 10.0)
    lat, lon = np.meshgrid(lat, LONGITUDES, indexing="ij")
    midnight = float(np.datetime64(date, "s").astype("int64"))
    time = midnight + 43200.0 - lon.ravel() / 15.0 * 3600.0  # local solar noon, roughly
    return {"time_unix_s": time, "latitude_deg": lat.ravel(), "longitude_deg": lon.ravel()}


def run(columns, climatology="observed"):
    resolver = OzoneResolver(climatology=climatology)
    return engine.compute(engine.Conditions.from_columns(columns), spectra=("erythema",), ozone_resolver=resolver)


def percent(values, lit):
    return 100.0 * float(np.median(values[lit]))


def main() -> None:
    print("1-sigma relative uncertainty of the default answer's UV Index at local noon, per cent")
    print(f"{'band':10s} {'month':5s} {'total':>6s} {'ozone':>6s} {'aerosol':>7s} {'albedo':>6s} "
          f"{'model':>6s} | {'ozone, 1979 fit':>15s}")
    shrink = {"ozone_du": [], "aod_550": []}
    for band, low, high in BANDS:
        for month, date in MONTHS:
            columns = noon_records(date, low, high)
            result = run(columns)
            lit = result.uv_index > 0.5
            if not lit.any():
                print(f"{band:10s} {month:5s} polar night")
                continue
            parts = result.components_of("uv_index")
            fit = run(columns, "van_heuklon_1979").components_of("uv_index")["ozone"]
            print(f"{band:10s} {month:5s} {percent(uncertainty.combined(parts), lit):6.1f} "
                  f"{percent(parts['ozone'], lit):6.1f} {percent(parts['aerosol'], lit):7.1f} "
                  f"{percent(parts['surface_albedo'], lit):6.1f} {percent(parts['model'], lit):6.1f} | "
                  f"{percent(fit, lit):15.1f}")
            n = len(result.uv_index)
            base = uncertainty.combined(parts)[lit]
            with_ozone = run({**columns, "ozone_du": result.ozone_du}).components_of("uv_index")
            with_aod = run({**columns, "aod_550": np.full(n, 0.1)}).components_of("uv_index")
            shrink["ozone_du"].append(uncertainty.combined(with_ozone)[lit] / base)
            shrink["aod_550"].append(uncertainty.combined(with_aod)[lit] / base)
    print()
    for name, ratios in shrink.items():
        print(f"sending {name}: total sigma x {np.median(np.concatenate(ratios)):.2f} (median over the table)")
    cover = uncertainty.cloud_relative_sigma(np.array(["cover"] * 3, dtype=object), np.array([0.9, 0.6, 0.3]))
    measured = uncertainty.cloud_relative_sigma(np.array(["irradiance"] * 3, dtype=object), np.array([0.9, 0.6, 0.3]))
    print("clouds part at CMF 0.9 / 0.6 / 0.3: from cover "
          + " / ".join(f"{100 * v:.0f} %" for v in cover) + "; from a measured irradiance "
          + " / ".join(f"{100 * v:.0f} %" for v in measured) + f"; a given factor {100 * uncertainty.CLIENT_CMF_SIGMA:.0f} %")


if __name__ == "__main__":
    main()
