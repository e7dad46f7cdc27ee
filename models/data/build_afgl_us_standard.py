"""Build models/data/afgl_us_standard.csv from the AFGL 1986 U.S. Standard profile.

Source: Anderson, G. P., Clough, S. A., Kneizys, F. X., Chetwynd, J. H. and Shettle, E. P.
(1986), AFGL Atmospheric Constituent Profiles (0–120 km), AFGL-TR-86-0110, as distributed
in the PyPI package joseki (identifier "afgl_1986-us_standard"). Run once by hand:

    python models/data/build_afgl_us_standard.py

Columns: altitude_km, pressure_hpa, temperature_k, air_number_density_cm3,
ozone_number_density_cm3 (ozone = air density × ozone mole fraction), at the profile's
own 50 levels (1 km steps to 25 km, 2.5 km to 50 km, 5 km to 120 km).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

OUTPUT = Path(__file__).with_name("afgl_us_standard.csv")


def main() -> None:
    import joseki

    profile = joseki.make("afgl_1986-us_standard")
    altitude_km = _in_units(profile["z"], "km")
    pressure_hpa = _in_units(profile["p"], "hPa")
    temperature_k = _in_units(profile["t"], "K")
    air_cm3 = _in_units(profile["n"], "cm^-3")
    ozone_cm3 = air_cm3 * np.asarray(profile["x_O3"].values, dtype=float)
    header = [
        "# AFGL 1986 U.S. Standard atmosphere (Anderson et al. 1986, AFGL-TR-86-0110)",
        f"# extracted from joseki {joseki.__version__} profile 'afgl_1986-us_standard'"
        " by models/data/build_afgl_us_standard.py",
        "# ozone_number_density_cm3 = air_number_density_cm3 * x_O3",
        "altitude_km,pressure_hpa,temperature_k,air_number_density_cm3,ozone_number_density_cm3",
    ]
    rows = [f"{z:.3f},{p:.6e},{t:.3f},{n:.6e},{o:.6e}"
            for z, p, t, n, o in zip(altitude_km, pressure_hpa, temperature_k, air_cm3, ozone_cm3)]
    OUTPUT.write_text("\n".join(header + rows) + "\n")
    print(f"wrote {OUTPUT} ({len(rows)} levels)")


def _in_units(variable, unit: str) -> np.ndarray:
    import pint

    registry = pint.UnitRegistry()
    quantity = registry.Quantity(np.asarray(variable.values, dtype=float), variable.attrs["units"])
    return quantity.to(unit).magnitude


if __name__ == "__main__":
    main()
