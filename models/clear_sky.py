"""Clear-sky spectral UV at the surface: direct and diffuse horizontal, 280–400 nm.

Composition (``spectral_irradiance_direct_solve``)
    1. Layer optics of the record's atmosphere (``models.optics.layer_optics``: Bodhaine
       et al. 1999 Rayleigh, DBM ozone cross sections, Ångström aerosol) on the 27 layers
       of the AFGL 1986 U.S. Standard atmosphere (``models.atmosphere``).
    2. Pseudo-spherical beam: the path of the solar ray reaching each level through each
       layer (``models.atmosphere.beam_path_factors``), for the *true* (airless) solar
       zenith, the beam's direction at the top of the atmosphere (``models.atmosphere``,
       "Which zenith angle").
    3. Multiple scattering by the multi-layer four-stream discrete-ordinates solver
       (``models.four_stream.surface_irradiance``; Rayleigh + Henyey-Greenstein phase
       function, shares from ``models.optics.rayleigh_scattering_fraction``) over a Lambertian
       surface of the given UV albedo, giving direct and diffuse horizontal flux per unit
       extraterrestrial irradiance.
    4. Multiplied by the ASTM G173-03 extraterrestrial spectrum at 1 AU
       (``models.spectral_grid``) and by 1 / d² for the Earth–Sun distance d in AU.

Units: W m⁻² nm⁻¹ on a horizontal surface, on ``models.spectral_grid.WAVELENGTH_NM``.
The sun lights the sky until its true zenith reaches
``models.solar_geometry.CIVIL_TWILIGHT_ZENITH_DEG`` (96°): between 90° and 96° the
ground gets no direct beam but the diffuse light of the sunlit upper atmosphere (at 90°
about 2 % of the UV Index at 70°, at 94° a twentieth of that; tests/models/test_low_sun.py);
records at or beyond 96° get exact zeros.

Inputs are (N,) arrays (scalars broadcast), already validated by the engine: true zenith
0–180°, distance 0.98–1.02 AU, ozone 50–700 DU, pressure 300–1100 hPa, albedo 0–1
(or (N, W) spectral albedo), aerosol as in ``models.optics``.

Records are solved in chunks of ``CHUNK_RECORDS`` to bound the memory of the (N, L, W)
layer arrays; within a chunk everything is vectorised.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from uvdose.models import action_spectra, atmosphere, irradiance_table, optics, weighted_table
from uvdose.models.four_stream import surface_irradiance
from uvdose.models.solar_geometry import CIVIL_TWILIGHT_ZENITH_DEG
from uvdose.models.spectral_grid import WAVELENGTH_NM, extraterrestrial_spectrum_w_m2_nm

METHODS = ("auto", "direct", "table")
"""Accepted values of ``method`` in :func:`spectral_irradiance`."""

CHUNK_RECORDS = 1024
"""Records per solver call; bounds the (N, L, W) working arrays to ~30 MB each."""


@dataclass(frozen=True)
class ClearSkySpectrum:
    """Surface spectral irradiance on a horizontal plane, W m⁻² nm⁻¹.

    ``direct_horizontal_w_m2_nm`` and ``diffuse_horizontal_w_m2_nm`` are (N, W) on
    ``wavelength_nm`` (W,).
    """

    wavelength_nm: np.ndarray
    direct_horizontal_w_m2_nm: np.ndarray
    diffuse_horizontal_w_m2_nm: np.ndarray

    @property
    def global_horizontal_w_m2_nm(self) -> np.ndarray:
        """Direct plus diffuse horizontal, (N, W)."""
        return self.direct_horizontal_w_m2_nm + self.diffuse_horizontal_w_m2_nm


@lru_cache(maxsize=32)
def grid_weights(names: tuple[str, ...]) -> np.ndarray:
    """``models.action_spectra.weight_matrix`` of ``names`` on ``WAVELENGTH_NM``, (W, S),
    computed once per set of names (read-only)."""
    matrix = action_spectra.weight_matrix(names, WAVELENGTH_NM)
    matrix.setflags(write=False)
    return matrix


def _as_record_arrays(true_zenith_deg, *values):
    zenith = np.atleast_1d(np.asarray(true_zenith_deg, dtype=float))
    return (zenith, *(np.broadcast_to(np.asarray(v, dtype=float), zenith.shape) for v in values))


def spectral_irradiance_direct_solve(true_zenith_deg, earth_sun_distance_au, ozone_du,
                                     pressure_hpa, surface_albedo, aod_550, angstrom_exponent,
                                     single_scattering_albedo, asymmetry_factor) -> ClearSkySpectrum:
    """Clear-sky direct and diffuse horizontal spectral irradiance by the full solve.

    See the module docstring for the method and units. Every argument is (N,) or a scalar;
    ``surface_albedo`` may also be (N, W).
    """
    zenith, distance, ozone, pressure, aod, alpha, ssa, g = _as_record_arrays(
        true_zenith_deg, earth_sun_distance_au, ozone_du, pressure_hpa, aod_550,
        angstrom_exponent, single_scattering_albedo, asymmetry_factor)
    n_records, n_wavelengths = zenith.size, WAVELENGTH_NM.size
    albedo = np.asarray(surface_albedo, dtype=float)
    albedo = np.broadcast_to(albedo[..., None] if albedo.ndim <= 1 else albedo,
                             (n_records, n_wavelengths))

    direct = np.zeros((n_records, n_wavelengths))
    diffuse = np.zeros((n_records, n_wavelengths))
    sun_up = np.flatnonzero(zenith < CIVIL_TWILIGHT_ZENITH_DEG)
    top_of_atmosphere = extraterrestrial_spectrum_w_m2_nm()
    for start in range(0, sun_up.size, CHUNK_RECORDS):
        rows = sun_up[start:start + CHUNK_RECORDS]
        layer = optics.layer_optics(ozone[rows], pressure[rows], aod[rows], alpha[rows],
                                    ssa[rows], g[rows])
        direct_rel, diffuse_rel = surface_irradiance(
            layer.tau, layer.ssa, layer.g, np.cos(np.deg2rad(zenith[rows])), albedo[rows],
            beam_path_factors=atmosphere.beam_path_factors(zenith[rows]),
            rayleigh_scattering_fraction=optics.rayleigh_scattering_fraction(layer, pressure[rows]))
        direct_rel[zenith[rows] >= 90.0] = 0.0  # on or below the horizon: no direct beam
        scale = top_of_atmosphere[None, :] / distance[rows, None] ** 2
        direct[rows] = direct_rel * scale
        diffuse[rows] = diffuse_rel * scale
    return ClearSkySpectrum(WAVELENGTH_NM, direct, diffuse)


class FullSolveLimitExceeded(Exception):
    """More records need the full solve than the caller's :class:`FullSolveBudget` allows."""

    def __init__(self, requested: int, limit: int):
        super().__init__(f"{requested} records need the full radiative-transfer solve; "
                         f"at most {limit} are allowed")
        self.requested = requested
        self.limit = limit


class FullSolveBudget:
    """How many records one caller (e.g. one HTTP request) lets the full solve take.

    The full solve runs at about 100 records/s per core (``tests/benchmarks/bench_engine.py``)
    against tens of thousands for the precomputed tables, so a large batch of records outside
    them (an aerosol beyond ``models.aerosol_table``'s range: very thick or strongly
    absorbing) could outlast any request timeout.
    :meth:`spend` raises :class:`FullSolveLimitExceeded` before such work starts.
    """

    def __init__(self, limit: int):
        self.limit = int(limit)
        self.used = 0

    def spend(self, records: int) -> None:
        if self.used + records > self.limit:
            raise FullSolveLimitExceeded(self.used + records, self.limit)
        self.used += records


def spectral_irradiance(true_zenith_deg, earth_sun_distance_au, ozone_du, pressure_hpa,
                        surface_albedo, aod_550, angstrom_exponent, single_scattering_albedo,
                        asymmetry_factor, method: str = "auto",
                        full_solve_budget: FullSolveBudget | None = None) -> ClearSkySpectrum:
    """Clear-sky direct and diffuse horizontal spectral irradiance, W m⁻² nm⁻¹, (N, W).

    ``true_zenith_deg`` is the true (airless) solar zenith (``models.solar_geometry``'s
    ``true_zenith_deg``), not the apparent one. ``method``: "direct" runs the full solve (:func:`spectral_irradiance_direct_solve`);
    "table" interpolates the precomputed table of ``models.irradiance_table``; "auto" uses
    the table for records inside its range and the full solve for the rest; "table"
    refuses a daytime record outside the table, naming the record and the field.
    ``full_solve_budget``, when given, bounds the records the "auto" method sends to the
    full solve.
    """
    arguments = (true_zenith_deg, earth_sun_distance_au, ozone_du, pressure_hpa,
                 surface_albedo, aod_550, angstrom_exponent, single_scattering_albedo,
                 asymmetry_factor)
    if method == "direct":
        return spectral_irradiance_direct_solve(*arguments)
    if method in ("auto", "table"):
        fallback = None
        if method == "auto":
            def fallback(*uncovered):
                if full_solve_budget is not None:
                    full_solve_budget.spend(np.atleast_1d(uncovered[0]).size)
                return spectral_irradiance_direct_solve(*uncovered)
        direct, diffuse = irradiance_table.spectral_irradiance(*arguments, direct_solve=fallback)
        return ClearSkySpectrum(WAVELENGTH_NM, direct, diffuse)
    raise ValueError(f"unknown clear-sky method {method!r}; expected one of {METHODS}")


def weighted_irradiance(true_zenith_deg, ozone_du, pressure_hpa, surface_albedo, aod_550,
                        angstrom_exponent, single_scattering_albedo, asymmetry_factor,
                        spectra, transmittance=None, method: str = "auto",
                        full_solve_budget: FullSolveBudget | None = None):
    """Weighted direct and diffuse horizontal irradiance at 1 AU, W m⁻².

    ``spectra`` names S action spectra or bands of ``models.action_spectra``; each
    integral weights the spectrum behind ``transmittance`` ((W,) on ``WAVELENGTH_NM``,
    ``None`` for none). Returns ``(direct, diffuse, open_sky_erythema)``: (N, S), (N, S)
    and the erythemal global irradiance without any filter (N,), computed the same way
    whatever the filter (the UV Index does not depend on it). Other arguments and
    ``method`` as in :func:`spectral_irradiance`.

    Records of the default aerosol type inside the precomputed table (grey albedo) take
    the weighted integrals of ``models.weighted_table`` directly: all of them without a
    filter, the open-sky erythema alone behind one (so that the UV Index does not depend on
    the filter); the rest are weighted from their spectra.
    """
    zenith, ozone, pressure, aod, alpha, ssa, g = _as_record_arrays(
        true_zenith_deg, ozone_du, pressure_hpa, aod_550, angstrom_exponent,
        single_scattering_albedo, asymmetry_factor)
    albedo = np.asarray(surface_albedo, dtype=float)
    names = tuple(spectra)
    integrable = np.zeros(zenith.size, dtype=bool)
    if method in ("auto", "table") and albedo.ndim <= 1:
        albedo = np.broadcast_to(albedo, zenith.shape)
        integrable = (zenith < CIVIL_TWILIGHT_ZENITH_DEG) & irradiance_table.in_table_range(
            zenith, ozone, pressure, aod, alpha, ssa, g)
    integrated = integrable if transmittance is None else np.zeros(zenith.size, dtype=bool)
    with_erythema = names if "erythema" in names else (*names, "erythema")
    direct = np.zeros((zenith.size, len(with_erythema)))
    diffuse = np.zeros((zenith.size, len(with_erythema)))
    open_sky = np.zeros(zenith.size)
    rows = np.flatnonzero(integrated)
    if rows.size:
        direct[rows], diffuse[rows] = weighted_table.weighted_irradiance(
            zenith[rows], ozone[rows], pressure[rows], albedo[rows], aod[rows], with_erythema)
        erythema = with_erythema.index("erythema")
        open_sky[rows] = direct[rows, erythema] + diffuse[rows, erythema]
    rest = np.flatnonzero(~integrated)
    if rest.size:
        part = np.asarray(albedo)
        part = part[rest] if part.ndim >= 1 and part.shape[0] == zenith.size else part
        sky = spectral_irradiance(zenith[rest], 1.0, ozone[rest], pressure[rest], part, aod[rest],
                                  alpha[rest], ssa[rest], g[rest], method=method,
                                  full_solve_budget=full_solve_budget)
        weights = grid_weights(with_erythema)
        if transmittance is not None:
            weights = weights * np.asarray(transmittance, dtype=np.float64)[:, None]
        direct[rest] = sky.direct_horizontal_w_m2_nm @ weights
        diffuse[rest] = sky.diffuse_horizontal_w_m2_nm @ weights
        open_sky[rest] = sky.global_horizontal_w_m2_nm @ grid_weights(("erythema",))[:, 0]
    behind_filter = np.flatnonzero(integrable & ~integrated)
    if behind_filter.size:
        part = [column[behind_filter] for column in (zenith, ozone, pressure, albedo, aod)]
        direct_erythema, diffuse_erythema = weighted_table.weighted_irradiance(*part, ("erythema",))
        open_sky[behind_filter] = (direct_erythema + diffuse_erythema)[:, 0]
    count = len(names)
    return direct[:, :count], diffuse[:, :count], open_sky
