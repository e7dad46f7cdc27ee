"""Build models/data/ozone_climatology.npz, the embedded total-ozone climatology.

Samples the analytic fit of Van Heuklon (1979), Solar Energy 22:63-68 (equation 4,
Table 1; implemented in ``models.ozone_climatology.van_heuklon_ozone_du``) at cell
centres of a 2.5° latitude × 5° longitude grid, every 5 days of a 365-day year,
and stores it as float32 with its provenance in ``meta_*`` entries.

Run from the repository root:  python models/data/build_ozone_climatology.py
The output is deterministic; rerun it after changing the fit or the grid and bump
``models.MODEL_VERSION``.
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

REPO_ROOT = Path(__file__).resolve().parents[2]
if str(REPO_ROOT) not in sys.path:
    sys.path.insert(0, str(REPO_ROOT))

from uvdose.models.ozone_climatology import (  # noqa: E402
    ClimatologyTable,
    DAYS_PER_CLIMATOLOGICAL_YEAR,
    TABLE_PATH,
    van_heuklon_ozone_du,
)

LATITUDE_STEP_DEG = 2.5
LONGITUDE_STEP_DEG = 5.0
DAY_STEP = 5.0

PROVENANCE = {
    "title": "uvdose embedded total-ozone climatology",
    "source": (
        "Van Heuklon, T. K. (1979). Estimating atmospheric ozone for solar radiation "
        "models. Solar Energy 22(1), 63-68. doi:10.1016/0038-092X(79)90060-4. "
        "Equation 4 with the coefficients of Table 1."
    ),
    "method": (
        "Analytic fit evaluated at cell centres (latitude -88.75..88.75 step 2.5 deg, "
        "longitude -177.5..177.5 step 5 deg, east positive) on day-of-year nodes "
        "1, 6, ..., 361 of a 365-day year; the axis wraps from day 361 to day 366 = day 1."
    ),
    "units": "Dobson units (1 DU = 2.687e20 molecules m-2)",
    "axes": "ozone_du[day, latitude, longitude]",
    "caveat": (
        "Pre-depletion climatology: the Antarctic spring ozone depletion is absent; "
        "polar spring values need client or operator data."
    ),
    "built_by": "models/data/build_ozone_climatology.py",
}


def build_table():
    """Return (day_nodes, latitude_nodes_deg, longitude_nodes_deg, ozone_du float32)."""
    day_nodes = np.arange(1.0, 1.0 + DAYS_PER_CLIMATOLOGICAL_YEAR, DAY_STEP)
    latitude_nodes = np.arange(-90.0 + LATITUDE_STEP_DEG / 2, 90.0, LATITUDE_STEP_DEG)
    longitude_nodes = np.arange(-180.0 + LONGITUDE_STEP_DEG / 2, 180.0, LONGITUDE_STEP_DEG)
    day, lat, lon = np.meshgrid(day_nodes, latitude_nodes, longitude_nodes, indexing="ij")
    ozone = van_heuklon_ozone_du(lat, lon, day).astype(np.float32)
    return day_nodes, latitude_nodes, longitude_nodes, ozone


def main(path: Path = TABLE_PATH) -> None:
    ClimatologyTable.write(path, *build_table(), PROVENANCE)


if __name__ == "__main__":
    main()
