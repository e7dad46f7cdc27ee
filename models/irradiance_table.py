"""Precomputed clear-sky solver output and its interpolation (the fast clear-sky path).

The full solve (``models.clear_sky.spectral_irradiance_direct_solve``: layer optics,
pseudo-spherical beam, four-stream discrete ordinates of ``models.four_stream``) runs
at about a hundred records per second. For the default aerosol type (Ångström exponent, single scattering albedo and
asymmetry factor of ``models.optics``) the surface fluxes depend on four record
inputs only: true solar zenith, total ozone, surface pressure and AOD(550). This table holds,
per wavelength of ``models.spectral_grid.WAVELENGTH_NM``:

- ``log_global_black``: ln of the global (direct + diffuse) horizontal flux over a black
  surface, over (zenith, ozone, pressure, AOD);
- ``log_direct_ozone_free``: ln of the direct horizontal flux divided by mu0, plus the
  beam's slant ozone optical depth, over (zenith, pressure, AOD). Ozone does not
  scatter, so the beam's ozone attenuation is exactly ``exp(-ozone_du * sum_l k_l m_l)``
  (k_l: layer ozone optical depth per DU, m_l: layer air mass) and is applied per
  record; the diffuse flux is the global minus the beam;
- ``spherical_albedo``: the atmosphere's spherical albedo S over (ozone, pressure, AOD)
  (it does not depend on the sun).

Any Lambertian surface albedo a, grey or spectral, is then applied analytically with
``global(a) = global(0) / (1 - a S)`` (Tanré et al. 1979, *Appl. Opt.* 18:3587; 6S,
Vermote et al. 1997), implemented once in ``models.solver_parts.apply_surface_albedo``.
In the adding scheme of the solver (``models.four_stream``) that relation is exact, since a
Lambertian surface reflects isotropically, so the table adds
interpolation error only.

Interpolation is multilinear on logarithms of the fluxes (slant optical depths are close
to linear in each input): along the zenith axis in the air-column-weighted
pseudo-spherical air mass m (``air_mass_coordinate``), linearly for the direct beam and
by four-node Lagrange interpolation in ln m for the global flux; linearly in ozone,
pressure and AOD. The global flux is interpolated
rather than the diffuse one because aerosol forward scattering moves light from the
beam to the diffuse field and leaves their sum much closer to log-linear. The gather and
weighted sum run as one sparse-matrix product per array (``corner_weights``).
Node placement was chosen so that the table stays within 1 % of the full solve for
the UV Index, every action spectrum of ``models.action_spectra`` and the UVB/UVA bands
over ozone 100-700 DU, pressure 500-1060 hPa and AOD(550) 0-2, and within 2 % over the
whole range (measured worst 1.75 %, with ozone under 75 DU, AOD near 4 and the sun below
10 degrees; ``tests/models/test_irradiance_table.py``).

Range: true zenith 0–96° (the sun up to 6° below the horizon: the diffuse light of
civil twilight, no direct beam beyond 90°), and the record schema's ozone 50–700 DU,
pressure 300–1100 hPa and AOD(550) 0–5. A record with its own aerosol type is answered
from this table's aerosol-free sky and ``models.aerosol_table``
(:func:`relative_surface_flux_any_aerosol`) when its aerosol lies in that table's range;
only the rest (very thick or strongly absorbing aerosol) goes to the full solve in
``models.clear_sky``.

The table file ``models/data/irradiance_table.npz`` is written by
``models/data/build_irradiance_table.py`` and carries a fingerprint (``MODEL_VERSION``
plus a hash of the optics inputs and the solver's output at a reference point); a test
fails when the committed table no longer matches the code.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np
import scipy.sparse

from uvdose.models import MODEL_VERSION, aerosol_table, atmosphere, optics
from uvdose.models.record_errors import RecordError, RecordErrors
from uvdose.models.atmosphere import air_mass_coordinate
from uvdose.models.solar_geometry import CIVIL_TWILIGHT_ZENITH_DEG
from uvdose.models.spectral_grid import WAVELENGTH_NM, extraterrestrial_spectrum_w_m2_nm
from uvdose.models.four_stream import transfer_components
from uvdose.models.solver_parts import apply_surface_albedo

TABLE_FILE = Path(__file__).with_name("data") / "irradiance_table.npz"

ZENITH_NODES_DEG = np.array([
    0.0, 12.0, 22.0, 27.0, 32.0, 35.5, 38.75, 41.5, 44.0, 46.25, 48.5, 50.5, 52.5, 54.25, 56.0,
    59.0, 61.75, 64.25, 66.25, 68.25,
    70.25, 71.75, 73.25, 74.75, 76.0, 77.25, 78.25, 79.25, 80.25, 81.0, 81.75, 82.5, 83.25,
    83.75, 84.5, 85.0, 85.5, 86.0, 86.25, 86.75, 87.0, 87.5, 87.75, 88.25, 88.5, 88.75, 89.0,
    89.25, 89.5, 89.75, 90.0,
    90.25, 90.5, 90.75, 91.0, 91.5, 92.0, 92.5, 93.0, 93.5, 94.0, 94.5, 95.0, 95.5, 96.0,
])
"""True solar zenith nodes, degrees: about evenly spaced in ln(air mass) up to 90, rounded,
with extra nodes at 22-56 degrees, where below 290 nm the global flux turns from beam to
skylight; then every 0.25-0.5 degrees through civil twilight (sun below the horizon,
upper atmosphere lit) to ``models.solar_geometry.CIVIL_TWILIGHT_ZENITH_DEG``."""
OZONE_NODES_DU = np.array([50.0, 75.0, 100.0, 130.0, 165.0, 205.0, 250.0, 300.0, 360.0, 430.0,
                           510.0, 600.0, 700.0])
"""Total ozone nodes, DU, over the record schema's 50-700 DU (denser at low ozone, where
the diffuse flux bends most)."""
PRESSURE_NODES_HPA = np.array([300.0, 400.0, 500.0, 610.0, 720.0, 830.0, 945.0, 1060.0, 1100.0])
"""Surface pressure nodes, hPa, over the record schema's 300-1100 hPa."""
AOD_NODES = np.array([0.0, 0.05, 0.12, 0.25, 0.45, 0.75, 1.25, 2.0, 3.0, 5.0])
"""AOD(550) nodes, to the record schema's 5 (denser for thin aerosol: delta-scaling of
the Rayleigh-aerosol mixture makes the fluxes bend most there)."""

DEFAULT_AEROSOL_TYPE = (optics.DEFAULT_ANGSTROM_EXPONENT,
                        optics.DEFAULT_SINGLE_SCATTERING_ALBEDO,
                        optics.DEFAULT_ASYMMETRY_FACTOR)
"""(Ångström exponent, SSA, g) the table was built for."""

_LOG_FLOOR = 1e-300

CHUNK_RECORDS = 2048
"""Records interpolated per block (working set about 1 MB per (records, W) array)."""


def fingerprint() -> str:
    """Hash of what the table depends on: model version, axes, optics and solver output."""
    digest = hashlib.sha256()
    digest.update(MODEL_VERSION.encode())
    for array in (WAVELENGTH_NM, ZENITH_NODES_DEG, OZONE_NODES_DU, PRESSURE_NODES_HPA,
                  AOD_NODES, np.array(DEFAULT_AEROSOL_TYPE)):
        digest.update(np.ascontiguousarray(array, dtype=np.float64).tobytes())
    # Reference point: optics and solver output, rounded so that only real changes count.
    zenith = np.array([30.0, 80.0, 93.0])
    layer = optics.layer_optics(np.full(3, 320.0), 1000.0, 0.3, *DEFAULT_AEROSOL_TYPE)
    path = atmosphere.beam_path_factors(zenith)
    parts = transfer_components(layer.tau, layer.ssa, layer.g, np.cos(np.deg2rad(zenith)),
                                beam_path_factors=path,
                                rayleigh_scattering_fraction=optics.rayleigh_scattering_fraction(
                                    layer, np.full(3, 1000.0)))
    for array in (layer.tau, layer.ssa, layer.g, np.where(np.isinf(path), -1.0, path),
                  parts.direct_horizontal,
                  parts.diffuse_down_black_surface, parts.spherical_albedo):
        digest.update(np.round(np.asarray(array, dtype=np.float64), 9).tobytes())
    return digest.hexdigest()


@lru_cache(maxsize=1)
def ozone_optical_depth_per_du() -> np.ndarray:
    """Ozone optical depth per DU of total column in each layer, (L, W).

    Taken from ``models.optics.layer_optics`` as the difference of two columns that
    differ in ozone only (ozone does not scatter, so it enters the optical depth alone).
    """
    columns = optics.layer_optics(np.array([0.0, 1000.0]), 1013.25, 0.0, *DEFAULT_AEROSOL_TYPE)
    per_du = (columns.tau[1] - columns.tau[0]) / 1000.0
    per_du.setflags(write=False)
    return per_du


def ozone_slant_optical_depth_per_du(beam_air_mass) -> np.ndarray:
    """Slant ozone optical depth of the direct beam per DU, (N, W), from the per-layer
    beam air mass (N, L): sum over layers of ozone optical depth times air mass."""
    return beam_air_mass @ ozone_optical_depth_per_du()


def compute_table() -> dict[str, np.ndarray]:
    """Run the full solve on every node; returns the arrays the table file holds.

    ``log_direct_ozone_free`` (Z, P, A, W) is ln(direct / mu0) plus the slant ozone
    optical depth: the beam's ozone attenuation is exactly linear in the column and is
    added back per record, so the direct beam needs no ozone axis.
    """
    n_z, n_o, n_p, n_a = (ZENITH_NODES_DEG.size, OZONE_NODES_DU.size,
                          PRESSURE_NODES_HPA.size, AOD_NODES.size)
    n_w = WAVELENGTH_NM.size
    log_direct = np.empty((n_z, n_o, n_p, n_a, n_w))
    log_global = np.empty((n_z, n_o, n_p, n_a, n_w), dtype=np.float32)
    spherical = np.empty((n_o, n_p, n_a, n_w), dtype=np.float32)
    mu0 = np.cos(np.deg2rad(ZENITH_NODES_DEG))
    path = atmosphere.beam_path_factors(ZENITH_NODES_DEG)
    ozone_slant = ozone_slant_optical_depth_per_du(atmosphere.beam_air_mass(ZENITH_NODES_DEG))
    for i_o, ozone_du in enumerate(OZONE_NODES_DU):
        for i_p, pressure_hpa in enumerate(PRESSURE_NODES_HPA):
            # One call per (ozone, pressure): records are AOD x zenith.
            aod = np.repeat(AOD_NODES, n_z)
            layer = optics.layer_optics(np.full(aod.size, ozone_du), pressure_hpa, aod,
                                        *DEFAULT_AEROSOL_TYPE)
            parts = transfer_components(
                layer.tau, layer.ssa, layer.g, np.tile(mu0, n_a),
                beam_path_factors=np.tile(path, (n_a, 1, 1)),
                rayleigh_scattering_fraction=optics.rayleigh_scattering_fraction(
                    layer, np.full(aod.size, pressure_hpa)))
            direct = parts.direct_horizontal.reshape(n_a, n_z, n_w) / mu0[None, :, None]
            global_black = (parts.direct_horizontal
                            + parts.diffuse_down_black_surface).reshape(n_a, n_z, n_w)
            log_direct[:, i_o, i_p] = (np.log(np.maximum(direct, _LOG_FLOOR)).transpose(1, 0, 2)
                                       + ozone_du * ozone_slant[:, None, :])
            log_global[:, i_o, i_p] = np.log(
                np.maximum(global_black, _LOG_FLOOR)).transpose(1, 0, 2)
            spherical[i_o, i_p] = parts.spherical_albedo.reshape(n_a, n_z, n_w)[:, 0]
    # Identical for every ozone node up to rounding (and the log floor); keep one.
    return {"log_direct_ozone_free": log_direct[:, 0].astype(np.float32),
            "log_global_black": log_global, "spherical_albedo": spherical}


@dataclass(frozen=True)
class IrradianceTable:
    """The loaded table: arrays as described in the module docstring, plus provenance."""

    log_direct_ozone_free: np.ndarray   # (Z, P, A, W)
    log_global_black: np.ndarray       # (Z, O, P, A, W)
    spherical_albedo: np.ndarray        # (O, P, A, W)
    fingerprint: str
    air_mass_nodes: np.ndarray          # (Z,)
    # The same arrays as (cells, W) rows with the zenith axis innermost, so that the
    # neighbouring zenith rows one record needs sit next to each other in memory.
    global_cells: np.ndarray            # (O*P*A*Z, W)
    direct_cells: np.ndarray            # (P*A*Z, W)


@lru_cache(maxsize=1)
def load_table(path: Path = TABLE_FILE) -> IrradianceTable:
    """Read the table file once per process."""
    with np.load(path, allow_pickle=False) as data:
        log_direct = data["log_direct_ozone_free"]
        log_global = data["log_global_black"]
        n_w = log_global.shape[-1]
        return IrradianceTable(
            log_direct_ozone_free=log_direct,
            log_global_black=log_global,
            spherical_albedo=data["spherical_albedo"],
            fingerprint=str(data["fingerprint"]),
            air_mass_nodes=air_mass_coordinate(ZENITH_NODES_DEG),
            global_cells=np.ascontiguousarray(np.moveaxis(log_global, 0, 3)).reshape(-1, n_w),
            direct_cells=np.ascontiguousarray(np.moveaxis(log_direct, 0, 2)).reshape(-1, n_w),
        )


def in_table_range(true_zenith_deg, ozone_du, pressure_hpa, aod_550, angstrom_exponent,
                   single_scattering_albedo, asymmetry_factor) -> np.ndarray:
    """Boolean (N,): records the table covers (default aerosol type, inside every axis)."""
    zenith, ozone, pressure, aod, alpha, ssa, g = np.broadcast_arrays(*(
        np.atleast_1d(np.asarray(v, dtype=float)) for v in (
            true_zenith_deg, ozone_du, pressure_hpa, aod_550, angstrom_exponent,
            single_scattering_albedo, asymmetry_factor)))
    inside = ((zenith >= ZENITH_NODES_DEG[0]) & (zenith <= ZENITH_NODES_DEG[-1])
              & (ozone >= OZONE_NODES_DU[0]) & (ozone <= OZONE_NODES_DU[-1])
              & (pressure >= PRESSURE_NODES_HPA[0]) & (pressure <= PRESSURE_NODES_HPA[-1])
              & (aod >= AOD_NODES[0]) & (aod <= AOD_NODES[-1]))
    default_alpha, default_ssa, default_g = DEFAULT_AEROSOL_TYPE
    default_type = ((np.abs(alpha - default_alpha) < 1e-9) & (np.abs(ssa - default_ssa) < 1e-9)
                    & (np.abs(g - default_g) < 1e-9))
    return inside & default_type


def any_aerosol_in_range(true_zenith_deg, ozone_du, pressure_hpa, aod_550, angstrom_exponent,
                         single_scattering_albedo, asymmetry_factor) -> np.ndarray:
    """Boolean (N,): records :func:`relative_surface_flux_any_aerosol` covers (this table's
    zenith, ozone and pressure axes, ``models.aerosol_table``'s aerosol axes): every record
    the record schema admits."""
    zenith, ozone, pressure = (np.atleast_1d(np.asarray(v, dtype=float))
                               for v in (true_zenith_deg, ozone_du, pressure_hpa))
    inside = ((zenith >= ZENITH_NODES_DEG[0]) & (zenith <= ZENITH_NODES_DEG[-1])
              & (ozone >= OZONE_NODES_DU[0]) & (ozone <= OZONE_NODES_DU[-1])
              & (pressure >= PRESSURE_NODES_HPA[0]) & (pressure <= PRESSURE_NODES_HPA[-1]))
    return inside & aerosol_table.in_range(ozone, pressure, aod_550, angstrom_exponent,
                                           single_scattering_albedo, asymmetry_factor)


def bracket(coordinate_nodes, values):
    """Lower node index and fractional position of each value, (N,) each."""
    index = np.clip(np.searchsorted(coordinate_nodes, values, side="right") - 1, 0,
                    coordinate_nodes.size - 2)
    fraction = (values - coordinate_nodes[index]) / (coordinate_nodes[index + 1]
                                                     - coordinate_nodes[index])
    return index, fraction


def linear_axis(coordinate_nodes, values):
    """Two-node linear weights: (node indices (N, 2), weights (N, 2), node count)."""
    index, fraction = bracket(coordinate_nodes, values)
    return (np.stack([index, index + 1], 1), np.stack([1.0 - fraction, fraction], 1),
            coordinate_nodes.size)


def cubic_axis(coordinate_nodes, values):
    """Four-node Lagrange weights on the nodes around each value (one-sided at the ends)."""
    index, _ = bracket(coordinate_nodes, values)
    first = np.clip(index - 1, 0, coordinate_nodes.size - 4)
    nodes = first[:, None] + np.arange(4)[None, :]
    x = coordinate_nodes[nodes]  # (N, 4)
    weights = np.ones_like(x)
    for j in range(4):
        for k in range(4):
            if j != k:
                weights[:, j] *= (values - x[:, k]) / (x[:, j] - x[:, k])
    return nodes, weights, coordinate_nodes.size


def corner_weights(axes):
    """Sparse (N, cells) matrix of interpolation weights over a table's flattened cells.

    ``axes`` holds, per table axis in the table's order, (node indices (N, k), weights
    (N, k), node count). Each row holds the product weights of all corner combinations,
    so that ``weights @ table.reshape(cells, W)`` is the interpolated (N, W) spectrum;
    the sparse product does the gather and the weighted sum in one pass.
    """
    n = axes[0][0].shape[0]
    shape = tuple(count for _, _, count in axes)
    # int32 cell numbers and float32 weights (the products are float32 anyway): at these
    # sizes building the corners costs more than the product, and half the bytes halve it
    # (measured 2.5x faster for 64 corners).
    if int(np.prod(shape)) >= 2 ** 31:
        raise ValueError("table too large for int32 cell numbers")
    flat = np.zeros((n, 1), dtype=np.int32)
    weight = np.ones((n, 1), dtype=np.float32)
    for axis, (index, axis_weight, _) in enumerate(axes):
        stride = int(np.prod(shape[axis + 1:]))
        flat = (flat[:, :, None] + (index * stride).astype(np.int32)[:, None, :]).reshape(n, -1)
        weight = (weight[:, :, None] * axis_weight.astype(np.float32)[:, None, :]).reshape(n, -1)
    corners = flat.shape[1]
    return scipy.sparse.csr_array(
        (weight.ravel(), flat.ravel(), np.arange(0, n * corners + 1, corners, dtype=np.int32)),
        shape=(n, int(np.prod(shape))))


def _black_surface_parts(zenith, ozone, pressure, aod, table: IrradianceTable):
    """Interpolated direct and diffuse flux over a black surface and spherical albedo,
    (N, W) float32 each, plus the beam's per-layer air mass (N, L)."""
    # Zenith: the log of the direct beam is close to linear in the air mass m (linear
    # interpolation); the log of the global flux is smooth but curved in ln m (four-node
    # Lagrange interpolation, which keeps the strongly absorbed wavelengths accurate).
    layer_air_mass = atmosphere.beam_air_mass(zenith)
    air_mass = air_mass_coordinate(zenith, layer_air_mass)
    zenith_direct = linear_axis(table.air_mass_nodes, air_mass)
    zenith_global = cubic_axis(np.log(table.air_mass_nodes), np.log(air_mass))
    ozone_axis = linear_axis(OZONE_NODES_DU, ozone)
    pressure_axis = linear_axis(PRESSURE_NODES_HPA, pressure)
    aod_axis = linear_axis(AOD_NODES, aod)

    log_global = (corner_weights([ozone_axis, pressure_axis, aod_axis, zenith_global])
                  @ table.global_cells)
    log_direct = corner_weights([pressure_axis, aod_axis, zenith_direct]) @ table.direct_cells
    spherical = (corner_weights([ozone_axis, pressure_axis, aod_axis])
                 @ table.spherical_albedo.reshape(-1, table.spherical_albedo.shape[-1]))

    # Elementwise work in float32: the table holds float32, and the interpolation error
    # (~0.5 %) is far above float32 rounding.
    mu0 = np.cos(np.deg2rad(zenith)).astype(np.float32)[:, None]
    ozone_slant = ozone_slant_optical_depth_per_du(layer_air_mass).astype(np.float32)
    log_direct -= ozone.astype(np.float32)[:, None] * ozone_slant
    direct = np.exp(log_direct, out=log_direct)
    direct *= mu0
    if np.any(zenith >= 90.0):
        direct[zenith >= 90.0] = 0.0  # the sun below the horizon: no direct beam
    global_black = np.exp(log_global, out=log_global)
    # The interpolated global can dip under the interpolated beam only where the diffuse
    # share is below the interpolation error; it is then taken as no diffuse light.
    diffuse_black = np.maximum(global_black - direct, 0.0, out=global_black)
    return direct, diffuse_black, spherical, layer_air_mass


def _record_arrays(true_zenith_deg, *values):
    zenith = np.atleast_1d(np.asarray(true_zenith_deg, dtype=float))
    return (zenith, *(np.broadcast_to(np.asarray(v, dtype=float), zenith.shape) for v in values))


def _albedo_rows(surface_albedo):
    albedo = np.asarray(surface_albedo, dtype=np.float32)
    return albedo[:, None] if albedo.ndim == 1 else albedo


def relative_surface_flux(true_zenith_deg, ozone_du, pressure_hpa, surface_albedo, aod_550,
                          table: IrradianceTable | None = None):
    """Direct and diffuse horizontal flux per unit extraterrestrial irradiance, (N, W) each,
    for the default aerosol type.

    Every record must lie in the table's range (see :func:`in_table_range`);
    ``surface_albedo`` is (N,), scalar or (N, W).
    """
    zenith, ozone, pressure, aod = _record_arrays(true_zenith_deg, ozone_du, pressure_hpa, aod_550)
    direct, diffuse_black, spherical, _ = _black_surface_parts(zenith, ozone, pressure, aod,
                                                               table or load_table())
    return apply_surface_albedo(direct, diffuse_black, spherical, _albedo_rows(surface_albedo))


def relative_surface_flux_any_aerosol(true_zenith_deg, ozone_du, pressure_hpa, surface_albedo,
                                      aod_550, angstrom_exponent, single_scattering_albedo,
                                      asymmetry_factor, table: IrradianceTable | None = None):
    """As :func:`relative_surface_flux`, for any aerosol in ``models.aerosol_table``'s range:
    this table's aerosol-free sky, the exact direct beam of the record's aerosol, and the
    tabulated ratios of its diffuse flux and spherical albedo to the aerosol-free ones."""
    zenith, ozone, pressure, aod, alpha, ssa, g = _record_arrays(
        true_zenith_deg, ozone_du, pressure_hpa, aod_550, angstrom_exponent,
        single_scattering_albedo, asymmetry_factor)
    _, diffuse_black, spherical, layer_air_mass = _black_surface_parts(
        zenith, ozone, pressure, np.zeros_like(zenith), table or load_table())
    direct = aerosol_table.direct_horizontal_flux(
        zenith, ozone, pressure, aerosol_table.spectral_aerosol_depth(aod, alpha, WAVELENGTH_NM),
        ssa, g, layer_air_mass).astype(np.float32)
    log_diffuse, log_spherical = aerosol_table.log_ratios(zenith, ozone, pressure, aod, alpha,
                                                          ssa, g)
    diffuse_black *= np.exp(log_diffuse)
    spherical *= np.exp(log_spherical)
    return apply_surface_albedo(direct, diffuse_black, spherical, _albedo_rows(surface_albedo))


def _out_of_range_error(record, zenith, ozone, pressure, aod, alpha, ssa, g) -> RecordError:
    """What keeps one record out of the table: the first axis it lies outside, else its
    aerosol type."""
    checks = (
        ("true_zenith_deg", zenith, ZENITH_NODES_DEG, " deg"),
        ("ozone_du", ozone, OZONE_NODES_DU, " DU"),
        ("pressure_hpa", pressure, PRESSURE_NODES_HPA, " hPa"),
        ("aod_550", aod, AOD_NODES, ""),
    )
    for name, value, nodes, unit in checks:
        if not nodes[0] <= value <= nodes[-1]:
            return RecordError(record, name, f"is outside the precomputed clear-sky table "
                                             f"({nodes[0]:g}-{nodes[-1]:g}{unit})", value=value)
    return RecordError(record, None, f"aerosol (aod_550 {aod:g}, angstrom_exponent {alpha:g}, "
                                     f"single_scattering_albedo {ssa:g}, asymmetry_factor {g:g}) "
                                     f"lies outside the precomputed aerosol table")


def spectral_irradiance(true_zenith_deg, earth_sun_distance_au, ozone_du, pressure_hpa,
                        surface_albedo, aod_550, angstrom_exponent, single_scattering_albedo,
                        asymmetry_factor, direct_solve=None):
    """Direct and diffuse horizontal spectral irradiance, W m⁻² nm⁻¹, each (N, W).

    Arguments as ``models.clear_sky.spectral_irradiance``. Records the table covers
    (:func:`in_table_range`, or :func:`any_aerosol_in_range` for other aerosol types) are
    interpolated; records with the sun beyond civil twilight get exact zeros; the rest go
    to ``direct_solve`` (a callable with the same arguments returning an object with
    ``direct_horizontal_w_m2_nm`` and ``diffuse_horizontal_w_m2_nm``). Without
    ``direct_solve`` uncovered daytime records raise ``RecordErrors`` naming each and its field.
    """
    zenith = np.atleast_1d(np.asarray(true_zenith_deg, dtype=float))
    n = zenith.size
    distance, ozone, pressure, aod, alpha, ssa, g = (
        np.broadcast_to(np.asarray(v, dtype=float), (n,)) for v in (
            earth_sun_distance_au, ozone_du, pressure_hpa, aod_550, angstrom_exponent,
            single_scattering_albedo, asymmetry_factor))
    albedo = np.asarray(surface_albedo, dtype=float)
    albedo = (np.broadcast_to(albedo, (n,))[:, None] if albedo.ndim <= 1
              else np.broadcast_to(albedo, (n, WAVELENGTH_NM.size)))
    sun_up = zenith < CIVIL_TWILIGHT_ZENITH_DEG
    default_type = sun_up & in_table_range(zenith, ozone, pressure, aod, alpha, ssa, g)
    any_type = sun_up & ~default_type & any_aerosol_in_range(zenith, ozone, pressure, aod, alpha,
                                                             ssa, g)
    uncovered = np.flatnonzero(sun_up & ~default_type & ~any_type)
    if uncovered.size and direct_solve is None:
        raise RecordErrors(_out_of_range_error(i, zenith[i], ozone[i], pressure[i], aod[i],
                                               alpha[i], ssa[i], g[i]) for i in uncovered.tolist())

    top_of_atmosphere = extraterrestrial_spectrum_w_m2_nm().astype(np.float32)[None, :]
    inverse_distance_squared = 1.0 / distance ** 2
    every_row = bool(default_type.all() or any_type.all())
    make = np.empty if every_row else np.zeros  # every row written, or zeros for the rest
    direct = make((n, WAVELENGTH_NM.size))
    diffuse = make((n, WAVELENGTH_NM.size))
    for chosen, flux, inputs in (
            (default_type, relative_surface_flux, (zenith, ozone, pressure, albedo, aod)),
            (any_type, relative_surface_flux_any_aerosol,
             (zenith, ozone, pressure, albedo, aod, alpha, ssa, g))):
        rows = np.flatnonzero(chosen)
        whole = rows.size == n
        # Blocks of CHUNK_RECORDS keep the (records, W) temporaries in cache and bound memory.
        for start in range(0, rows.size, CHUNK_RECORDS):
            block = slice(start, start + CHUNK_RECORDS) if whole else rows[start:start + CHUNK_RECORDS]
            d, f = flux(*(column[block] for column in inputs))
            d *= top_of_atmosphere
            f *= top_of_atmosphere
            factor = inverse_distance_squared[block, None]
            if whole:
                np.multiply(d, factor, out=direct[block])
                np.multiply(f, factor, out=diffuse[block])
            else:
                direct[block] = d * factor
                diffuse[block] = f * factor
    if uncovered.size:
        solved = direct_solve(zenith[uncovered], distance[uncovered], ozone[uncovered],
                              pressure[uncovered], albedo[uncovered], aod[uncovered],
                              alpha[uncovered], ssa[uncovered], g[uncovered])
        direct[uncovered] = solved.direct_horizontal_w_m2_nm
        diffuse[uncovered] = solved.diffuse_horizontal_w_m2_nm
    return direct, diffuse
