"""Wavelength grid, ASTM G173-03 extraterrestrial spectrum on it, band quadrature."""

import numpy as np
import pytest
from pvlib.spectrum import get_reference_spectra

from uvdose.models import spectral_grid as grid


@pytest.fixture(scope="module")
def g173():
    # ASTM G173-03 reference spectra as shipped by pvlib (reference library).
    return get_reference_spectra(standard="ASTM G173-03")


def test_grid_is_280_to_400_nm_at_1_nm():
    assert grid.WAVELENGTH_NM.shape == (121,)
    assert grid.WAVELENGTH_NM[0] == 280.0 and grid.WAVELENGTH_NM[-1] == 400.0
    assert np.all(np.diff(grid.WAVELENGTH_NM) == 1.0)


def test_bin_averages_conserve_the_g173_integral(g173):
    # Source: ASTM G173-03 extraterrestrial column. The bins centred on 281..399 nm tile
    # 280.5–399.5 nm, so their sum × 1 nm must equal the table's own trapezoidal integral.
    etr = grid.extraterrestrial_spectrum_w_m2_nm()
    table = g173["extraterrestrial"]
    fine = table.loc[280.5:399.5]
    expected = np.trapezoid(fine.to_numpy(), fine.index.to_numpy())
    assert etr[1:-1].sum() == pytest.approx(expected, rel=1e-9)


def test_bin_averages_track_the_tabulated_points(g173):
    # Source: ASTM G173-03; a 1 nm average of a 0.5 nm table stays within the
    # neighbouring points.
    etr = grid.extraterrestrial_spectrum_w_m2_nm()
    table = g173["extraterrestrial"]
    for index, wl in enumerate(grid.WAVELENGTH_NM[1:-1], start=1):
        neighbours = table.loc[wl - 0.5:wl + 0.5].to_numpy()
        assert neighbours.min() <= etr[index] <= neighbours.max()
    assert etr[20] == pytest.approx(table.loc[300.0], rel=0.15)


def test_first_bin_is_cut_at_the_table_start(g173):
    table = g173["extraterrestrial"]
    expected = 0.5 * (table.loc[280.0] + table.loc[280.5])  # mean of the linear piece
    assert grid.extraterrestrial_spectrum_w_m2_nm()[0] == pytest.approx(expected, rel=1e-12)


def test_uv_band_integrals_of_the_g173_etr(g173):
    # Source: ASTM G173-03 extraterrestrial table integrated directly (trapezoid, 0.5 nm).
    etr = grid.extraterrestrial_spectrum_w_m2_nm()
    table = g173["extraterrestrial"]
    for (lower, upper), weights in ((grid.UVB_BAND_NM, grid.UVB_WEIGHTS_NM),
                                    (grid.UVA_BAND_NM, grid.UVA_WEIGHTS_NM)):
        part = table.loc[lower:upper]
        direct = np.trapezoid(part.to_numpy(), part.index.to_numpy())
        assert etr @ weights == pytest.approx(direct, rel=0.01)


def test_band_weights_partition_the_grid():
    full = grid.band_quadrature_weights(280.0, 400.0)
    np.testing.assert_allclose(grid.UVB_WEIGHTS_NM + grid.UVA_WEIGHTS_NM, full)
    assert grid.UVB_WEIGHTS_NM.sum() == pytest.approx(35.0)
    assert grid.UVA_WEIGHTS_NM.sum() == pytest.approx(85.0)
    # A constant spectrum of 1 W m⁻² nm⁻¹ integrates to the band width.
    assert grid.band_integral_w_m2(np.ones((3, 121)), 295.0, 315.0) == pytest.approx([20.0] * 3)


def test_band_limits_off_the_grid_are_refused():
    with pytest.raises(ValueError, match="on the grid"):
        grid.band_quadrature_weights(280.5, 315.0)


def test_tables_are_read_only():
    with pytest.raises(ValueError):
        grid.extraterrestrial_spectrum_w_m2_nm()[0] = 0.0
