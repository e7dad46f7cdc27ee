"""Glazing and film transmittance: facts of the trade checked on a realistic spectrum.

Spectrum: ASTM G173-03 global tilt (AM1.5, 37° tilt), as shipped by pvlib, taken at
1 nm from 280 to 400 nm. Erythemal weighting: CIE S 007/E-1998 (ISO 17166:1999)
analytic action spectrum, written out here so the test does not depend on the code
it checks.
"""
import numpy as np
import pytest
from pvlib.spectrum import get_reference_spectra

from uvdose.models.filters import FILTERS, catalogue, resolve_transmittance, transmittance_from_curve

WAVELENGTH_NM = np.arange(280.0, 401.0)


@pytest.fixture(scope="module")
def g173_global():
    spectra = get_reference_spectra(standard="ASTM G173-03")
    return np.interp(WAVELENGTH_NM, spectra.index.to_numpy(), spectra["global"].to_numpy())


def _cie_erythema(wl):
    # CIE S 007/E-1998: 1 below 298 nm, 10^(0.094(298−λ)) to 328 nm, 10^(0.015(140−λ)) above.
    return np.where(wl <= 298, 1.0,
                    np.where(wl <= 328, 10 ** (0.094 * (298 - wl)), 10 ** (0.015 * (140 - wl))))


def _transmitted_fraction(spectrum, weights, name):
    t = FILTERS[name].transmittance(WAVELENGTH_NM)
    return np.sum(spectrum * weights * t) / np.sum(spectrum * weights)


def test_laminated_windscreen_blocks_erythemal_uv(g173_global):
    # Common practice, no source: a PVB laminated windscreen blocks ≥ 98 % of erythemal UV.
    assert _transmitted_fraction(g173_global, _cie_erythema(WAVELENGTH_NM),
                                 "laminated_windscreen") <= 0.02


def test_clear_side_glass_blocks_uvb_passes_uva(g173_global):
    # Common practice, no source: clear side glass blocks > 90 % of UVB, passes > 50 % of UVA.
    uvb = (WAVELENGTH_NM < 315).astype(float)
    uva = (WAVELENGTH_NM >= 315).astype(float)
    assert _transmitted_fraction(g173_global, uvb, "clear_side_glass") < 0.10
    assert _transmitted_fraction(g173_global, uva, "clear_side_glass") > 0.50


def test_glazing_ordering_on_erythemal_uv(g173_global):
    # Common practice: open > polyethylene > clear glass > tinted glass > windscreen.
    ery = _cie_erythema(WAVELENGTH_NM)
    order = ["open_window", "polyethylene_film", "clear_side_glass", "tinted_side_glass",
             "laminated_windscreen"]
    values = [_transmitted_fraction(g173_global, ery, n) for n in order]
    assert values == sorted(values, reverse=True)
    assert values[0] == pytest.approx(1.0)


def test_uv_blocking_film_blocks_uva_below_380nm(g173_global):
    # Common practice: a UV-blocking film passes < 2 % of UV between 315 and 380 nm.
    band = ((WAVELENGTH_NM >= 315) & (WAVELENGTH_NM < 380)).astype(float)
    assert _transmitted_fraction(g173_global, band, "uv_blocking_film") < 0.02


def test_every_filter_is_a_fraction_and_documented():
    for f in FILTERS.values():
        t = f.transmittance(WAVELENGTH_NM)
        assert t.shape == WAVELENGTH_NM.shape
        assert np.all((t >= 0) & (t <= 1))
        assert f.source
    assert {c["name"] for c in catalogue()} == set(FILTERS)


def test_client_curve_interpolates_linearly():
    t = transmittance_from_curve([280, 340, 400], [0.0, 0.6, 0.9], [280, 310, 370, 400])
    np.testing.assert_allclose(t, [0.0, 0.3, 0.75, 0.9])


@pytest.mark.parametrize("wl,tr,message", [
    ([280, 300, 300, 400], [0, 0.1, 0.2, 0.3], r"wavelength_nm\[2\] = 300 follows 300"),
    ([280, 400], [0.0, 1.2], r"transmittance\[1\] = 1.2 is outside \[0, 1\]"),
    ([290, 400], [0.0, 0.9], r"must cover 280–400 nm, given 290–400 nm"),
    ([280, 400], [0.0, float("nan")], r"transmittance\[1\] is not a finite number"),
    ([280], [0.5], r"at least two points"),
    ([280, 300, 400], [0.1, 0.2], r"same length"),
])
def test_client_curve_errors_are_clear(wl, tr, message):
    with pytest.raises(ValueError, match=message):
        transmittance_from_curve(wl, tr, WAVELENGTH_NM)


def test_resolve_rejects_unknown_and_ambiguous():
    with pytest.raises(ValueError, match="unknown filter 'sunroof'"):
        resolve_transmittance("sunroof", None, WAVELENGTH_NM)
    with pytest.raises(ValueError, match="not both"):
        resolve_transmittance("open_window", {"wavelength_nm": [280, 400],
                                              "transmittance": [1, 1]}, WAVELENGTH_NM)
    assert resolve_transmittance(None, None, WAVELENGTH_NM) is None
