"""DISORT on the engine's own layer optics: the reference of the low-sun and solver tests.

DISORT (Stamnes, Tsay, Wiscombe & Jayaweera 1988, *Appl. Opt.* 27:2502) through the PyPI
package nanodisort (Python bindings of the C port cdisort), run on exactly the layers the
engine solves: the 27 layers of the AFGL 1986 U.S. Standard atmosphere
(``models.atmosphere``), Bodhaine et al. (1999) Rayleigh, DBM ozone cross sections and the
Ångström aerosol of ``models.optics``; phase function Rayleigh (Legendre moment
chi_2 = 0.1) plus Henyey-Greenstein aerosol, split by each layer's asymmetry factor.

Two geometries (and two layerings: the engine's 27 layers, and 140 finer ones that
resolve the beam's path for the twilight checks):

- plane-parallel (the beam attenuated as ``exp(-tau / mu0)`` in every layer), and
- pseudo-spherical (cdisort's ``spher`` option, Dahlback & Stamnes 1991, *Planet. Space
  Sci.* 39:671): the beam reaching each level height ``zd`` (km) follows a straight
  spherical-shell path for an Earth radius of 6371 km, and is attenuated within each
  layer at the average secant between the slant optical depths of its two levels;
  solar zenith angles beyond 90 degrees light the upper levels only.

Not collected by pytest (no ``test_`` prefix); imported by the tests that need it.
"""
from __future__ import annotations

import numpy as np

import nanodisort

from uvdose.models import atmosphere, optics

STREAMS = 16
"""Streams of the reference runs (the accepted DISORT reference for UV fluxes)."""


def disort_fluxes(tau, ssa, moments, mu0, albedo, streams=STREAMS, level_heights_km=None):
    """DISORT direct and diffuse downward flux at the surface, per unit normal beam, (W,).

    ``tau, ssa`` (L, W) and ``moments`` (L, W, >= streams + 1) for layers top to bottom;
    ``level_heights_km`` (L + 1,) switches on the pseudo-spherical beam (else
    plane-parallel). ``mu0`` may be negative with it (sun below the horizon).
    """
    n_layers, n_wavelengths = tau.shape
    solver = nanodisort.BatchSolver(nthreads=1)
    solver.nstr = streams
    solver.nlyr = n_layers
    solver.nmom = streams
    solver.ntau = 1
    solver.usrtau = True
    solver.usrang = False
    solver.lamber = True
    solver.onlyfl = True
    solver.quiet = True
    solver.umu0 = float(mu0)
    solver.phi0 = 0.0
    if level_heights_km is not None:
        solver.spher = True
        solver.radius = atmosphere.EARTH_RADIUS_KM
        solver.set_zd(np.array(level_heights_km, dtype=float))
    solver.allocate(n_wavelengths)
    solver.set_utau_batched(tau.sum(axis=0)[:, None].copy())
    solver.set_dtauc(np.ascontiguousarray(tau.T))
    solver.set_ssalb(np.ascontiguousarray(ssa.T))
    solver.set_pmom(np.asfortranarray(np.transpose(moments[..., :streams + 1], (2, 0, 1))))
    solver.set_fbeam(np.ones(n_wavelengths))
    solver.set_albedo(np.full(n_wavelengths, float(albedo)))
    solver.solve()
    return np.asarray(solver.rfldir)[:, -1].copy(), np.asarray(solver.rfldn)[:, -1].copy()


def engine_layers(ozone_du=300.0, pressure_hpa=1013.25, aod_550=0.05, streams=STREAMS,
                  aerosol_type=(optics.DEFAULT_ANGSTROM_EXPONENT,
                                optics.DEFAULT_SINGLE_SCATTERING_ALBEDO,
                                optics.DEFAULT_ASYMMETRY_FACTOR)):
    """The engine's layer optics for one column with an aerosol type (Ångström exponent,
    single scattering albedo, asymmetry factor > 0; the default one unless given), and the
    DISORT phase moments for them: ``(tau, ssa, g, moments)``, (L, W[, streams + 1])."""
    alpha, ssa_aerosol, g_aerosol = aerosol_type
    layer = optics.layer_optics(np.array([ozone_du]), pressure_hpa, aod_550, alpha,
                                ssa_aerosol, g_aerosol)
    tau, ssa, g = layer.tau[0], layer.ssa[0], layer.g[0]
    aerosol_share = g / g_aerosol  # of the layer's scattering
    moments = aerosol_share[..., None] * g_aerosol ** np.arange(streams + 1)
    moments[..., 2] += 0.1 * (1.0 - aerosol_share)
    moments[..., 0] = 1.0  # exactly: DISORT rejects a rounded normalisation
    return tau, ssa, g, moments


def pseudo_spherical_global(zenith_deg, ozone_du=300.0, pressure_hpa=1013.25, aod_550=0.05,
                            albedo=0.05, streams=STREAMS, aerosol_type=None):
    """Global horizontal flux at the surface per unit normal beam, (W,), by pseudo-spherical
    DISORT on the engine's layers for a sun at ``zenith_deg`` (its direction at the top of
    the atmosphere); ``aerosol_type`` as in :func:`engine_layers`."""
    extra = {} if aerosol_type is None else {"aerosol_type": aerosol_type}
    tau, ssa, _, moments = engine_layers(ozone_du, pressure_hpa, aod_550, streams, **extra)
    direct, diffuse = disort_fluxes(tau, ssa, moments, np.cos(np.radians(zenith_deg)), albedo,
                                    streams, atmosphere.LAYER_BOUNDARIES_KM)
    return direct + diffuse


FINE_LEVELS_KM = np.unique(np.concatenate([np.arange(0.0, 60.01, 0.5),
                                           np.arange(60.0, 100.01, 2.0)]))[::-1]
"""140 layers, 0.5 km thick to 60 km, 2 km above: a reference that resolves the beam's
path through the layers (the engine's 27 layers are 1-2 km thick below 30 km)."""


def layers_between(levels_km):
    """The standard profile integrated over other layer boundaries (top to bottom, km),
    by the engine's own ``models.atmosphere.standard_layers``."""
    saved = atmosphere.LAYER_BOUNDARIES_KM
    atmosphere.LAYER_BOUNDARIES_KM = np.asarray(levels_km, dtype=float)
    atmosphere.standard_layers.cache_clear()
    try:
        return atmosphere.standard_layers()
    finally:
        atmosphere.LAYER_BOUNDARIES_KM = saved
        atmosphere.standard_layers.cache_clear()


def fine_layer_global(zenith_deg, ozone_du=300.0, pressure_hpa=1013.25, aod_550=0.05,
                      albedo=0.05, streams=STREAMS):
    """As :func:`pseudo_spherical_global`, on the 140 layers of :data:`FINE_LEVELS_KM`."""
    g_aerosol = optics.DEFAULT_ASYMMETRY_FACTOR
    layer = optics.layer_optics(np.array([ozone_du]), pressure_hpa, aod_550,
                                optics.DEFAULT_ANGSTROM_EXPONENT,
                                optics.DEFAULT_SINGLE_SCATTERING_ALBEDO, g_aerosol,
                                layers=layers_between(FINE_LEVELS_KM))
    aerosol_share = layer.g[0] / g_aerosol
    moments = aerosol_share[..., None] * g_aerosol ** np.arange(streams + 1)
    moments[..., 2] += 0.1 * (1.0 - aerosol_share)
    moments[..., 0] = 1.0
    direct, diffuse = disort_fluxes(layer.tau[0], layer.ssa[0], moments,
                                    np.cos(np.radians(zenith_deg)), albedo, streams,
                                    FINE_LEVELS_KM)
    return direct + diffuse


def uniform_layer_path_factors(zenith_deg):
    """cdisort's pseudo-spherical geometry on the engine's layers, (L + 1, L): the chord of
    the straight ray to each level through each (uniform) layer over its thickness, for a
    sun above the horizon."""
    layers = atmosphere.standard_layers()
    levels = atmosphere.level_heights_km()
    radius = atmosphere.EARTH_RADIUS_KM
    impact = (radius + levels)[:, None] * np.sin(np.radians(zenith_deg))
    reach = lambda r: np.sqrt(np.maximum(r * r - impact * impact, 0.0))  # noqa: E731
    chord = reach(radius + layers.top_km[None, :]) - reach(radius + layers.bottom_km[None, :])
    above = layers.bottom_km[None, :] >= levels[:, None] - 1e-9
    return np.where(above, chord / layers.thickness_km[None, :], 0.0)
