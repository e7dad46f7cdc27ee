"""Action spectra against their published definitions and check values."""

import json

import numpy as np
import pytest

from uvdose.models import action_spectra
from uvdose.models.action_spectra import ACTION_SPECTRA, catalogue, weight_matrix
from uvdose.models.spectral_grid import WAVELENGTH_NM

EXPECTED_NAMES = {"erythema", "actinic_icnirp", "plant_damage", "plant_growth",
                  "dna_damage", "previtamin_d3", "uvb", "uva"}


def test_registry_holds_the_agreed_names_with_sources():
    assert set(ACTION_SPECTRA) == EXPECTED_NAMES
    for name, spectrum in ACTION_SPECTRA.items():
        assert spectrum.name == name
        assert spectrum.kind in {"analytic", "tabulated", "band"}
        assert len(spectrum.source) > 20, name


@pytest.mark.parametrize("name", sorted(EXPECTED_NAMES))
def test_each_spectrum_is_one_at_its_normalisation_wavelength(name):
    spectrum = ACTION_SPECTRA[name]
    assert spectrum.weights(np.array([spectrum.normalisation_nm]))[0] == pytest.approx(1.0, rel=1e-12)


# CIE S 007/E-1998 (= ISO 17166:1999) erythema spectrum. The values below are those of the
# standard's piecewise formula, which the standard's own table reproduces to 3-4 digits
# (table values quoted from memory).
@pytest.mark.parametrize("wavelength_nm, expected", [
    (280.0, 1.0), (298.0, 1.0), (300.0, 0.6486), (305.0, 0.2198), (310.0, 0.07447),
    (320.0, 0.008551), (328.0, 0.001514), (330.0, 0.001413), (340.0, 0.001000),
    (360.0, 0.0005012), (400.0, 0.0001259),
])
def test_cie_erythema_check_values(wavelength_nm, expected):
    value = ACTION_SPECTRA["erythema"].weights(np.array([wavelength_nm]))[0]
    assert value == pytest.approx(expected, rel=1e-3)


def test_cie_erythema_is_continuous_at_328_nm_and_decreasing_above_298():
    lam = np.array([327.999999, 328.0, 328.000001])
    values = ACTION_SPECTRA["erythema"].weights(lam)
    assert values.max() / values.min() - 1.0 < 1e-6
    grid = np.arange(298.0, 400.01, 0.5)
    assert np.all(np.diff(ACTION_SPECTRA["erythema"].weights(grid)) < 0)


# ICNIRP (2004) S(λ) table, normalised at 270 nm (values as quoted in the team science
# notes; from memory, not from a copy of the guideline).
@pytest.mark.parametrize("wavelength_nm, expected", [
    (270.0, 1.0), (280.0, 0.88), (300.0, 0.30), (310.0, 0.015), (320.0, 0.001),
    (340.0, 0.00028), (400.0, 0.000030),
])
def test_icnirp_table_values(wavelength_nm, expected):
    value = ACTION_SPECTRA["actinic_icnirp"].weights(np.array([wavelength_nm]))[0]
    assert value == pytest.approx(expected, rel=1e-9)


def test_icnirp_table_agrees_with_its_analytic_approximation():
    # Analytic approximation of S(λ) attributed to ICNIRP (2004), eqs. 2a-2c, by the
    # photobiologyWavebands R package documentation (Aphalo): a loose, independent check
    # that catches transcription slips (a wrong decade, swapped rows). 35 % covers the
    # approximation's own misfit, largest at 315 and 322-323 nm (measured: 33 % at 323 nm).
    lam = WAVELENGTH_NM
    approx = np.where(lam <= 300.0,
                      1.0 - 0.36 * ((lam - 270.0) / 20.0) ** 1.64,
                      0.3 * 0.736 ** (lam - 300.0) + 10.0 ** (2.0 - 0.0163 * lam))
    table = ACTION_SPECTRA["actinic_icnirp"].weights(lam)
    np.testing.assert_allclose(table, approx, rtol=0.35)
    assert np.all(np.diff(table) < 0)  # S(λ) falls monotonically from 270 nm


def test_icnirp_interpolation_is_log_linear_between_table_rows():
    # Between 340 (0.00028) and 345 nm (0.00024): geometric interpolation.
    value = ACTION_SPECTRA["actinic_icnirp"].weights(np.array([342.0]))[0]
    assert value == pytest.approx(0.00028 * (0.00024 / 0.00028) ** 0.4, rel=1e-9)


def test_plant_damage_green_form():
    spectrum = ACTION_SPECTRA["plant_damage"]
    # Green, Sawada & Shettle (1974): zero at and above 313.3 nm; in its published
    # normalisation the form is ≈1 at 280 nm (photobiologyWavebands uses 280 nm as the
    # native normalisation wavelength of this form).
    assert np.all(spectrum.weights(np.array([313.3, 313.5, 320.0, 400.0])) == 0.0)
    raw_280 = action_spectra._green_plant_damage_raw(np.array(280.0))
    assert raw_280 == pytest.approx(1.0, abs=0.005)
    values = spectrum.weights(np.arange(280.0, 313.3, 0.5))
    assert np.all(values > 0.0) and np.all(np.diff(values) < 0)
    # Renormalised to 300 nm: the 280 nm value is 1 / 0.2176.
    assert spectrum.weights(np.array([280.0]))[0] == pytest.approx(1.0025 / 0.21758, rel=1e-3)


def test_plant_growth_flint_caldwell_form():
    # The published fit equals 1 at 299.925658 nm (the normalisation wavelength the
    # photobiologyWavebands package documents for it): checks the transcribed coefficients.
    raw = action_spectra._flint_caldwell_raw(np.array(299.925658))
    assert raw == pytest.approx(1.0, abs=2e-4)
    spectrum = ACTION_SPECTRA["plant_growth"]
    values = spectrum.weights(np.arange(285.0, 390.5, 1.0))
    assert np.all(np.diff(values) < 0)
    # Applied to 390 nm, zero beyond (the limit examined by Micheletti, Piacentini & Madronich 2003).
    assert values[-1] > 0.0
    assert spectrum.weights(np.array([391.0, 400.0])).tolist() == [0.0, 0.0]


def test_dna_damage_green_miller_form():
    # Green & Miller (1975) form: 0.0326 at 300 nm before normalisation (the constant
    # 1/30.675 used by photobiologyWavebands; TUV normalises by 1/0.0326, from memory).
    raw = action_spectra._setlow_green_miller_raw(np.array(300.0))
    assert raw == pytest.approx(1.0 / 30.675, rel=1e-3)
    spectrum = ACTION_SPECTRA["dna_damage"]
    values = spectrum.weights(np.arange(280.0, 340.5, 1.0))
    assert np.all(np.diff(values) < 0)
    # Setlow (1974): DNA effectiveness falls by about three decades from 300 to 320 nm
    # (from memory); the fit gives 9.3e-4.
    assert 3e-4 < spectrum.weights(np.array([320.0]))[0] < 3e-3
    assert spectrum.weights(np.array([341.0]))[0] == 0.0


def test_previtamin_d3_shape():
    # Norval, Björn & de Gruijl (2010), Photochem. Photobiol. Sci. 9:11: the 1982
    # action spectrum (the basis of CIE 174:2006) has its maximum at about 297 nm and
    # "essentially no production above 315 nm"; CIE 174 extends it to 330 nm, zero above.
    # The tabulated values themselves are from memory (see the table header).
    spectrum = ACTION_SPECTRA["previtamin_d3"]
    fine = np.arange(280.0, 331.0, 0.5)
    values = spectrum.weights(fine)
    assert 296.0 <= fine[np.argmax(values)] <= 299.0
    assert np.all(np.diff(values[fine >= 298.0]) < 0)
    assert np.all(values[fine > 315.0] < 0.03)
    assert np.all(spectrum.weights(np.array([330.5, 350.0, 400.0])) == 0.0)


def test_flat_spectrum_band_integrals_are_the_band_widths():
    matrix = weight_matrix(["uvb", "uva"], WAVELENGTH_NM)
    flat = np.ones((3, WAVELENGTH_NM.size))
    integrals = flat @ matrix
    np.testing.assert_allclose(integrals, [[35.0, 85.0]] * 3, rtol=0, atol=1e-12)
    # UVB + UVA is the trapezoidal 280–400 nm integral for any spectrum.
    rng = np.random.default_rng(4)
    spectrum = rng.uniform(0.0, 1.0, WAVELENGTH_NM.size)
    total = np.trapezoid(spectrum, WAVELENGTH_NM)
    assert (spectrum @ matrix).sum() == pytest.approx(total, rel=1e-12)


def test_weight_matrix_integrates_the_erythema_spectrum_like_a_fine_quadrature():
    # ∫ A_ery(λ) dλ over 280–400 nm on a 0.01 nm grid vs the 1 nm matrix: within 1 %.
    fine = np.arange(280.0, 400.0 + 1e-9, 0.01)
    reference = np.trapezoid(ACTION_SPECTRA["erythema"].weights(fine), fine)
    matrix = weight_matrix(["erythema"], WAVELENGTH_NM)
    assert np.ones(WAVELENGTH_NM.size) @ matrix[:, 0] == pytest.approx(reference, rel=0.01)


def test_weight_matrix_columns_follow_the_requested_order():
    matrix = weight_matrix(["uva", "erythema"], WAVELENGTH_NM)
    assert matrix.shape == (WAVELENGTH_NM.size, 2)
    assert matrix[0, 0] == 0.0 and matrix[0, 1] == pytest.approx(0.5)  # 280 nm: half weight


def test_unknown_spectrum_names_are_listed():
    with pytest.raises(KeyError, match="sunburn_x"):
        weight_matrix(["erythema", "sunburn_x"], WAVELENGTH_NM)


def test_catalogue_is_plain_json():
    entries = catalogue()
    assert [entry["name"] for entry in entries] == list(ACTION_SPECTRA)
    text = json.dumps(entries)
    icnirp = next(entry for entry in entries if entry["name"] == "actinic_icnirp")
    limit = icnirp["reference_levels"][0]
    assert limit["value"] == 30.0 and "8 h" in limit["note"]  # ICNIRP 2004: 30 J m-2 per 8 h
    erythema = next(entry for entry in entries if entry["name"] == "erythema")
    assert erythema["reference_levels"][0]["value"] == 100.0  # CIE: 1 SED = 100 J m-2
    assert "ICNIRP" in text
