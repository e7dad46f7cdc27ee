"""What the layered flux solvers share: their array contract, delta scaling, the beam's
eigenvalue guard and the surface-albedo relation.

``models.two_stream`` (delta-Eddington) and ``models.four_stream`` (discrete ordinates)
take the same per-layer optics (``tau, ssa, g`` of shape (N, L, W), layers top to
bottom), the same solar cosine ``mu0`` (N,) and pseudo-spherical beam air mass (N, L),
and return the same :class:`TransferComponents`. This module holds those parts, each
used by both solvers:

- :func:`checked_layer_inputs` and :func:`beam_geometry`: the input contract and the
  pseudo-spherical direct beam (Dahlback & Stamnes 1991).
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


def checked_layer_inputs(tau, ssa, g, mu0, beam_air_mass):
    """The solvers' inputs as float64 arrays, after checking shapes and ranges.

    Parameters
    ----------
    tau, ssa, g : array (N, L, W)
        Layer optical depth (finite, >= 0), single scattering albedo ([0, 1]) and
        asymmetry factor ((-1, 1)).
    mu0 : array (N,)
        Cosine of the solar zenith angle.
    beam_air_mass : array (N, L) or None
        Per-layer slant/vertical path ratio of the direct beam.

    Returns
    -------
    tuple
        ``(tau, ssa, g, mu0, beam_air_mass)``; raises ValueError naming the input that
        has the wrong shape or range.
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
    if beam_air_mass is not None:
        beam_air_mass = np.asarray(beam_air_mass, dtype=np.float64)
        if beam_air_mass.shape != (n_records, n_layers):
            raise ValueError(
                f"beam_air_mass must have shape ({n_records}, {n_layers}), "
                f"got {beam_air_mass.shape}"
            )
    if np.any(tau < 0) or np.any(~np.isfinite(tau)):
        raise ValueError("tau must be finite and non-negative")
    if np.any((ssa < 0) | (ssa > 1)):
        raise ValueError("ssa must lie in [0, 1]")
    if np.any((g <= -1) | (g >= 1)):
        raise ValueError("g must lie in (-1, 1)")
    return tau, ssa, g, mu0, beam_air_mass


def beam_geometry(mu0, beam_air_mass, n_layers):
    """Which records have the sun up, and the direct beam's path through each layer.

    Pseudo-spherical beam: attenuated along a per-layer air mass while the diffuse
    source it feeds is plane-parallel with the surface solar cosine.

    Parameters
    ----------
    mu0 : array (N,)
        Cosine of the solar zenith angle at the surface.
    beam_air_mass : array (N, L) or None
        Per-layer air mass of the beam; ``None`` means plane-parallel, ``1/mu0``.
    n_layers : int
        L.

    Returns
    -------
    tuple
        ``(sun_up, mu_sun, air_mass)``: boolean (N,), ``mu0`` with 1 where the sun is
        down, and the per-layer air mass (N, L) (1 where the sun is down), checked to be
        finite and >= 1 where the sun is up.

    References
    ----------
    .. [1] Dahlback, A. and Stamnes, K. (1991). A new spherical model for computing the
       radiation field available for photolysis and heating at twilight. Planet. Space
       Sci. 39, 671-683.
    """
    sun_up = mu0 > 0
    mu_sun = np.where(sun_up, mu0, 1.0)
    if beam_air_mass is None:
        return sun_up, mu_sun, np.broadcast_to((1.0 / mu_sun)[:, None], (mu0.size, n_layers))
    air_mass = np.where(sun_up[:, None], beam_air_mass, 1.0)
    if np.any(~np.isfinite(air_mass) | (air_mass < 1.0 - 1e-9)):
        raise ValueError("beam_air_mass must be finite and >= 1 where the sun is up")
    return sun_up, mu_sun, air_mass


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
    the layer's beam transmission by about 1e-4 of its optical depth.

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
    gap = eigenvalue - rate
    too_close = np.abs(gap) < EIGENVALUE_GUARD * rate
    if np.any(too_close):
        shift = np.where(gap > 0, -EIGENVALUE_GUARD, EIGENVALUE_GUARD)
        rate = np.where(too_close, eigenvalue * (1.0 + shift), rate)
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
