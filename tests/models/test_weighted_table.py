"""Weighted integrals straight from the table (models.weighted_table) against the spectral path.

The reference is the engine's spectral path: the same table interpolated per wavelength
(``models.irradiance_table``, itself within 1 % of the full solve,
tests/models/test_irradiance_table.py) and weighted afterwards. The two interpolate the
same node values in different orders, so they must agree to well within the table's own
error: 0.5 % for every action spectrum and band (our own bound).
"""
import numpy as np
import pytest

from uvdose.models import action_spectra, clear_sky, weighted_table
from uvdose.models.spectral_grid import WAVELENGTH_NM
from tests.models.test_irradiance_table import random_records

SPECTRA = tuple(action_spectra.ACTION_SPECTRA)


def both_paths(records):
    spectral = clear_sky.spectral_irradiance(**{**records, "earth_sun_distance_au": 1.0},
                                             method="table")
    weights = action_spectra.weight_matrix(SPECTRA, WAVELENGTH_NM)
    direct, diffuse = weighted_table.weighted_irradiance(
        records["true_zenith_deg"], records["ozone_du"], records["pressure_hpa"],
        records["surface_albedo"], records["aod_550"], SPECTRA)
    return (direct, diffuse), (spectral.direct_horizontal_w_m2_nm @ weights,
                               spectral.diffuse_horizontal_w_m2_nm @ weights)


@pytest.mark.parametrize("seed", [1, 2])
def test_weighted_integrals_agree_with_the_weighted_spectrum(seed):
    (direct, diffuse), (want_direct, want_diffuse) = both_paths(random_records(400, seed))
    global_deviation = (direct + diffuse) / (want_direct + want_diffuse) - 1.0
    assert np.max(np.abs(global_deviation)) < 0.005, np.max(np.abs(global_deviation), axis=0)
    # The split matters on a tilted receiver: each part within 0.5 % of the global.
    scale = want_direct + want_diffuse
    assert np.max(np.abs(direct - want_direct) / scale) < 0.005
    assert np.max(np.abs(diffuse - want_diffuse) / scale) < 0.005


def test_weighted_integrals_in_twilight_follow_the_spectral_path():
    (direct, diffuse), (want_direct, want_diffuse) = both_paths(
        random_records(200, 3, zenith_range_deg=(90.0, 95.9)))
    assert np.all(direct == 0.0)
    np.testing.assert_allclose(diffuse, want_diffuse, rtol=0.005)


def test_clear_sky_weighted_irradiance_mixes_both_paths_by_record():
    # Default type inside the table (integrals), a client aerosol (spectral), night (zeros).
    records = dict(true_zenith_deg=np.array([35.0, 35.0, 120.0]), ozone_du=300.0,
                   pressure_hpa=1000.0, surface_albedo=np.array([0.05, 0.05, 0.05]),
                   aod_550=0.2, angstrom_exponent=np.array([1.3, 0.8, 1.3]),
                   single_scattering_albedo=0.93, asymmetry_factor=0.7)
    direct, diffuse, open_sky = clear_sky.weighted_irradiance(**records, spectra=("uvb", "uva"))
    sky = clear_sky.spectral_irradiance(**{**records, "earth_sun_distance_au": 1.0})
    weights = action_spectra.weight_matrix(("uvb", "uva"), WAVELENGTH_NM)
    np.testing.assert_allclose(direct + diffuse, sky.global_horizontal_w_m2_nm @ weights, rtol=0.005)
    erythema = action_spectra.weight_matrix(("erythema",), WAVELENGTH_NM)[:, 0]
    np.testing.assert_allclose(open_sky, sky.global_horizontal_w_m2_nm @ erythema, rtol=0.005)
    assert np.all(direct[2] == 0) and np.all(diffuse[2] == 0) and open_sky[2] == 0
