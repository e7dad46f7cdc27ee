"""Any aerosol on the fast clear-sky path: the aerosol's effect on the sky, tabulated.

``models.irradiance_table`` holds the full solve for the default aerosol type over
(zenith, ozone, pressure, AOD(550)). A record that gives its own aerosol (Ångström
exponent, single scattering albedo, asymmetry factor) or an AOD beyond that table is
answered here, from the same table's *aerosol-free* sky and three per-record factors:

- **Direct beam**, exact: the four-stream solver's (delta-M scaled) beam is
  ``mu0 exp(-sum_l m_l tau'_l)`` with ``tau'_l = tau_R,l + tau_O3,l + tau_a,l (1 - ssa g**4)``
  (Wiscombe 1977: the forward-peak fraction of a Henyey-Greenstein aerosol is its 4th
  moment ``g**4``, and molecules have none), so it is computed per record from the
  layers' optical depths and the beam's per-layer air mass ``m_l``
  (:func:`direct_horizontal_flux`).
- **Diffuse flux over a black surface**: the aerosol-free one times
  ``exp(log_diffuse_ratio)``, the ratio of the full solve with the aerosol to the full
  solve without it.
- **Spherical albedo**: likewise, ``exp(log_spherical_ratio)``.

Why this parametrisation: at one wavelength, with the aerosol's vertical profile fixed
(``models.optics``: exp(-z / 2 km)), the transfer depends on the aerosol only through its
optical depth at *that* wavelength, ``tau_a(λ) = AOD(550) (λ / 550)**-α``, its single
scattering albedo and its asymmetry factor. The Ångström exponent therefore needs no
axis of its own: the ratio tables are over ``tau_a(λ)``, and each record reads them at its
own spectral optical depth. The ratios stay smooth in wavelength (the ozone bands'
fine structure is in the aerosol-free sky, which has the full 1 nm table), so they are
tabulated on :data:`WAVELENGTH_NODES_NM` and interpolated linearly in wavelength. They
do depend on the ozone column (under more ozone the diffuse UVB comes from lower in the
atmosphere, where the aerosol is: measured up to 25 % in erythemal irradiance between
50 and 300 DU for a strongly absorbing aerosol), so ozone is an axis too.

Axes (interpolation of the log ratios linear in ln(air mass), ozone, ln(pressure), single
scattering albedo and -ln(1 - asymmetry factor), three-node Lagrange in the spectral optical
depth, which bends the ratios most): true zenith (:data:`ZENITH_NODES_DEG`, to 96
degrees, civil twilight), ozone and pressure over the record schema's ranges
(50-700 DU, 300-1100 hPa), and the aerosol's own range of this table (:func:`in_range`):
spectral optical depth up to 3 at every wavelength of 280-400 nm (AOD(550) up to about
1.2 with the default α 1.3, 1.8 with α 0.5), single scattering albedo 0.5-1, asymmetry
factor 0.3-0.9, which holds the aerosols of the usual climatologies (OPAC, Hess et al.
1998, *BAMS* 79:831: UV single scattering albedo 0.8-1 and asymmetry 0.6-0.8 for the
continental, maritime, urban and desert types *(from memory)*). Beyond it (a very thick
or strongly absorbing aerosol) the fluxes bend too fast for a table of this size
(measured: up to 40 % off with the same node density), and ``models.clear_sky`` uses the
full solve. Inside it, against the full solve (erythema and plant damage, 480 random
records): within 1.1 % up to 75 degrees zenith, 1.5 % at 75-85 degrees; against 16-stream
DISORT within 3 %, 5 % at a low sun (tests/models/test_aerosol_table.py).

The table file ``models/data/aerosol_table.npz`` is written by
``models/data/build_aerosol_table.py`` and carries a fingerprint (:func:`fingerprint`);
a test fails when the committed file no longer matches the code.

References
----------
.. [1] Wiscombe, W. J. (1977). The delta-M method: rapid yet accurate radiative flux
   calculations for strongly asymmetric phase functions. J. Atmos. Sci. 34, 1408-1422.
.. [2] Ångström, A. (1929). On the atmospheric transmission of sun radiation and on dust
   in the air. Geogr. Ann. 11, 156-166.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np

from uvdose.models import MODEL_VERSION, atmosphere, optics
from uvdose.models.four_stream import transfer_components
from uvdose.models.spectral_grid import WAVELENGTH_NM

TABLE_FILE = Path(__file__).with_name("data") / "aerosol_table.npz"

ZENITH_NODES_DEG = np.array([0.0, 20.0, 32.0, 42.0, 50.0, 57.0, 63.0, 68.0, 72.0, 75.5, 78.5,
                             81.0, 83.0, 84.5, 85.8, 87.0, 88.0, 89.0, 90.0, 91.5, 93.5, 96.0])
"""True solar zenith nodes, degrees (denser at low sun, where the diffuse share changes
fastest), to ``models.solar_geometry.CIVIL_TWILIGHT_ZENITH_DEG``."""
OZONE_NODES_DU = np.array([50.0, 100.0, 175.0, 275.0, 425.0, 700.0])
"""Total ozone nodes, DU."""
PRESSURE_NODES_HPA = np.array([300.0, 380.0, 480.0, 600.0, 750.0, 920.0, 1100.0])
"""Surface pressure nodes, hPa (about even in ln p, the interpolation variable)."""
AEROSOL_DEPTH_NODES = np.array([0.0, 0.1, 0.25, 0.45, 0.7, 1.0, 1.4, 2.0, 3.0])
"""Spectral aerosol optical depth nodes (at the wavelength itself)."""
SSA_NODES = np.array([0.5, 0.62, 0.72, 0.8, 0.87, 0.92, 0.96, 0.99, 1.0])
"""Aerosol single scattering albedo nodes: about even in sqrt(1 - SSA), along which the
diffuse flux of a thick layer changes about linearly (diffusion: the decay rate of the
diffuse field is sqrt(3 (1 - SSA) (1 - SSA g)))."""
ASYMMETRY_NODES = np.array([0.3, 0.5, 0.64, 0.74, 0.81, 0.865, 0.9])
"""Aerosol asymmetry factor nodes, even in -ln(1 - g), the interpolation variable (the
ratios bend fastest at high g, where the delta-M forward peak g**4 grows)."""
WAVELENGTH_NODES_NM = np.array([280.0, 290.0, 295.0, 298.0, 301.0, 304.0, 307.0, 310.0, 313.0,
                                316.0, 320.0, 325.0, 330.0, 337.0, 345.0, 355.0, 365.0, 377.0,
                                390.0, 400.0])
"""Wavelengths the ratios are tabulated on, nm (denser where ozone absorption changes
fastest with wavelength)."""

LOG_RATIO_FLOOR = -60.0
"""Floor of the tabulated log ratios: where the aerosol darkens the sky below e**-60 of
its aerosol-free value (only at 280-285 nm under very thick aerosol) the diffuse light is
taken as that, not as an underflow."""

CHUNK_RECORDS = 2048
"""Records interpolated per block (bounds the (records, corners, wavelengths) gathers)."""

_BUILD_CHUNK = 1024


def fingerprint() -> str:
    """Hash of what the table depends on: model version, axes, and the full solve at a
    reference point."""
    digest = hashlib.sha256()
    digest.update(MODEL_VERSION.encode())
    for array in (ZENITH_NODES_DEG, OZONE_NODES_DU, PRESSURE_NODES_HPA, AEROSOL_DEPTH_NODES,
                  SSA_NODES, ASYMMETRY_NODES, WAVELENGTH_NODES_NM, np.array([LOG_RATIO_FLOOR])):
        digest.update(np.ascontiguousarray(array, dtype=np.float64).tobytes())
    diffuse, spherical = _log_ratios_by_full_solve(np.array([30.0, 80.0]), 320.0, 1000.0,
                                                   np.array([0.3, 2.0]), 0.8, 0.6)
    digest.update(np.round(np.concatenate([diffuse.ravel(), spherical.ravel()]), 7).tobytes())
    return digest.hexdigest()


def _black_surface_parts(zenith_deg, ozone_du, pressure_hpa, aerosol_depth, ssa, g):
    """Full solve on ``WAVELENGTH_NODES_NM`` with a wavelength-independent aerosol optical
    depth (Ångström exponent 0): diffuse flux over a black surface and spherical albedo."""
    layer = optics.layer_optics(ozone_du, pressure_hpa, aerosol_depth, 0.0, ssa, g,
                                wavelength_nm=WAVELENGTH_NODES_NM)
    parts = transfer_components(
        layer.tau, layer.ssa, layer.g, np.cos(np.deg2rad(zenith_deg)),
        beam_path_factors=atmosphere.beam_path_factors(zenith_deg),
        rayleigh_scattering_fraction=optics.rayleigh_scattering_fraction(
            layer, pressure_hpa, WAVELENGTH_NODES_NM))
    return parts.diffuse_down_black_surface, parts.spherical_albedo


def _log(values):
    return np.log(np.maximum(values, 1e-300))


def _log_ratios_by_full_solve(zenith_deg, ozone_du, pressure_hpa, aerosol_depth, ssa, g):
    """ln(with aerosol / without) of the diffuse black-surface flux and of the spherical
    albedo by the full solve, each (N, K); arguments (N,) or scalars."""
    zenith = np.atleast_1d(np.asarray(zenith_deg, dtype=float))
    n = zenith.size
    ozone, pressure, depth, ssa, g = (np.broadcast_to(np.asarray(v, dtype=float), (n,))
                                      for v in (ozone_du, pressure_hpa, aerosol_depth, ssa, g))
    with_aerosol = _black_surface_parts(zenith, ozone, pressure, depth, ssa, g)
    without = _black_surface_parts(zenith, ozone, pressure, np.zeros(n), ssa, g)
    return tuple(np.maximum(_log(a) - _log(b), LOG_RATIO_FLOOR)
                 for a, b in zip(with_aerosol, without))


def compute_table() -> dict[str, np.ndarray]:
    """Run the full solve on every node; returns the arrays the table file holds:
    ``log_diffuse_ratio`` (Z, O, P, S, G, A, K) and ``log_spherical_ratio`` (O, P, S, G, A, K)."""
    n_z, n_o, n_p, n_a, n_s, n_g, n_k = (ZENITH_NODES_DEG.size, OZONE_NODES_DU.size,
                                         PRESSURE_NODES_HPA.size, AEROSOL_DEPTH_NODES.size,
                                         SSA_NODES.size, ASYMMETRY_NODES.size,
                                         WAVELENGTH_NODES_NM.size)
    diffuse = np.zeros((n_z, n_o, n_p, n_s, n_g, n_a, n_k), dtype=np.float32)
    spherical = np.zeros((n_o, n_p, n_s, n_g, n_a, n_k), dtype=np.float32)
    # Records of one (ozone, pressure) pair: zenith x SSA x g x optical depth (without
    # the aerosol-free node, whose log ratio is 0).
    grid = np.stack(np.meshgrid(np.arange(n_z), np.arange(n_s), np.arange(n_g),
                                np.arange(1, n_a), indexing="ij"), -1).reshape(-1, 4)
    for i_o, ozone_du in enumerate(OZONE_NODES_DU):
        for i_p, pressure_hpa in enumerate(PRESSURE_NODES_HPA):
            free = _black_surface_parts(ZENITH_NODES_DEG, np.full(n_z, ozone_du),
                                        np.full(n_z, pressure_hpa), np.zeros(n_z), 0.9, 0.5)
            free_log = [_log(part) for part in free]
            for start in range(0, len(grid), _BUILD_CHUNK):
                i_z, i_s, i_g, i_a = grid[start:start + _BUILD_CHUNK].T
                n = i_z.size
                f, s = _black_surface_parts(ZENITH_NODES_DEG[i_z], np.full(n, ozone_du),
                                            np.full(n, pressure_hpa), AEROSOL_DEPTH_NODES[i_a],
                                            SSA_NODES[i_s], ASYMMETRY_NODES[i_g])
                diffuse[i_z, i_o, i_p, i_s, i_g, i_a] = np.maximum(
                    _log(f) - free_log[0][i_z], LOG_RATIO_FLOOR)
                at_top = i_z == 0  # the spherical albedo does not depend on the sun
                spherical[i_o, i_p, i_s[at_top], i_g[at_top], i_a[at_top]] = np.maximum(
                    _log(s[at_top]) - free_log[1][0], LOG_RATIO_FLOOR)
    return {"log_diffuse_ratio": diffuse, "log_spherical_ratio": spherical}


@dataclass(frozen=True)
class AerosolTable:
    """The loaded table: arrays as in :func:`compute_table` plus the fingerprint."""

    log_diffuse_ratio: np.ndarray     # (Z, O, P, S, G, A, K)
    log_spherical_ratio: np.ndarray   # (O, P, S, G, A, K)
    fingerprint: str


@lru_cache(maxsize=1)
def load_table(path: Path = TABLE_FILE) -> AerosolTable:
    """Read the table file once per process."""
    with np.load(path, allow_pickle=False) as data:
        return AerosolTable(np.ascontiguousarray(data["log_diffuse_ratio"], dtype=np.float32),
                            np.ascontiguousarray(data["log_spherical_ratio"], dtype=np.float32),
                            str(data["fingerprint"]))


def in_range(ozone_du, pressure_hpa, aod_550, angstrom_exponent, single_scattering_albedo,
             asymmetry_factor) -> np.ndarray:
    """Boolean (N,): records whose inputs lie on the table's axes (any zenith up to 96
    degrees is covered)."""
    ozone, pressure, aod, alpha, ssa, g = np.broadcast_arrays(*(
        np.atleast_1d(np.asarray(v, dtype=float)) for v in (
            ozone_du, pressure_hpa, aod_550, angstrom_exponent, single_scattering_albedo,
            asymmetry_factor)))
    depth = spectral_aerosol_depth(aod, alpha, WAVELENGTH_NM[[0, -1]])
    return ((ozone >= OZONE_NODES_DU[0]) & (ozone <= OZONE_NODES_DU[-1])
            & (pressure >= PRESSURE_NODES_HPA[0]) & (pressure <= PRESSURE_NODES_HPA[-1])
            & (depth.min(axis=1) >= 0.0) & (depth.max(axis=1) <= AEROSOL_DEPTH_NODES[-1])
            & (ssa >= SSA_NODES[0]) & (ssa <= SSA_NODES[-1])
            & (g >= ASYMMETRY_NODES[0]) & (g <= ASYMMETRY_NODES[-1]))


def spectral_aerosol_depth(aod_550, angstrom_exponent, wavelength_nm) -> np.ndarray:
    """Aerosol optical depth at each wavelength, (N, W): Ångström (1929) power law,
    ``AOD(550) (λ / 550 nm)**-α`` (as ``models.optics.layer_optics``)."""
    aod = np.atleast_1d(np.asarray(aod_550, dtype=float))
    alpha = np.atleast_1d(np.asarray(angstrom_exponent, dtype=float))
    ratio = np.asarray(wavelength_nm, dtype=float) / optics.AEROSOL_REFERENCE_NM
    return aod[:, None] * ratio[None, :] ** -alpha[:, None]


@lru_cache(maxsize=1)
def _beam_depth_per_unit() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per-layer optical depths the direct beam needs: Rayleigh at 1013.25 hPa (L, W), ozone
    per DU (L, W) and the aerosol's share of its column (L,), as ``models.optics`` has them."""
    layers = atmosphere.standard_layers()
    rayleigh = (layers.air_column_fraction[:, None]
                * optics.rayleigh_optical_depth(WAVELENGTH_NM)[None, :])
    columns = optics.layer_optics(np.array([0.0, 1000.0]), 1013.25, 0.0, 0.0, 1.0, 0.0)
    ozone = (columns.tau[1] - columns.tau[0]) / 1000.0
    aerosol = atmosphere.exponential_layer_fraction(optics.AEROSOL_SCALE_HEIGHT_KM, layers)
    for array in (rayleigh, ozone, aerosol):
        array.setflags(write=False)
    return rayleigh, ozone, aerosol


def direct_horizontal_flux(true_zenith_deg, ozone_du, pressure_hpa, aerosol_depth, ssa, g,
                           beam_air_mass=None) -> np.ndarray:
    """The solver's direct beam on a horizontal surface per unit extraterrestrial
    irradiance, (N, W), computed exactly (module docstring; 0 with the sun at or below the
    horizon).

    ``aerosol_depth`` (N, W) from :func:`spectral_aerosol_depth`; ``beam_air_mass`` (N, L)
    from ``models.atmosphere.beam_air_mass`` if already computed.
    """
    zenith = np.atleast_1d(np.asarray(true_zenith_deg, dtype=float))
    if beam_air_mass is None:
        beam_air_mass = atmosphere.beam_air_mass(zenith)
    rayleigh, ozone_per_du, aerosol_share = _beam_depth_per_unit()
    forward = np.asarray(ssa, dtype=float) * np.asarray(g, dtype=float) ** 4
    slant = (atmosphere.pressure_scale(pressure_hpa)[:, None] * (beam_air_mass @ rayleigh)
             + np.asarray(ozone_du, dtype=float)[:, None] * (beam_air_mass @ ozone_per_du)
             + ((beam_air_mass @ aerosol_share) * (1.0 - forward))[:, None] * aerosol_depth)
    mu0 = np.cos(np.deg2rad(zenith))
    return np.where((zenith < 90.0)[:, None], mu0[:, None] * np.exp(-slant), 0.0)


@lru_cache(maxsize=1)
def _air_mass_nodes() -> np.ndarray:
    """``models.atmosphere.air_mass_coordinate`` of :data:`ZENITH_NODES_DEG`."""
    nodes = atmosphere.air_mass_coordinate(ZENITH_NODES_DEG)
    nodes.setflags(write=False)
    return nodes


def _linear(nodes, values):
    """Lower node index and the two linear weights of each value, (N,), (N, 2)."""
    index = np.clip(np.searchsorted(nodes, values, side="right") - 1, 0, nodes.size - 2)
    fraction = np.clip((values - nodes[index]) / (nodes[index + 1] - nodes[index]), 0.0, 1.0)
    return index, np.stack([1.0 - fraction, fraction], axis=1)


@lru_cache(maxsize=1)
def _wavelength_interpolation() -> np.ndarray:
    """(K, W) matrix taking values on ``WAVELENGTH_NODES_NM`` linearly to ``WAVELENGTH_NM``."""
    matrix = np.stack([np.interp(WAVELENGTH_NM, WAVELENGTH_NODES_NM, row)
                       for row in np.eye(WAVELENGTH_NODES_NM.size)]).astype(np.float32)
    matrix.setflags(write=False)
    return matrix


def _interpolate(array, leading_axes, depth_first, depth_weight):
    """Multilinear interpolation of ``array`` (..., A, K) per record, with a few-node
    Lagrange interpolation along the optical-depth axis A, which differs per wavelength.

    ``leading_axes``: per leading axis of ``array``, (lower index (N,), weights (N, 2));
    ``depth_first`` (N, K): the first of the optical-depth nodes used, ``depth_weight``
    (N, K, n) their weights. Returns (N, K) float32.

    Each corner's (A, K) block is contiguous, so whole blocks are gathered and combined
    over the corners first (one small matrix product per record), then the few nodes
    along A are taken per wavelength (measured 30 % faster than gathering single values).
    """
    n_a, n_k = array.shape[-2:]
    blocks = array.reshape(-1, n_a * n_k)
    n = depth_first.shape[0]
    base = np.zeros((n, 1), dtype=np.int64)
    weight = np.ones((n, 1), dtype=np.float32)
    stride = 1
    strides = []
    for size in reversed(array.shape[:-2]):
        strides.append(stride)
        stride *= size
    for (index, axis_weight), axis_stride in zip(leading_axes, reversed(strides)):
        corners = index[:, None] + np.arange(2)[None, :]
        base = (base[:, :, None] + (corners * axis_stride)[:, None, :]).reshape(n, -1)
        weight = (weight[:, :, None] * axis_weight[:, None, :].astype(np.float32)).reshape(n, -1)
    out = np.empty((n, n_k), dtype=np.float32)
    for start in range(0, n, _BLOCK_RECORDS):
        part = slice(start, start + _BLOCK_RECORDS)
        combined = np.matmul(weight[part, None, :], blocks[base[part]])[:, 0]   # (m, A * K)
        combined = combined.reshape(-1, n_a, n_k)
        first = depth_first[part]
        total = np.zeros((combined.shape[0], n_k), dtype=np.float32)
        for node in range(depth_weight.shape[-1]):
            total += (np.take_along_axis(combined, (first + node)[:, None, :], axis=1)[:, 0]
                      * depth_weight[part, :, node])
        out[part] = total
    return out


_BLOCK_RECORDS = 512
"""Records per block gather in :func:`_interpolate` (a (records, corners, A * K) float32
working array of about 12 MB)."""


def _depth_axis(depth):
    """Three-node Lagrange weights along :data:`AEROSOL_DEPTH_NODES` for spectral optical
    depths (N, K): the nodes around each value and the nearer next one (one-sided at the
    ends); returns (first node (N, K), weights (N, K, 3))."""
    nodes = AEROSOL_DEPTH_NODES
    lower = np.clip(np.searchsorted(nodes, depth, side="right") - 1, 0, nodes.size - 2)
    nearer_upper = (depth - nodes[lower]) > (nodes[lower + 1] - depth)
    first = np.clip(np.where(nearer_upper, lower, lower - 1), 0, nodes.size - 3)
    x = nodes[first[..., None] + np.arange(3)]                                  # (N, K, 3)
    weights = np.ones_like(x)
    for j in range(3):
        for k in range(3):
            if j != k:
                weights[..., j] *= (depth - x[..., k]) / (x[..., j] - x[..., k])
    return first, weights


def log_ratios(true_zenith_deg, ozone_du, pressure_hpa, aod_550, angstrom_exponent,
               single_scattering_albedo, asymmetry_factor, table: AerosolTable | None = None):
    """ln(with aerosol / aerosol-free) of the diffuse black-surface flux and of the
    spherical albedo on ``WAVELENGTH_NM``, (N, W) each, interpolated in the table.

    Every record must lie in the table's range (:func:`in_range`).
    """
    table = table or load_table()
    zenith = np.atleast_1d(np.asarray(true_zenith_deg, dtype=float))
    n = zenith.size
    ozone, pressure, aod, alpha, ssa, g = (
        np.broadcast_to(np.asarray(v, dtype=float), (n,)) for v in (
            ozone_du, pressure_hpa, aod_550, angstrom_exponent, single_scattering_albedo,
            asymmetry_factor))
    depth_first, depth_weight = _depth_axis(spectral_aerosol_depth(aod, alpha, WAVELENGTH_NODES_NM))
    sky_axes = [_linear(OZONE_NODES_DU, ozone),
                _linear(np.log(PRESSURE_NODES_HPA), np.log(pressure)),
                _linear(SSA_NODES, ssa),
                _linear(-np.log1p(-ASYMMETRY_NODES), -np.log1p(-np.asarray(g)))]
    # The ratios bend in the zenith angle like the beam's path (between 0 and 30 degrees
    # by a quarter in the log under a hazy sky), so the axis is ln(air mass).
    zenith_axis = _linear(np.log(_air_mass_nodes()), np.log(atmosphere.air_mass_coordinate(zenith)))
    diffuse = _interpolate(table.log_diffuse_ratio, [zenith_axis, *sky_axes],
                           depth_first, depth_weight)
    spherical = _interpolate(table.log_spherical_ratio, sky_axes, depth_first, depth_weight)
    to_grid = _wavelength_interpolation()
    return diffuse @ to_grid, spherical @ to_grid
