"""Multi-layer delta-Eddington two-stream solver with a pseudo-spherical direct beam.

Methods (each implemented below, where it is used):

- Delta-Eddington scaling of each layer's optical depth, single scattering albedo and
  asymmetry factor: Joseph, Wiscombe & Weinman (1976), *J. Atmos. Sci.* 33:2452,
  forward-peak fraction ``f = g**2``.
- Eddington two-stream coefficients gamma1..gamma4 and the layer solution (homogeneous
  modes ``exp(+-k t)`` plus a particular solution for the attenuated beam):
  Meador & Weaver (1980), *J. Atmos. Sci.* 37:630, Table 1; written in the notation of
  Toon et al. (1989), *J. Geophys. Res.* 94:16287, eqs. 1-2 and 23-24.
- Layers combined by the adding method for fluxes (e.g. Liou, *An Introduction to
  Atmospheric Radiation*, 2nd ed. 2002, sec. 6.5; Coakley, Cess & Yurevich 1983,
  *J. Atmos. Sci.* 40:116), from the top of the atmosphere down to the surface.
- Lambertian surface coupled analytically through the atmosphere's spherical albedo
  ``S`` (reflectance of the whole atmosphere for isotropic illumination from below):
  ``global(a) = global(0) / (1 - a S)`` (Tanre, Herman, Deschamps & de Leffe 1979,
  *Appl. Opt.* 18:3587; the same relation is used in 6S, Vermote et al. 1997). In a
  two-stream adding scheme this relation is exact, so ``S`` comes out of the same pass.
- Pseudo-spherical direct beam: the slant optical depth of every level along the ray
  that reaches it (``models.atmosphere.beam_path_factors``, or one per-layer air mass for
  every level), the beam attenuated within each layer at the average secant between its
  two levels, while the diffuse source it feeds is computed with the one solar cosine
  ``mu0`` (Dahlback & Stamnes 1991, *Planet. Space Sci.* 39:671; the approximation
  DISORT's pseudo-spherical option uses; shared with ``models.four_stream`` through
  ``models.solver_parts``).

Numerical safeguards (documented because they change numbers, if only slightly):

- Single scattering albedo after scaling is capped at ``1 - 1e-9``: the conservative
  limit ``k -> 0`` is then reached through ``expm1``/``log1p``-free but
  cancellation-safe expressions (below), and the absorption the cap adds is of order
  1e-9 of the layer optical depth.
- Where the beam attenuation rate ``m`` (1/mu0 plane-parallel) comes within a relative
  1e-4 of the eigenvalue ``k``, the particular solution is singular; ``m`` is moved to
  ``k (1 +- 1e-4)`` for that layer and wavelength (beam and source alike), which
  changes the layer's beam transmission by about 1e-4 of its optical depth.
- The homogeneous solution's exponentials have non-positive arguments, so optically
  thick layers neither overflow nor lose the solution; the beam's are bounded by a
  slant optical depth of 600 (``models.solver_parts.SLANT_DEPTH_LIMIT``), also where its
  average secant through a layer is negative (the beam brighter at the layer's bottom).

``models.four_stream`` holds a four-stream discrete-ordinates solver with the same array
contract that meets the low-sun target below (tests/models/test_four_stream.py); the
engine uses that one. The parts both share (input checks, beam geometry, delta scaling,
the eigenvalue guard, the surface-albedo relation) live in ``models.solver_parts``.

Known limitations (measured against 16-stream DISORT, see tests/models/test_two_stream.py):

- Low sun: like every two-stream closure, delta-Eddington overestimates the
  surface flux at large solar zenith angles (erythemal irradiance about +4 % at 65
  degrees, +8 % at 75 degrees, +12 % at 80 degrees on a clean UV atmosphere) and
  underestimates skylight that was scattered above the ozone layer (below ~305 nm at
  low sun), because a fixed diffusivity cannot carry the near-vertical skylight
  through strong absorbers. Replacing only the single-scattered skylight by the exact
  one (TMS-style, Nakajima & Tanaka 1988) was tried and measured: it removes most of
  the erythemal excess (+1 % at 75 degrees) but leaves the closure's error in the
  higher orders (UVB still +7 %, UVA now -5 % at 75 degrees); four streams fix both.
- For nearly pure absorbers (delta-scaled ``w (4 - 3 g) < 1``) the Eddington
  coefficient gamma2 turns negative and so does the layer reflectance (a few per
  cent of the incident diffuse flux at most). In UV atmospheres the Rayleigh
  scattering of the lower layers dominates the column's reflectance, which stays
  positive.

Units: all results are per unit extraterrestrial irradiance on a surface normal to the
beam, so multiplying by the extraterrestrial spectral irradiance (W m-2 nm-1) gives
horizontal spectral irradiances in W m-2 nm-1.

The direct beam returned is the delta-scaled one (the forward-scattered peak, which
stays within a few degrees of the sun, is counted with the beam), as DISORT's
``rfldir`` is.
"""
from __future__ import annotations

import numpy as np

from uvdose.models.solver_parts import (TransferComponents, apply_surface_albedo, beam_geometry,
                                        checked_layer_inputs, delta_scaled,
                                        direct_horizontal_flux, layer_beam,
                                        level_slant_depths, separated_beam_rate)

def _delta_eddington_layer(tau, ssa, g, mu0, attenuation):
    """Reflectance/transmittance of one homogeneous layer, each ``(N, W)``.

    ``attenuation`` is the beam's extinction per unit (unscaled-geometry) vertical
    optical depth in this layer: ``1/mu0`` plane-parallel, the layer air mass
    pseudo-spherically. Returns ``(r, t, r_beam, t_beam, beam_transmission)``: diffuse
    reflectance and transmittance (either side, the layer is homogeneous), the diffuse
    up- and downward fluxes leaving the layer per unit beam irradiance (normal to the
    beam) at its top, and the beam's transmission through the layer.
    """
    # Joseph, Wiscombe & Weinman (1976): f = g^2.
    tau_s, w = delta_scaled(tau, ssa, g * g)
    gs = g / (1.0 + g)

    # Eddington coefficients, Meador & Weaver (1980) Table 1.
    gamma1 = (7.0 - w * (4.0 + 3.0 * gs)) * 0.25
    gamma2 = -(1.0 - w * (4.0 - 3.0 * gs)) * 0.25
    gamma3 = (2.0 - 3.0 * gs * mu0) * 0.25
    gamma4 = 1.0 - gamma3
    # gamma1 - gamma2 = 2(1-w) and gamma1 + gamma2 = 1.5(1 - w g): k^2 without cancellation.
    k_squared = 3.0 * (1.0 - w) * (1.0 - w * gs)
    k = np.sqrt(k_squared)
    # Gamma = gamma2 / (gamma1 + k) (= (gamma1 - k) / gamma2, Toon et al. 1989 eq. 22),
    # kept as its distance d = Gamma - 1 from the conservative limit.
    d = -(2.0 * (1.0 - w) + k) / (gamma1 + k)
    big_gamma = 1.0 + d

    e = np.exp(-k * tau_s)
    one_minus_gamma_e = -np.expm1(-k * tau_s) - d * e  # both terms >= 0
    denominator = one_minus_gamma_e * (1.0 + big_gamma * e)  # 1 - Gamma^2 e^2
    r = big_gamma * (-np.expm1(-2.0 * k * tau_s)) / denominator
    t = e * (-d * (2.0 + d)) / denominator  # e (1 - Gamma^2) / (1 - Gamma^2 e^2)

    # Beam: attenuation per unit scaled optical depth is the same rate m.
    m = separated_beam_rate(np.broadcast_to(attenuation, k.shape), k)
    k2_minus_m2 = k_squared - m * m
    a_up = w * (gamma3 * (gamma1 - m) + gamma2 * gamma4) / k2_minus_m2
    b_down = w * (gamma4 * (gamma1 + m) + gamma2 * gamma3) / k2_minus_m2
    beam_transmission = np.exp(-m * tau_s)
    gamma_e = big_gamma * e
    c1 = (-b_down + gamma_e * a_up * beam_transmission) / denominator
    c2 = (-a_up * beam_transmission + gamma_e * b_down) / denominator
    r_beam = c1 * big_gamma + c2 * e + a_up
    t_beam = c1 * e + c2 * big_gamma + b_down * beam_transmission
    return r, t, r_beam, t_beam, beam_transmission


def transfer_components(tau, ssa, g, mu0, beam_air_mass=None,
                        beam_path_factors=None) -> TransferComponents:
    """Surface direct and diffuse flux over a black surface and the spherical albedo.

    Parameters as for :func:`surface_irradiance` (without the albedo). Records the sun
    does not light (``mu0 <= 0`` without ``beam_path_factors``) get exact zeros for the
    fluxes (their spherical albedo and upward transmittance are still computed: they do
    not depend on the sun).
    """
    tau, ssa, g, mu0, beam_air_mass, beam_path_factors = checked_layer_inputs(
        tau, ssa, g, mu0, beam_air_mass, beam_path_factors)
    n_records, n_layers, n_wavelengths = tau.shape
    sun_up, mu_sun, path = beam_geometry(mu0, beam_air_mass, n_layers, beam_path_factors)
    # The beam's slant depths on the delta-Eddington-scaled layers (f = g^2).
    tau_scaled = delta_scaled(tau, ssa, g * g)[0]
    slant_depth = level_slant_depths(path, tau_scaled)

    shape = (n_records, n_wavelengths)
    diffuse_down = np.zeros(shape)     # at the bottom of the stack, black below
    reflect_from_below = np.zeros(shape)
    reflected = np.zeros(shape)        # leaving the top, black below
    transmit_up = np.ones(shape)       # diffuse light from below escaping at the top
    mu_col = mu_sun[:, None]
    for layer in range(n_layers):
        beam, rate = layer_beam(slant_depth, tau_scaled, layer)
        r, t, r_beam, t_beam, _ = _delta_eddington_layer(
            tau[:, layer], ssa[:, layer], g[:, layer], mu_col, rate)
        # Adding: multiple reflections between the stack above and the new layer.
        bounce = 1.0 / (1.0 - reflect_from_below * r)
        down_at_interface = (diffuse_down + reflect_from_below * r_beam * beam) * bounce
        reflected = reflected + transmit_up * (r * down_at_interface + r_beam * beam)
        transmit_up = transmit_up * t * bounce
        diffuse_down = t * down_at_interface + t_beam * beam
        reflect_from_below = r + t * t * reflect_from_below * bounce

    direct_horizontal = direct_horizontal_flux(sun_up, mu_sun, slant_depth)
    diffuse_down = np.where(sun_up[:, None], diffuse_down, 0.0)
    reflected = np.where(sun_up[:, None], reflected, 0.0)
    return TransferComponents(direct_horizontal, diffuse_down, reflect_from_below, reflected,
                              transmit_up)


def surface_irradiance(tau, ssa, g, mu0, albedo, beam_air_mass=None, beam_path_factors=None):
    """Direct and diffuse downward flux at the surface of a layered atmosphere.

    Parameters
    ----------
    tau, ssa, g : array (N, L, W)
        Layer optical depth, single scattering albedo and asymmetry factor, layers
        ordered top to bottom.
    mu0 : array (N,)
        Cosine of the solar zenith angle at the surface. ``mu0 <= 0`` gives exact zeros.
    albedo : array broadcastable to (N, W)
        Lambertian surface albedo in [0, 1].
    beam_air_mass : array (N, L), optional
        Slant/vertical path ratio of the direct beam in each layer, the same for the ray
        to every level; default ``1/mu0`` in every layer (plane-parallel).
    beam_path_factors : array (N, L + 1, L), optional
        In place of ``beam_air_mass``: the pseudo-spherical beam per level
        (``models.atmosphere.beam_path_factors``); ``mu0`` may then be negative.

    Returns
    -------
    (direct_horizontal, diffuse_down) : arrays (N, W)
        Per unit extraterrestrial irradiance normal to the beam.
    """
    parts = transfer_components(tau, ssa, g, mu0, beam_air_mass, beam_path_factors)
    return apply_surface_albedo(
        parts.direct_horizontal, parts.diffuse_down_black_surface, parts.spherical_albedo, albedo
    )
