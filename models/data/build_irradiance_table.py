"""Build models/data/irradiance_table.npz, the precomputed clear-sky solver output.

Runs the full solve of ``models.irradiance_table.compute_table`` (layer optics of
``models.optics`` on the AFGL 1986 U.S. Standard layers, pseudo-spherical beam air
masses, the four-stream discrete-ordinates solver of ``models.four_stream``) on every node
of the table's axes for the default aerosol type, and writes float32 arrays with the
fingerprint (``models.irradiance_table.fingerprint``) and provenance in ``meta_*``
entries.

Run from the repository root:  python models/data/build_irradiance_table.py [output]
Deterministic; rerun it after any change to the optics, the atmosphere, the solver or
the table axes (about three minutes; the staleness test in tests/models/test_irradiance_table.py says when).
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

REPO_ROOT = Path(__file__).resolve().parents[2]
if str(REPO_ROOT) not in sys.path:
    sys.path.insert(0, str(REPO_ROOT))

from uvdose.models import MODEL_VERSION  # noqa: E402
from uvdose.models import irradiance_table as table  # noqa: E402

PROVENANCE = {
    "title": "uvdose precomputed clear-sky surface UV (per unit extraterrestrial irradiance)",
    "method": (
        "models.irradiance_table.compute_table: layer optics (Bodhaine et al. 1999 Rayleigh, "
        "DBM ozone cross sections, Angstrom aerosol) on the AFGL 1986 US Standard layers, "
        "pseudo-spherical beam, multi-layer four-stream discrete ordinates (double-Gauss, "
        "delta-M, Wiscombe 1977; Stamnes & Swanson 1981 reduction; adding method), "
        "Rayleigh + Henyey-Greenstein phase function, black surface plus spherical albedo"
    ),
    "axes": "zenith_deg, ozone_du, pressure_hpa, aod_550 (see models/irradiance_table.py)",
    "units": "log of flux per unit extraterrestrial irradiance normal to the beam; "
             "spherical albedo dimensionless",
}


def main(output: Path = table.TABLE_FILE) -> None:
    started = time.perf_counter()
    arrays = table.compute_table()
    meta = {f"meta_{key}": np.array(value) for key, value in PROVENANCE.items()}
    meta["meta_model_version"] = np.array(MODEL_VERSION)
    meta["meta_aerosol_type"] = np.array(table.DEFAULT_AEROSOL_TYPE)
    np.savez(output, fingerprint=np.array(table.fingerprint()),
             zenith_nodes_deg=table.ZENITH_NODES_DEG, ozone_nodes_du=table.OZONE_NODES_DU,
             pressure_nodes_hpa=table.PRESSURE_NODES_HPA, aod_nodes=table.AOD_NODES,
             **arrays, **meta)
    size_mb = Path(output).stat().st_size / 1e6
    print(f"wrote {output} ({size_mb:.1f} MB) in {time.perf_counter() - started:.0f} s")


if __name__ == "__main__":
    main(Path(sys.argv[1]) if len(sys.argv) > 1 else table.TABLE_FILE)
