"""Spectral irradiance on horizontal, tilted and vertical receivers.

The clear-sky model gives direct and diffuse irradiance on a horizontal plane. A
receiver at tilt β (0° horizontal, 90° vertical, up to 180° facing the ground) and
azimuth γ (clockwise from north, the direction its face points to) gets

    E_rx = E_dir,h · cos θi / cos θz · b                (direct beam)
         + E_dif,h · (1 + cos β)/2 · s                  (isotropic sky diffuse)
         + ρ · (E_dir,h + E_dif,h) · (1 − cos β)/2      (ground reflected)

with cos θi = cos θz cos β + sin θz sin β cos(φs − γ) the cosine of the angle of
incidence, clipped at zero: a beam arriving from behind the receiver adds nothing
(geometry, not a limit on input). ``s`` is a sky-view factor (0–1) for obstructions
on top of the plane's own view of the sky (a row of trees, a cab roof), ``b`` the
fraction of the direct beam that reaches the receiver (1 unless something shades it).

Isotropic sky and ground: Liu, B. Y. H. & Jordan, R. C. (1963), "The long-term
average performance of flat-plate solar-energy collectors", Solar Energy 7(2):53–74.
The same transposition is pvlib's ``irradiance.get_total_irradiance(model="isotropic")``,
which the tests use as the reference.
"""
from __future__ import annotations

import numpy as np

from uvdose.models.record_errors import check_records

# Below this cosine of the solar zenith the sun sits on the horizon and the horizontal
# direct irradiance is zero to rounding; dividing by it would only amplify noise.
_MIN_COS_ZENITH = 1e-6


def _check_range(name: str, values: np.ndarray, low: float, high: float) -> None:
    check_records(~np.isfinite(values) | (values < low) | (values > high), name,
                  f"must be a number in [{low:g}, {high:g}]", values if np.ndim(values) <= 1 else None)


def cos_incidence(solar_zenith_deg, solar_azimuth_deg, tilt_deg, receiver_azimuth_deg):
    """Cosine of the angle between the sun and the receiver's normal, unclipped.

    All angles in degrees; azimuths clockwise from north. Spherical trigonometry of
    the tilted plane (e.g. Duffie & Beckman, *Solar Engineering of Thermal Processes*,
    eq. 1.6.3 in its zenith/azimuth form).
    """
    zen = np.radians(np.asarray(solar_zenith_deg, dtype=float))
    tilt = np.radians(np.asarray(tilt_deg, dtype=float))
    daz = np.radians(np.asarray(solar_azimuth_deg, dtype=float)
                     - np.asarray(receiver_azimuth_deg, dtype=float))
    return np.cos(zen) * np.cos(tilt) + np.sin(zen) * np.sin(tilt) * np.cos(daz)


def transposition_factors(solar_zenith_deg, solar_azimuth_deg, tilt_deg,
                          receiver_azimuth_deg, sky_view_factor, ground_albedo,
                          direct_beam_fraction=None):
    """Per-record factors (direct, diffuse, ground) of the isotropic model, each (N,).

    The receiver's irradiance is ``direct·E_dir,h + diffuse·E_dif,h + ground·E_glo,h``;
    the factors do not depend on wavelength unless ``ground_albedo`` does, in which
    case ``ground`` has its shape (N, W). Raises ``RecordErrors`` naming every record
    with an out-of-range tilt (0–180°), sky-view factor (0–1), albedo (0–1) or
    direct-beam fraction (0–1).
    """
    zenith = np.asarray(solar_zenith_deg, dtype=float)
    tilt = np.broadcast_to(np.asarray(tilt_deg, dtype=float), zenith.shape)
    receiver_az = np.broadcast_to(np.asarray(receiver_azimuth_deg, dtype=float), zenith.shape)
    sky_view = np.broadcast_to(np.asarray(sky_view_factor, dtype=float), zenith.shape)
    albedo = np.asarray(ground_albedo, dtype=float)
    _check_range("tilt_deg", tilt, 0.0, 180.0)
    check_records(~np.isfinite(receiver_az), "receiver_azimuth_deg",
                  "must be a finite number of degrees", receiver_az)
    _check_range("sky_view_factor", sky_view, 0.0, 1.0)
    _check_range("ground_albedo", albedo, 0.0, 1.0)
    if direct_beam_fraction is None:
        beam = np.ones(zenith.shape)
    else:
        beam = np.broadcast_to(np.asarray(direct_beam_fraction, dtype=float), zenith.shape)
        _check_range("direct_beam_fraction", beam, 0.0, 1.0)

    cos_zen = np.cos(np.radians(zenith))
    cos_inc = np.clip(cos_incidence(zenith, solar_azimuth_deg, tilt, receiver_az), 0.0, None)
    sun_up = cos_zen > _MIN_COS_ZENITH
    direct = np.where(sun_up, cos_inc / np.where(sun_up, cos_zen, 1.0), 0.0) * beam
    cos_tilt = np.cos(np.radians(tilt))
    diffuse = 0.5 * (1.0 + cos_tilt) * sky_view
    ground_view = 0.5 * (1.0 - cos_tilt)
    if albedo.ndim == 2:
        ground = albedo * ground_view[:, None]
    else:
        ground = np.broadcast_to(albedo, zenith.shape) * ground_view
    return direct, diffuse, ground


def receiver_spectral_irradiance(direct_horizontal, diffuse_horizontal, solar_zenith_deg,
                                 solar_azimuth_deg, tilt_deg, receiver_azimuth_deg,
                                 sky_view_factor, ground_albedo, direct_beam_fraction=None):
    """Spectral irradiance on a receiver, W m⁻² nm⁻¹, shape (N, W).

    ``direct_horizontal`` and ``diffuse_horizontal`` are (N, W) horizontal spectral
    irradiances (W m⁻² nm⁻¹); angles (N,) in degrees, azimuths clockwise from north;
    ``tilt_deg`` 0 = horizontal facing up, 90 = vertical; ``sky_view_factor`` (N,) 0–1;
    ``ground_albedo`` (N,) or (N, W) UV albedo of the ground in front of the receiver;
    ``direct_beam_fraction`` (N,) 0–1 (default 1) share of the beam not shaded.
    Isotropic sky and ground after Liu & Jordan (1963); see the module docstring.
    A horizontal receiver with sky-view factor 1 returns direct + diffuse unchanged.
    """
    direct_h = np.asarray(direct_horizontal, dtype=float)
    diffuse_h = np.asarray(diffuse_horizontal, dtype=float)
    f_dir, f_dif, f_gnd = transposition_factors(
        solar_zenith_deg, solar_azimuth_deg, tilt_deg, receiver_azimuth_deg,
        sky_view_factor, ground_albedo, direct_beam_fraction)
    f_gnd = f_gnd if f_gnd.ndim == 2 else f_gnd[:, None]
    return (direct_h * f_dir[:, None] + diffuse_h * f_dif[:, None]
            + (direct_h + diffuse_h) * f_gnd)
