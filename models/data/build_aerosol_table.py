"""Build models/data/aerosol_table.npz, the tabulated effect of any aerosol on the sky.

Runs the full solve of ``models.aerosol_table.compute_table`` (layer optics of
``models.optics`` on the AFGL 1986 U.S. Standard layers, pseudo-spherical beam, the
four-stream discrete-ordinates solver of ``models.four_stream``) with and without the
aerosol on every node of the table's axes (zenith, ozone, pressure, spectral aerosol
optical depth, single scattering albedo, asymmetry factor) at the wavelengths of
``WAVELENGTH_NODES_NM``, and writes the float32 log ratios with the fingerprint
(``models.aerosol_table.fingerprint``) and a note of the method.

Run from the repository root:  python models/data/build_aerosol_table.py [output]
Deterministic; rerun it after any change to the optics, the atmosphere, the solver or the
axes (about ten minutes on one core; tests/models/test_aerosol_table.py says when).
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
from uvdose.models import aerosol_table  # noqa: E402

NOTE = ("ln(with aerosol / aerosol-free) of the four-stream diffuse flux over a black surface "
        "(per zenith) and of the spherical albedo; axes zenith_deg, ozone_du, pressure_hpa, "
        "ssa, g, spectral aerosol optical depth, wavelength_nm (see models/aerosol_table.py)")


def build(output: Path) -> None:
    began = time.perf_counter()
    tables = aerosol_table.compute_table()
    axes = {"zenith_nodes_deg": aerosol_table.ZENITH_NODES_DEG,
            "ozone_nodes_du": aerosol_table.OZONE_NODES_DU,
            "pressure_nodes_hpa": aerosol_table.PRESSURE_NODES_HPA,
            "ssa_nodes": aerosol_table.SSA_NODES,
            "asymmetry_nodes": aerosol_table.ASYMMETRY_NODES,
            "aerosol_depth_nodes": aerosol_table.AEROSOL_DEPTH_NODES,
            "wavelength_nodes_nm": aerosol_table.WAVELENGTH_NODES_NM}
    # float16 halves the file; its rounding (below 1e-3 of the log ratios, which stay
    # within a few units in the table's range) is far under the interpolation error.
    tables = {name: array.astype(np.float16) for name, array in tables.items()}
    np.savez(output, fingerprint=np.array(aerosol_table.fingerprint()), **axes, **tables,
             meta_note=np.array(NOTE), meta_model_version=np.array(MODEL_VERSION))
    print(f"wrote {output} ({Path(output).stat().st_size / 1e6:.1f} MB) "
          f"in {time.perf_counter() - began:.0f} s")


if __name__ == "__main__":
    build(Path(sys.argv[1]) if len(sys.argv) > 1 else aerosol_table.TABLE_FILE)
