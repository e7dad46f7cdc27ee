"""Clear-sky composition: shapes, night, dispatch, and the pieces fitting together."""

import numpy as np
import pytest

from uvdose.models import atmosphere, clear_sky, optics
from uvdose.models.spectral_grid import WAVELENGTH_NM, extraterrestrial_spectrum_w_m2_nm

CLEAN = dict(aod_550=0.1, angstrom_exponent=1.3, single_scattering_albedo=0.93,
             asymmetry_factor=0.7)


def solve(zenith_deg, distance_au=1.0, ozone_du=300.0, pressure_hpa=1013.25, albedo=0.05,
          method="direct", **aerosol):
    zenith = np.atleast_1d(np.asarray(zenith_deg, dtype=float))
    options = {**CLEAN, **aerosol}
    return clear_sky.spectral_irradiance(zenith, distance_au, ozone_du, pressure_hpa, albedo,
                                         options["aod_550"], options["angstrom_exponent"],
                                         options["single_scattering_albedo"],
                                         options["asymmetry_factor"], method=method)


def test_shapes_and_sign():
    result = solve([0.0, 30.0, 60.0, 85.0])
    assert result.direct_horizontal_w_m2_nm.shape == (4, WAVELENGTH_NM.size)
    assert result.diffuse_horizontal_w_m2_nm.shape == (4, WAVELENGTH_NM.size)
    np.testing.assert_array_equal(result.wavelength_nm, WAVELENGTH_NM)
    assert np.all(result.direct_horizontal_w_m2_nm >= 0.0)
    assert np.all(result.diffuse_horizontal_w_m2_nm >= 0.0)
    # Lower sun, less UV at every wavelength above 300 nm.
    global_h = result.global_horizontal_w_m2_nm[:, 20:]
    assert np.all(np.diff(global_h, axis=0) < 0.0)


def test_twilight_has_skylight_only_and_night_exact_zeros():
    # Sun on or below the horizon: no direct beam; the sunlit upper atmosphere's skylight
    # through civil twilight (true zenith below 96 degrees), exact zeros beyond.
    for method in ("direct", "table"):
        result = solve([90.0, 95.0, 96.0, 179.0, 45.0], method=method)
        assert np.all(result.direct_horizontal_w_m2_nm[:4] == 0.0)
        assert np.all(result.diffuse_horizontal_w_m2_nm[:2, -1] > 0.0)
        assert np.all(result.diffuse_horizontal_w_m2_nm[2:4] == 0.0)
        assert result.global_horizontal_w_m2_nm[4, -1] > 0.1
        assert np.all(np.isfinite(result.global_horizontal_w_m2_nm))


def test_sun_just_above_the_horizon_is_finite_and_small():
    result = solve([89.0, 89.9])
    total = result.global_horizontal_w_m2_nm
    assert np.all(np.isfinite(total)) and np.all(total >= 0.0)
    assert np.all(total[:, -1] < 0.05)  # W m⁻² nm⁻¹ at 400 nm; ~1.1 with the sun overhead


def test_earth_sun_distance_scales_as_inverse_square():
    near, far = solve([30.0], distance_au=0.9833), solve([30.0], distance_au=1.0167)
    ratio = near.global_horizontal_w_m2_nm / far.global_horizontal_w_m2_nm
    np.testing.assert_allclose(ratio, (1.0167 / 0.9833) ** 2, rtol=1e-12)


def test_batch_equals_records_one_at_a_time():
    zenith = np.array([10.0, 40.0, 70.0])
    ozone = np.array([250.0, 320.0, 410.0])
    pressure = np.array([1013.25, 850.0, 700.0])
    batch = solve(zenith, ozone_du=ozone, pressure_hpa=pressure)
    for i in range(3):
        single = solve(zenith[i:i + 1], ozone_du=ozone[i], pressure_hpa=pressure[i])
        np.testing.assert_allclose(batch.global_horizontal_w_m2_nm[i],
                                   single.global_horizontal_w_m2_nm[0], rtol=1e-12)


def test_chunked_solve_matches_unchunked(monkeypatch):
    zenith = np.linspace(0.0, 80.0, 7)
    whole = solve(zenith)
    monkeypatch.setattr(clear_sky, "CHUNK_RECORDS", 2)
    chunked = solve(zenith)
    np.testing.assert_array_equal(whole.direct_horizontal_w_m2_nm, chunked.direct_horizontal_w_m2_nm)
    np.testing.assert_array_equal(whole.diffuse_horizontal_w_m2_nm, chunked.diffuse_horizontal_w_m2_nm)


def test_direct_beam_is_beer_lambert_through_the_layers():
    # Bouguer–Lambert–Beer law on the pseudo-spherical slant paths; aerosol-free, so the
    # delta-scaling of the solver leaves the Rayleigh + ozone beam untouched (g = 0).
    zenith = np.array([0.0, 45.0, 75.0])
    result = solve(zenith, aod_550=0.0)
    layer = optics.layer_optics(np.full(3, 300.0), 1013.25, 0.0, 1.3, 0.93, 0.7)
    slant = (layer.tau * atmosphere.beam_air_mass(zenith)[:, :, None]).sum(axis=1)
    expected = (extraterrestrial_spectrum_w_m2_nm()[None, :] * np.cos(np.radians(zenith))[:, None]
                * np.exp(-slant))
    np.testing.assert_allclose(result.direct_horizontal_w_m2_nm, expected, rtol=1e-9, atol=1e-30)


def test_spectral_albedo_is_accepted():
    flat = solve([30.0, 30.0], albedo=np.array([0.3, 0.3]))
    spectral = solve([30.0, 30.0], albedo=np.full((2, WAVELENGTH_NM.size), 0.3))
    np.testing.assert_allclose(flat.global_horizontal_w_m2_nm, spectral.global_horizontal_w_m2_nm)


def test_method_dispatch():
    direct = solve([20.0, 50.0], method="direct")
    auto = solve([20.0, 50.0], method="auto")
    np.testing.assert_allclose(auto.global_horizontal_w_m2_nm, direct.global_horizontal_w_m2_nm,
                               rtol=0.02)
    with pytest.raises(ValueError, match="unknown clear-sky method"):
        solve([20.0], method="fastest")


def test_empty_batch_gives_empty_spectra():
    empty = np.array([])
    result = clear_sky.spectral_irradiance(empty, empty, empty, empty, empty, empty, empty,
                                           empty, empty)
    assert result.direct_horizontal_w_m2_nm.shape == (0, WAVELENGTH_NM.size)
    assert result.diffuse_horizontal_w_m2_nm.shape == (0, WAVELENGTH_NM.size)


def test_full_solve_budget_counts_only_records_outside_the_table():
    from uvdose.models.clear_sky import FullSolveBudget, FullSolveLimitExceeded

    zenith = np.array([30.0, 30.0, 30.0, 120.0])
    default_type = (optics.DEFAULT_AOD_550, optics.DEFAULT_ANGSTROM_EXPONENT,
                    optics.DEFAULT_SINGLE_SCATTERING_ALBEDO, optics.DEFAULT_ASYMMETRY_FACTOR)
    budget = FullSolveBudget(1)
    clear_sky.spectral_irradiance(zenith, 1.0, 300.0, 1013.25, 0.05, *default_type, full_solve_budget=budget)
    assert budget.used == 0
    # A client aerosol inside the precomputed aerosol table does not count either.
    clear_sky.spectral_irradiance(zenith, 1.0, 300.0, 1013.25, 0.05, optics.DEFAULT_AOD_550, 0.9,
                                  *default_type[2:], full_solve_budget=budget)
    assert budget.used == 0
    with pytest.raises(FullSolveLimitExceeded, match="3 records"):
        # Three daytime records with a strongly absorbing aerosol; the night record is free.
        clear_sky.spectral_irradiance(zenith, 1.0, 300.0, 1013.25, 0.05, optics.DEFAULT_AOD_550, 0.9,
                                      0.3, default_type[3], full_solve_budget=budget)
