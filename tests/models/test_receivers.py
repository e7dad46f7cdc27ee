"""Receivers against pvlib's isotropic transposition (Liu & Jordan 1963) as reference."""
import numpy as np
import pandas as pd
import pytest
from pvlib import irradiance

from uvdose.models.receivers import cos_incidence, receiver_spectral_irradiance

RNG = np.random.default_rng(20261201)


def _random_geometry(n):
    zenith = RNG.uniform(0.0, 89.0, n)
    azimuth = RNG.uniform(0.0, 360.0, n)
    tilt = RNG.uniform(0.0, 90.0, n)
    tilt[:5] = [0.0, 90.0, 90.0, 45.0, 90.0]
    receiver_az = RNG.uniform(0.0, 360.0, n)
    albedo = RNG.uniform(0.0, 0.9, n)
    return zenith, azimuth, tilt, receiver_az, albedo


def test_matches_pvlib_isotropic_total_irradiance():
    # Reference library: pvlib.irradiance.get_total_irradiance(model="isotropic").
    n, w = 200, 3
    zenith, azimuth, tilt, receiver_az, albedo = _random_geometry(n)
    direct_h = RNG.uniform(0.0, 0.3, (n, w))
    diffuse_h = RNG.uniform(0.0, 0.3, (n, w))
    ours = receiver_spectral_irradiance(direct_h, diffuse_h, zenith, azimuth, tilt,
                                        receiver_az, np.ones(n), albedo)
    for k in range(w):
        dni = direct_h[:, k] / np.cos(np.radians(zenith))
        ref = irradiance.get_total_irradiance(
            pd.Series(tilt), pd.Series(receiver_az), pd.Series(zenith), pd.Series(azimuth),
            pd.Series(dni), pd.Series(direct_h[:, k] + diffuse_h[:, k]),
            pd.Series(diffuse_h[:, k]), albedo=pd.Series(albedo), model="isotropic")
        np.testing.assert_allclose(ours[:, k], ref["poa_global"].to_numpy(), rtol=1e-9, atol=1e-12)


def test_horizontal_unobstructed_receiver_is_the_horizontal_global():
    n = 50
    zenith, azimuth, _, receiver_az, albedo = _random_geometry(n)
    direct_h = RNG.uniform(0.0, 0.3, (n, 4))
    diffuse_h = RNG.uniform(0.0, 0.3, (n, 4))
    out = receiver_spectral_irradiance(direct_h, diffuse_h, zenith, azimuth, np.zeros(n),
                                       receiver_az, np.ones(n), albedo)
    np.testing.assert_allclose(out, direct_h + diffuse_h, rtol=1e-12)


def test_beam_from_behind_adds_nothing_and_sky_view_scales_only_the_sky():
    # Sun due south at 30° zenith; vertical receiver facing north sees no beam.
    direct_h = np.full((1, 2), 0.2)
    diffuse_h = np.full((1, 2), 0.1)
    north = receiver_spectral_irradiance(direct_h, diffuse_h, [30.0], [180.0], [90.0],
                                         [0.0], [0.5], [0.0])
    np.testing.assert_allclose(north, 0.1 * 0.5 * 0.5)
    south = receiver_spectral_irradiance(direct_h, diffuse_h, [30.0], [180.0], [90.0],
                                         [180.0], [1.0], [0.0])
    # cos θi = sin 30° = 0.5 for a vertical plane facing the sun's azimuth.
    np.testing.assert_allclose(south, 0.2 * 0.5 / np.cos(np.radians(30.0)) + 0.05)


def test_direct_beam_fraction_shades_the_beam():
    direct_h = np.full((2, 1), 0.2)
    diffuse_h = np.full((2, 1), 0.1)
    out = receiver_spectral_irradiance(direct_h, diffuse_h, [20.0, 20.0], [90.0, 90.0],
                                       [0.0, 0.0], [0.0, 0.0], [1.0, 1.0], [0.0, 0.0],
                                       direct_beam_fraction=[1.0, 0.0])
    np.testing.assert_allclose(out[:, 0], [0.3, 0.1])


def test_incidence_of_plane_facing_the_sun_is_one():
    np.testing.assert_allclose(cos_incidence([37.0], [151.0], [37.0], [151.0]), [1.0])


def test_sun_below_horizon_gives_zero_beam():
    out = receiver_spectral_irradiance(np.zeros((1, 2)), np.zeros((1, 2)), [95.0], [270.0],
                                       [90.0], [270.0], [1.0], [0.2])
    assert np.all(out == 0.0)


@pytest.mark.parametrize("field,kwargs", [
    ("tilt_deg", dict(tilt_deg=[0.0, 190.0])),
    ("sky_view_factor", dict(sky_view_factor=[1.0, -0.1])),
    ("ground_albedo", dict(ground_albedo=[0.1, np.nan])),
])
def test_bad_inputs_name_the_record_and_field(field, kwargs):
    args = dict(direct_horizontal=np.ones((2, 1)), diffuse_horizontal=np.ones((2, 1)),
                solar_zenith_deg=[10.0, 10.0], solar_azimuth_deg=[0.0, 0.0],
                tilt_deg=[0.0, 0.0], receiver_azimuth_deg=[0.0, 0.0],
                sky_view_factor=[1.0, 1.0], ground_albedo=[0.1, 0.1])
    args.update(kwargs)
    with pytest.raises(ValueError, match=rf"record 1: {field}"):
        receiver_spectral_irradiance(**args)
