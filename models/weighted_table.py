"""Weighted clear-sky integrals straight from the precomputed table (the default path).

Most answers need no spectrum: the UV Index and a few effective irradiances, on a
horizontal or tilted receiver without a filter. For those, interpolating the 121-point
spectrum of every record (``models.irradiance_table``) and then weighting it does 121 times
the work the answer needs. This module weights the table once instead: for each action
spectrum (or band) of ``models.action_spectra`` and each node of the table it holds

- ``ln(E_dir / mu0)``: the weighted direct horizontal irradiance at 1 AU over the cosine
  of the zenith, over (ozone, pressure, AOD, zenith), from the table's ozone-free beam and
  the beam's exact ozone attenuation at the node (ozone on :data:`INTEGRAL_OZONE_NODES_DU`);
- ``ln E_glo(a)``: the weighted global irradiance over a Lambertian surface of albedo
  ``a`` at :data:`ALBEDO_NODES`, over (ozone, pressure, AOD, zenith, albedo), from the
  table's black-surface global flux and spherical albedo S per wavelength
  (``global(a) = global(0) / (1 - a S)``, Tanré et al. 1979, applied before weighting,
  since S depends on the wavelength).

Records are interpolated as the spectral table is (``models.irradiance_table``): linearly
in the air mass for the beam, four-node Lagrange in ln(air mass) for the global, linearly
in ozone, pressure, AOD and albedo; the diffuse irradiance is global minus direct. The
integrals are built from the table file on first use of each set of action spectra (a few
seconds, then kept for the process; about 12 MB per spectrum). Agreement with the spectral path:
tests/models/test_weighted_table.py (within 0.5 %).

References
----------
.. [1] Tanré, D., Herman, M., Deschamps, P. Y. and de Leffe, A. (1979). Atmospheric
   modeling for space measurements of ground reflectances, including bidirectional
   properties. Appl. Opt. 18, 3587-3594.
"""
from __future__ import annotations

from functools import lru_cache

import numpy as np

from uvdose.models import action_spectra, atmosphere
from uvdose.models import irradiance_table as table_module
from uvdose.models.irradiance_table import (AOD_NODES, OZONE_NODES_DU, PRESSURE_NODES_HPA,
                                            ZENITH_NODES_DEG)
from uvdose.models.spectral_grid import WAVELENGTH_NM, extraterrestrial_spectrum_w_m2_nm

ALBEDO_NODES = np.array([0.0, 0.1, 0.2, 0.35, 0.5, 0.65, 0.8, 0.9, 1.0])
"""Surface albedo nodes of the global integrals (ln E_glo bends up towards a = 1,
where light bounces between ground and sky most)."""

_FLOOR = 1e-300


def _ozone_nodes() -> np.ndarray:
    """Ozone nodes of the integrals: the table's, each interval cut in four. The weighted
    integral bends in ozone (its spectral weight slides to shorter wavelengths as ozone
    thins, most below about 150 DU) where each wavelength's log flux does not, so the
    integrals are taken at the table's own per-wavelength interpolation between its nodes
    (cut in two, the ozone sensitivity of actinic irradiance by finite differences came out
    up to 9 % off that of the spectral path; in four, within the 8 % of
    tests/models/test_uncertainty.py)."""
    nodes = [OZONE_NODES_DU[0]]
    for low, high in zip(OZONE_NODES_DU[:-1], OZONE_NODES_DU[1:]):
        parts = 4
        nodes.extend(low + (high - low) * np.arange(1, parts + 1) / parts)
    return np.array(nodes)


INTEGRAL_OZONE_NODES_DU = _ozone_nodes()
"""Ozone nodes of the weighted integrals (:func:`_ozone_nodes`)."""


def _computed_cells(names: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray]:
    """The integrals of ``names`` on the nodes, as (cells, S) float32 columns:
    ``ln(E_dir / mu0)`` over (O, P, A, Z) and ``ln E_glo`` over (O, P, A, Z, albedo), O on
    :data:`INTEGRAL_OZONE_NODES_DU`."""
    table = table_module.load_table()
    weights = (action_spectra.weight_matrix(names, WAVELENGTH_NM)
               * extraterrestrial_spectrum_w_m2_nm()[:, None])                  # (W, S)
    ozone_slant = table_module.ozone_slant_optical_depth_per_du(
        atmosphere.beam_air_mass(ZENITH_NODES_DEG))                          # (Z, W)
    log_direct = table.log_direct_ozone_free.astype(np.float64)             # (Z, P, A, W)
    n_z, n_p, n_a, n_s = ZENITH_NODES_DEG.size, PRESSURE_NODES_HPA.size, AOD_NODES.size, len(names)
    ozone_nodes = INTEGRAL_OZONE_NODES_DU
    direct = np.empty((ozone_nodes.size, n_p, n_a, n_z, n_s), dtype=np.float32)
    global_ = np.empty((ozone_nodes.size, n_p, n_a, n_z, ALBEDO_NODES.size, n_s), dtype=np.float32)
    index, fraction = table_module.bracket(OZONE_NODES_DU, ozone_nodes)
    for i_o, ozone_du in enumerate(ozone_nodes):
        beam = np.exp(log_direct - ozone_du * ozone_slant[:, None, None, :]) @ weights  # (Z, P, A, S)
        direct[i_o] = np.log(np.maximum(beam, _FLOOR)).transpose(1, 2, 0, 3)
        # As the spectral path interpolates: linearly in each wavelength's log flux.
        low, share = index[i_o], fraction[i_o]
        log_black = ((1.0 - share) * table.log_global_black[:, low].astype(np.float64)
                     + share * table.log_global_black[:, low + 1])                # (Z, P, A, W)
        black = np.exp(log_black)
        spherical = ((1.0 - share) * table.spherical_albedo[low].astype(np.float64)
                     + share * table.spherical_albedo[low + 1])                  # (P, A, W)
        for i_albedo, albedo in enumerate(ALBEDO_NODES):
            lit = (black / (1.0 - albedo * spherical)[None]) @ weights             # (Z, P, A, S)
            global_[i_o, :, :, :, i_albedo] = np.log(np.maximum(lit, _FLOOR)).transpose(1, 2, 0, 3)
    return direct.reshape(-1, n_s), global_.reshape(-1, n_s)


_SPECTRUM_CELLS: dict[str, tuple[np.ndarray, np.ndarray]] = {}
"""Per action spectrum, its (direct, global) cell columns, once computed (the process's
lifetime; one entry per spectrum of ``models.action_spectra``, so bounded)."""


def warm(names=("erythema", "actinic_icnirp", "plant_damage", "uvb", "uva")) -> None:
    """Compute the integrals of ``names`` now, e.g. at start-up (by default those of an
    answer with the engine's default spectra: ``models.engine.DEFAULT_SPECTRA``, the UV
    Index's erythema and the bands)."""
    _cells(tuple(names))


@lru_cache(maxsize=32)
def _cells(names: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray]:
    """(cells, S) columns of ``names``; spectra not seen before are computed together."""
    missing = tuple(name for name in dict.fromkeys(names) if name not in _SPECTRUM_CELLS)
    if missing:
        direct, global_ = _computed_cells(missing)
        for column, name in enumerate(missing):
            _SPECTRUM_CELLS[name] = (direct[:, column].copy(), global_[:, column].copy())
    stacked = tuple(np.ascontiguousarray(np.column_stack([_SPECTRUM_CELLS[name][part] for name in names]))
                    for part in (0, 1))
    for array in stacked:
        array.setflags(write=False)
    return stacked


def weighted_irradiance(true_zenith_deg, ozone_du, pressure_hpa, surface_albedo, aod_550,
                        names: tuple[str, ...]):
    """Weighted direct and diffuse horizontal irradiance at 1 AU, W m⁻², (N, S) each, for
    the default aerosol type.

    Every record must lie in the table's range (``models.irradiance_table.in_table_range``)
    and have the sun above civil twilight; ``surface_albedo`` (N,) or scalar, grey.
    """
    zenith = np.atleast_1d(np.asarray(true_zenith_deg, dtype=float))
    n = zenith.size
    ozone, pressure, aod, albedo = (np.broadcast_to(np.asarray(v, dtype=float), (n,))
                                    for v in (ozone_du, pressure_hpa, aod_550, surface_albedo))
    table = table_module.load_table()
    direct_cells, global_cells = _cells(tuple(names))
    air_mass = table_module.air_mass_coordinate(zenith)
    corners = table_module.corner_weights
    axes = [table_module.linear_axis(INTEGRAL_OZONE_NODES_DU, ozone),
            table_module.linear_axis(PRESSURE_NODES_HPA, pressure),
            table_module.linear_axis(AOD_NODES, aod)]
    log_global = corners([*axes, table_module.cubic_axis(np.log(table.air_mass_nodes),
                                                         np.log(air_mass)),
                          table_module.linear_axis(ALBEDO_NODES, albedo)]) @ global_cells
    log_direct = corners([*axes, table_module.linear_axis(table.air_mass_nodes, air_mass)]) @ direct_cells
    mu0 = np.cos(np.deg2rad(zenith))
    direct = np.where((zenith < 90.0)[:, None], np.exp(log_direct) * mu0[:, None], 0.0)
    diffuse = np.maximum(np.exp(log_global) - direct, 0.0)
    return direct, diffuse
