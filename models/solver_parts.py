"""What the layered flux solvers share: their array contract, delta scaling, the beam's
eigenvalue guard and the surface-albedo relation.

``models.two_stream`` (delta-Eddington) and ``models.four_stream`` (discrete ordinates)
take the same per-layer optics (``tau, ssa, g`` of shape (N, L, W), layers top to
bottom), the same solar cosine ``mu0`` (N,) and pseudo-spherical beam geometry (per-level
path factors (N, L + 1, L) or a per-layer air mass (N, L)), and return the same
:class:`TransferComponents`. This module holds those parts, each used by both solvers:

- :func:`checked_layer_inputs` and :func:`beam_geometry`: the input contract and the
  direct beam's geometry; :func:`level_slant_depths` and :func:`layer_beam`: the beam at
  the top of each layer and its average secant through it (pseudo-spherical beam of
  Dahlback & Stamnes 1991, as in DISORT's pseudo-spherical option).
- :func:`delta_scaled`: the similarity scaling of a layer's optical depth and single
  scattering albedo for a forward-peak fraction ``f`` (``f = g**2`` in delta-Eddington,
  Joseph et al. 1976; ``f = chi_4`` in delta-M, Wiscombe 1977), with the albedo capped
  at :data:`MAX_SCALED_SINGLE_SCATTERING_ALBEDO`.
- :func:`separated_beam_rate`: keeps the beam's attenuation rate away from an
  eigenvalue of the homogeneous solution (:data:`EIGENVALUE_GUARD`).
- :func:`apply_surface_albedo`: a Lambertian surface coupled through the atmosphere's
  spherical albedo (Tanré et al. 1979).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

MAX_SCALED_SINGLE_SCATTERING_ALBEDO = 1.0 - 1e-9
"""Cap on the delta-scaled single scattering albedo: the conservative limit is then
reached through cancellation-safe expressions, and the absorption the cap adds is of
order 1e-9 of the layer optical depth."""

EIGENVALUE_GUARD = 1e-4
"""Smallest relative distance kept between beam attenuation rate and eigenvalue."""


@dataclass(frozen=True)
class TransferComponents:
    """Surface fluxes of an atmosphere over a black surface, plus its spherical albedo.

    Each ``(N, W)``, per unit extraterrestrial irradiance normal to the beam.
    """

    direct_horizontal: np.ndarray
    """Direct (delta-scaled) beam on a horizontal surface: ``mu0 * exp(-sum tau m)``."""
    diffuse_down_black_surface: np.ndarray
    """Downward diffuse flux at the surface when the surface absorbs everything."""
    spherical_albedo: np.ndarray
    """Reflectance of the atmosphere for isotropic (diffuse) light from below."""
    reflected_black_surface: np.ndarray
    """Upward flux leaving the top of the atmosphere over a black surface."""
    transmittance_up: np.ndarray
    """Fraction of diffuse light leaving the surface upward that escapes at the top."""


def checked_layer_inputs(tau, ssa, g, mu0, beam_air_mass, beam_path_factors=None):
    """The solvers' inputs as float64 arrays, after checking shapes and ranges.

    Parameters
    ----------
    tau, ssa, g : array (N, L, W)
        Layer optical depth (finite, >= 0), single scattering albedo ([0, 1]) and
        asymmetry factor ((-1, 1)).
    mu0 : array (N,)
        Cosine of the solar zenith angle.
    beam_air_mass : array (N, L) or None
        Per-layer slant/vertical path ratio of the direct beam, the same for every level.
    beam_path_factors : array (N, L + 1, L) or None
        Per-level path factors of the beam (``models.atmosphere.beam_path_factors``);
        at most one of the two beam inputs may be given.

    Returns
    -------
    tuple
        ``(tau, ssa, g, mu0, beam_air_mass, beam_path_factors)``; raises ValueError naming
        the input that has the wrong shape or range.
    """
    tau = np.asarray(tau, dtype=np.float64)
    ssa = np.asarray(ssa, dtype=np.float64)
    g = np.asarray(g, dtype=np.float64)
    mu0 = np.asarray(mu0, dtype=np.float64)
    if tau.ndim != 3:
        raise ValueError(f"tau must have shape (N, L, W), got {tau.shape}")
    if ssa.shape != tau.shape or g.shape != tau.shape:
        raise ValueError(
            "tau, ssa and g must share one shape (N, L, W); "
            f"got {tau.shape}, {ssa.shape}, {g.shape}"
        )
    n_records, n_layers, _ = tau.shape
    if mu0.shape != (n_records,):
        raise ValueError(f"mu0 must have shape ({n_records},), got {mu0.shape}")
    if beam_air_mass is not None and beam_path_factors is not None:
        raise ValueError("give beam_air_mass or beam_path_factors, not both")
    if beam_air_mass is not None:
        beam_air_mass = np.asarray(beam_air_mass, dtype=np.float64)
        if beam_air_mass.shape != (n_records, n_layers):
            raise ValueError(
                f"beam_air_mass must have shape ({n_records}, {n_layers}), "
                f"got {beam_air_mass.shape}"
            )
    if beam_path_factors is not None:
        beam_path_factors = np.asarray(beam_path_factors, dtype=np.float64)
        if beam_path_factors.shape != (n_records, n_layers + 1, n_layers):
            raise ValueError(
                f"beam_path_factors must have shape ({n_records}, {n_layers + 1}, {n_layers}), "
                f"got {beam_path_factors.shape}"
            )
        if np.any(np.isnan(beam_path_factors) | (beam_path_factors < 0)):
            raise ValueError("beam_path_factors must be non-negative (inf in the Earth's shadow)")
    if np.any(tau < 0) or np.any(~np.isfinite(tau)):
        raise ValueError("tau must be finite and non-negative")
    if np.any((ssa < 0) | (ssa > 1)):
        raise ValueError("ssa must lie in [0, 1]")
    if np.any((g <= -1) | (g >= 1)):
        raise ValueError("g must lie in (-1, 1)")
    return tau, ssa, g, mu0, beam_air_mass, beam_path_factors


SLANT_DEPTH_LIMIT = 600.0
"""Slant optical depth beyond which a level counts as dark (the beam there is below
exp(-600), under 1e-260 of its value at the top): the beam's exponentials then stay
within exp(+-600), also where its rate through a layer is negative."""

SHADOW_SLANT_DEPTH = 1e20
"""Slant optical depth given to a level in the Earth's shadow (as cdisort's Chapman
function does): the beam entering a layer whose bottom lies in the shadow is gone within
1e-20 of the layer's optical depth."""


def beam_geometry(mu0, beam_air_mass, n_layers, beam_path_factors=None):
    """Which records the sun lights, and the direct beam's path to every level.

    Pseudo-spherical beam: the ray reaching each level has its own path through the
    layers above it (``beam_path_factors``, from ``models.atmosphere.beam_path_factors``);
    a per-layer air mass stands for the same path to every level; with neither, the beam
    is plane-parallel (``1/mu0`` in every layer). The diffuse source the beam feeds uses
    the one solar cosine ``mu0`` at every level: with parallel rays the sun has the same
    zenith angle everywhere on the site's vertical.

    Parameters
    ----------
    mu0 : array (N,)
        Cosine of the solar zenith angle; with ``beam_path_factors`` it may be negative
        (sun below the horizon, upper levels still lit).
    beam_air_mass : array (N, L) or None
        Per-layer air mass of the beam.
    n_layers : int
        L.
    beam_path_factors : array (N, L + 1, L) or None
        Per-level path factors (``inf`` for levels in the Earth's shadow).

    Returns
    -------
    tuple
        ``(lit, mu_sun, path)``: boolean (N,) records whose beam reaches the atmosphere
        below its top level; ``mu0`` with 1 for the others; path factors (N, L + 1, L)
        (zeros for the others). A per-layer air mass is checked to be finite and >= 1.

    References
    ----------
    .. [1] Dahlback, A. and Stamnes, K. (1991). A new spherical model for computing the
       radiation field available for photolysis and heating at twilight. Planet. Space
       Sci. 39, 671-683.
    """
    n_records = mu0.size
    above = np.tril(np.ones((n_layers + 1, n_layers)), k=-1)  # [i, j]: layer j above level i
    if beam_path_factors is not None:
        lit = np.all(np.isfinite(beam_path_factors[:, 1]), axis=-1)
        mu_sun = np.where(lit, mu0, 1.0)
        return lit, mu_sun, np.where(lit[:, None, None], beam_path_factors, 0.0)
    lit = mu0 > 0
    mu_sun = np.where(lit, mu0, 1.0)
    if beam_air_mass is None:
        per_layer = np.broadcast_to((1.0 / mu_sun)[:, None], (n_records, n_layers))
    else:
        per_layer = np.where(lit[:, None], beam_air_mass, 1.0)
        if np.any(~np.isfinite(per_layer) | (per_layer < 1.0 - 1e-9)):
            raise ValueError("beam_air_mass must be finite and >= 1 where the sun is up")
    path = above[None] * per_layer[:, None, :]
    return lit, mu_sun, np.where(lit[:, None, None], path, 0.0)


def level_slant_depths(path, tau_scaled):
    """Slant optical depth of the beam from the top to every level, (N, L + 1, W).

    ``path`` (N, L + 1, L) from :func:`beam_geometry`, ``tau_scaled`` (N, L, W) the layers'
    (delta-scaled) optical depths. Levels in the Earth's shadow get
    :data:`SHADOW_SLANT_DEPTH`.
    """
    finite = np.isfinite(path)
    depth = np.matmul(np.where(finite, path, 0.0), tau_scaled)
    depth[~np.all(finite, axis=-1)] = SHADOW_SLANT_DEPTH
    return depth


def direct_horizontal_flux(lit, mu_sun, slant_depth):
    """Direct beam on the horizontal surface, (N, W): ``mu0 exp(-S_surface)`` where the
    sun lights the ground (``mu0 > 0`` and the surface level not dark), else 0."""
    mu = mu_sun[:, None]
    surface = slant_depth[:, -1]
    on_ground = lit[:, None] & (mu > 0) & (surface < SLANT_DEPTH_LIMIT)
    return np.where(on_ground, mu * np.exp(-np.minimum(surface, SLANT_DEPTH_LIMIT)), 0.0)


def layer_beam(slant_depth, tau_scaled, layer):
    """Beam at the top of one layer and its attenuation rate through it, each (N, W).

    The rate is the average secant ``(S_bottom - S_top) / tau`` of DISORT's pseudo-
    spherical beam (exact at both levels; negative where the beam is brighter at the
    layer's bottom, which a ray through the ozone layer can be under a low sun). Where the
    top level is dark (slant depth above :data:`SLANT_DEPTH_LIMIT`) the beam is 0 and the
    rate 1.

    References
    ----------
    .. [1] Dahlback, A. and Stamnes, K. (1991). Planet. Space Sci. 39, 671-683.
    """
    top, bottom = slant_depth[:, layer], slant_depth[:, layer + 1]
    tau = tau_scaled[:, layer]
    lit = (top < SLANT_DEPTH_LIMIT) & (tau > 0)
    beam = np.where(top < SLANT_DEPTH_LIMIT, np.exp(-np.minimum(top, SLANT_DEPTH_LIMIT)), 0.0)
    rate = np.where(lit, (bottom - top) / np.where(lit, tau, 1.0), 1.0)
    return beam, rate


def delta_scaled(tau, ssa, forward_fraction):
    """Delta-scaled optical depth and single scattering albedo of each layer.

    The forward-scattered peak (fraction ``f`` of the scattered light) is counted with
    the unscattered beam: ``tau' = (1 - ssa f) tau``, ``ssa' = ssa (1 - f) / (1 - ssa f)``,
    the albedo capped at :data:`MAX_SCALED_SINGLE_SCATTERING_ALBEDO`.

    Parameters
    ----------
    tau, ssa, forward_fraction : arrays of one shape
        Optical depth, single scattering albedo, forward-peak fraction ``f``
        (``g**2`` for delta-Eddington [1]_, the moment ``chi_4`` for delta-M [2]_).

    Returns
    -------
    tuple
        ``(tau_scaled, ssa_scaled)``.

    References
    ----------
    .. [1] Joseph, J. H., Wiscombe, W. J. and Weinman, J. A. (1976). The delta-Eddington
       approximation for radiative flux transfer. J. Atmos. Sci. 33, 2452-2459.
    .. [2] Wiscombe, W. J. (1977). The delta-M method: rapid yet accurate radiative flux
       calculations for strongly asymmetric phase functions. J. Atmos. Sci. 34, 1408-1422.
    """
    scattered_forward = ssa * forward_fraction
    tau_scaled = (1.0 - scattered_forward) * tau
    ssa_scaled = np.minimum(ssa * (1.0 - forward_fraction) / (1.0 - scattered_forward),
                            MAX_SCALED_SINGLE_SCATTERING_ALBEDO)
    return tau_scaled, ssa_scaled


def separated_beam_rate(rate, eigenvalue):
    """The beam's attenuation rate, moved off an eigenvalue it comes too close to.

    Where ``rate`` lies within a relative :data:`EIGENVALUE_GUARD` of ``eigenvalue`` the
    particular solution for the attenuated beam is singular; there the rate becomes
    ``eigenvalue * (1 -+ EIGENVALUE_GUARD)`` (on the side it came from), which changes
    the layer's beam transmission by about 1e-4 of its optical depth. The particular
    solution is singular at ``rate = -eigenvalue`` too, so a negative rate (the beam
    brighter at the layer's bottom) is kept off it in the same way.

    Parameters
    ----------
    rate : array
        Beam attenuation per unit scaled optical depth (``1/mu0`` plane-parallel).
    eigenvalue : array, broadcastable with ``rate``
        Eigenvalue ``k`` of the layer's homogeneous solution.

    Returns
    -------
    numpy.ndarray
        ``rate`` (broadcast to the eigenvalue's shape) with those entries moved.
    """
    size = np.abs(rate)
    gap = eigenvalue - size
    too_close = np.abs(gap) < EIGENVALUE_GUARD * size
    if np.any(too_close):
        shift = np.where(gap > 0, -EIGENVALUE_GUARD, EIGENVALUE_GUARD)
        rate = np.where(too_close, np.copysign(eigenvalue * (1.0 + shift), rate), rate)
    return rate


def apply_surface_albedo(direct_horizontal, diffuse_down_black_surface, spherical_albedo, albedo):
    """Direct and diffuse horizontal flux over a Lambertian surface of albedo ``albedo``.

    The surface reflects ``a`` of the global flux, the atmosphere sends ``S`` of that
    back down, and the geometric series sums to ``global(a) = global(0) / (1 - a S)``.
    The direct beam does not change; the extra light is diffuse. Exact in an adding
    scheme, since a Lambertian surface reflects isotropically.

    Parameters
    ----------
    direct_horizontal, diffuse_down_black_surface, spherical_albedo : arrays (N, W)
        From :class:`TransferComponents` (or the precomputed table).
    albedo : array broadcastable to (N, W)
        Lambertian surface albedo in [0, 1].

    Returns
    -------
    tuple
        ``(direct_horizontal, diffuse_down)``, in the precision of the fluxes (float32
        from the table, float64 from the solvers).

    References
    ----------
    .. [1] Tanré, D., Herman, M., Deschamps, P. Y. and de Leffe, A. (1979). Atmospheric
       modeling for space measurements of ground reflectances, including bidirectional
       properties. Appl. Opt. 18, 3587-3594.
    .. [2] Vermote, E. F., Tanré, D., Deuzé, J. L., Herman, M. and Morcrette, J. J. (1997).
       Second Simulation of the Satellite Signal in the Solar Spectrum, 6S: an overview.
       IEEE Trans. Geosci. Remote Sens. 35, 675-686.
    """
    albedo = np.asarray(albedo, dtype=np.result_type(direct_horizontal, np.float32))
    if np.any((albedo < 0) | (albedo > 1)):
        raise ValueError("surface albedo must lie in [0, 1]")
    global_black = direct_horizontal + diffuse_down_black_surface
    global_flux = global_black / (1.0 - albedo * spherical_albedo)
    return direct_horizontal, global_flux - direct_horizontal
