"""Clear-sky spectral UV against published spectra, closed forms and facts of the trade.

Erythemal weights come from ``models.action_spectra`` (CIE S 007/E-1998 = ISO 17166);
UV Index = 40 m² W⁻¹ × erythemal irradiance (WMO/WHO, Global Solar UV Index, 2002).
"""

import numpy as np
import pytest
from pvlib.irradiance import get_total_irradiance
from pvlib.spectrum import get_reference_spectra

from uvdose.models import clear_sky
from uvdose.models.action_spectra import weight_matrix
from uvdose.models.solar_geometry import pressure_from_elevation_hpa
from uvdose.models.spectral_grid import (UVA_WEIGHTS_NM, UVB_WEIGHTS_NM, WAVELENGTH_NM,
                                  band_quadrature_weights, extraterrestrial_spectrum_w_m2_nm)

ERYTHEMA_WEIGHTS = weight_matrix(["erythema"], WAVELENGTH_NM)[:, 0]

# ASTM G173-03 conditions: air mass 1.5 (zenith 48.236°), U.S. Standard Atmosphere,
# 0.3438 atm-cm ozone, Shettle & Fenn rural aerosol with AOD(500 nm) 0.084, sea level,
# receiver tilted 37° towards the sun. The Ångström exponent 1.4 is our reading of the
# rural aerosol used by SMARTS2 for the standard (from memory); SSA 0.93 and g 0.70 are
# our clean-continental defaults; ground UV albedo 0.15 stands for its light soil
# (from memory).
G173_ZENITH_DEG = 48.236
G173_OZONE_DU = 343.8
G173_ANGSTROM = 1.4
G173_AOD_550 = 0.084 * (550.0 / 500.0) ** -G173_ANGSTROM
G173_TILT_DEG = 37.0
G173_GROUND_ALBEDO = 0.15
FIVE_NM_BANDS = [(lower, lower + 5.0) for lower in np.arange(300.0, 400.0, 5.0)]


def uv_index(zenith_deg, ozone_du=300.0, pressure_hpa=1013.25, albedo=0.05, aod_550=0.02):
    """Clear-sky UV Index on a horizontal surface at 1 AU."""
    zenith = np.atleast_1d(np.asarray(zenith_deg, dtype=float))
    sky = clear_sky.spectral_irradiance(zenith, 1.0, ozone_du, pressure_hpa, albedo,
                                        aod_550, 1.3, 0.93, 0.7, method="direct")
    return 40.0 * sky.global_horizontal_w_m2_nm @ ERYTHEMA_WEIGHTS


@pytest.fixture(scope="module")
def g173():
    return get_reference_spectra(standard="ASTM G173-03")


@pytest.fixture(scope="module")
def g173_run():
    sky = clear_sky.spectral_irradiance(np.array([G173_ZENITH_DEG]), 1.0, G173_OZONE_DU,
                                        1013.25, G173_GROUND_ALBEDO, G173_AOD_550,
                                        G173_ANGSTROM, 0.93, 0.70, method="direct")
    mu0 = np.cos(np.radians(G173_ZENITH_DEG))
    direct_normal = sky.direct_horizontal_w_m2_nm[0] / mu0
    diffuse = sky.diffuse_horizontal_w_m2_nm[0]
    # Isotropic-sky projection onto the 37° receiver facing the sun, by pvlib
    # (Liu & Jordan; reference library).
    tilted = get_total_irradiance(G173_TILT_DEG, 180.0, G173_ZENITH_DEG, 180.0,
                                  direct_normal, direct_normal * mu0 + diffuse, diffuse,
                                  albedo=G173_GROUND_ALBEDO, model="isotropic")["poa_global"]
    return {"direct": direct_normal, "global": np.asarray(tilted, dtype=float)}


def band_ratio(g173, ours, column, lower_nm, upper_nm):
    table = g173[column].loc[lower_nm:upper_nm]
    reference = np.trapezoid(table.to_numpy(), table.index.to_numpy())
    return ours @ band_quadrature_weights(lower_nm, upper_nm) / reference


def test_g173_direct_normal_band_integrals(g173, g173_run):
    # Source: ASTM G173-03 direct + circumsolar spectrum (pvlib). Measured: UVB 0.992,
    # UVA 1.020.
    assert band_ratio(g173, g173_run["direct"], "direct", 295.0, 315.0) == pytest.approx(1.0, abs=0.05)
    assert band_ratio(g173, g173_run["direct"], "direct", 315.0, 400.0) == pytest.approx(1.0, abs=0.05)


@pytest.mark.parametrize("band", FIVE_NM_BANDS, ids=lambda b: f"{b[0]:.0f}nm")
def test_g173_direct_normal_shape(g173, g173_run, band):
    # Source: ASTM G173-03 direct + circumsolar spectrum; 10 % per 5 nm band.
    assert band_ratio(g173, g173_run["direct"], "direct", *band) == pytest.approx(1.0, abs=0.10)


def test_g173_global_tilt_uva(g173, g173_run):
    # Source: ASTM G173-03 global tilt spectrum (pvlib). Measured: 1.042.
    assert band_ratio(g173, g173_run["global"], "global", 315.0, 400.0) == pytest.approx(1.0, abs=0.05)


@pytest.mark.parametrize("band", [b for b in FIVE_NM_BANDS if b[0] >= 325.0],
                         ids=lambda b: f"{b[0]:.0f}nm")
def test_g173_global_tilt_shape_uva(g173, g173_run, band):
    # Source: ASTM G173-03 global tilt spectrum; 10 % per 5 nm band.
    assert band_ratio(g173, g173_run["global"], "global", *band) == pytest.approx(1.0, abs=0.10)


# Known gap: in the UVB our global tilt exceeds G173 by ~20 % (bands 300–320 nm by
# 11–24 %), while the direct beam agrees within 4 %. The excess is diffuse light: 16-stream
# DISORT (nanodisort) on our own layer optics gives the same diffuse flux within 2.5 % at
# 300–320 nm (diffuse fraction ~0.70 at 305 nm), so the two-stream solver is not the
# cause; the G173 diffuse UVB is lower than a full multiple-scattering solution of this
# atmosphere. Held to the target as strict xfails, so a fix shows up, and bounded below.
@pytest.mark.xfail(strict=True, reason="G173 global-tilt UVB lower than our diffuse UVB")
def test_g173_global_tilt_uvb_target(g173, g173_run):
    assert band_ratio(g173, g173_run["global"], "global", 295.0, 315.0) == pytest.approx(1.0, abs=0.05)


def test_g173_global_tilt_uvb_bounded(g173, g173_run):
    # Source: ASTM G173-03 global tilt; measured 1.185, bounded at +25 % / −5 %.
    assert 0.95 < band_ratio(g173, g173_run["global"], "global", 295.0, 315.0) < 1.25
    for band in FIVE_NM_BANDS:
        if band[0] < 325.0:
            assert 0.90 < band_ratio(g173, g173_run["global"], "global", *band) < 1.30, band


def test_g173_diffuse_uvb_agrees_with_disort_on_our_optics():
    # Reference: DISORT (Stamnes et al. 1988) via nanodisort, 16 streams, on the same
    # layer optics at the G173 conditions (plane-parallel beam in both), Rayleigh phase
    # moment 0.1 and Henyey–Greenstein aerosol moments. Backs the known gap above: the
    # diffuse UVB is what the physics of this atmosphere gives. Measured: global within 0.4 %.
    pytest.importorskip("nanodisort")
    from uvdose.models import atmosphere, optics
    from uvdose.models.four_stream import surface_irradiance
    from tests.models.test_two_stream import disort_fluxes

    band = (WAVELENGTH_NM >= 300.0) & (WAVELENGTH_NM <= 320.0)
    wavelength = WAVELENGTH_NM[band]
    layer = optics.layer_optics(G173_OZONE_DU, 1013.25, G173_AOD_550, G173_ANGSTROM, 0.93, 0.70,
                                wavelength_nm=wavelength)
    tau, ssa = layer.tau[0], layer.ssa[0]
    rayleigh = (atmosphere.standard_layers().air_column_fraction[:, None]
                * optics.rayleigh_optical_depth(wavelength)[None, :])
    rayleigh_share = rayleigh / (tau * ssa)
    orders = np.arange(17)
    moments = (1.0 - rayleigh_share)[..., None] * 0.70 ** orders
    moments[..., 0] = 1.0
    moments[..., 2] += 0.1 * rayleigh_share
    mu0 = np.cos(np.radians(G173_ZENITH_DEG))
    reference_direct, reference_diffuse = disort_fluxes(tau, ssa, moments, mu0, G173_GROUND_ALBEDO)
    direct, diffuse = surface_irradiance(layer.tau, layer.ssa, layer.g, np.array([mu0]),
                                         G173_GROUND_ALBEDO,
                                         rayleigh_scattering_fraction=rayleigh_share[None])
    # Global: the split into direct and diffuse depends on the delta-M truncation (four
    # streams count more of the aerosol forward peak as direct than 16 do: diffuse -3.1 %).
    np.testing.assert_allclose((direct + diffuse)[0], reference_direct + reference_diffuse,
                               rtol=0.03)


def test_madronich_closed_form():
    # Source: Madronich (2007), Photochem. Photobiol. 83:1537: clear-sky
    # UVI ≈ 12.5 μ0^2.42 (Ω / 300 DU)^−1.23 at sea level for "cloud-free, unpolluted,
    # low surface albedo conditions", its coefficients tuned to the TUV radiative
    # transfer model. We run it at AOD(550) 0.02 and surface albedo 0.10, TUV's default
    # surface albedo (from memory). Measured with the four-stream solver: −9.6 % to +1.8 %;
    # the largest gap is at 60° and 200 DU, where the formula's fixed ozone exponent
    # (1.23) exceeds the model's radiation amplification factor at that zenith (1.10,
    # test below). With albedo 0.05: −11.4 % there.
    zenith = np.repeat([0.0, 15.0, 30.0, 45.0, 60.0], 6)
    ozone = np.tile([200.0, 250.0, 300.0, 350.0, 400.0, 450.0], 5)
    expected = 12.5 * np.cos(np.radians(zenith)) ** 2.42 * (ozone / 300.0) ** -1.23
    np.testing.assert_allclose(uv_index(zenith, ozone, albedo=0.10), expected, rtol=0.10)


def test_radiation_amplification_factor_for_erythema():
    # Source: WMO ozone assessments, RAF for erythema ≈ 1.1–1.3 *(from memory)*;
    # RAF = ln(UVI₂ / UVI₁) / ln(Ω₁ / Ω₂), 300 → 297 DU. Measured: 1.21, 1.20, 1.10.
    zenith = np.array([0.0, 30.0, 60.0])
    raf = (np.log(uv_index(zenith, 297.0) / uv_index(zenith, 300.0)) / np.log(300.0 / 297.0))
    assert np.all((raf > 1.0) & (raf < 1.4)), raf


def test_uv_index_rises_with_altitude():
    # Source: WHO/WMO Global Solar UV Index guide (2002): ~10 % per 1000 m; clear-sky
    # models ~5–8 %/km *(from memory)*. Pressure from the standard-atmosphere barometric
    # formula, ozone and aerosol unchanged. Accept 4–12 %/km. Measured: 5.4–5.5 %/km.
    elevation_m = np.array([0.0, 1000.0, 3000.0])
    uvi = uv_index(np.full(3, 30.0), pressure_hpa=pressure_from_elevation_hpa(elevation_m))
    per_km = (uvi[1:] / uvi[0] - 1.0) / (elevation_m[1:] / 1000.0) * 100.0
    assert np.all((per_km > 4.0) & (per_km < 12.0)), per_km


def test_fresh_snow_raises_uv_index():
    # Source: WHO/WMO guide (2002): fresh snow reflects up to 80 % of UV, raising the
    # exposure; a rise of at least 25 % over grass is common practice, no source.
    # Measured (model 0.5.0): +41 % (albedo 0.8), +49 % (0.9).
    uvi = uv_index(np.full(3, 30.0), albedo=np.array([0.05, 0.8, 0.9]))
    assert uvi[1] >= 1.25 * uvi[0]
    assert uvi[2] > uvi[1]


def test_no_uvc_at_the_ground():
    # Common practice, no source: below 285 nm the ground sees < 1e-6 of the
    # extraterrestrial irradiance. Measured: < 2e-10.
    sky = clear_sky.spectral_irradiance(np.array([0.0, 40.0]), 1.0, np.array([200.0, 300.0]),
                                        1013.25, 0.9, 0.0, 1.3, 0.93, 0.7, method="direct")
    ratio = sky.global_horizontal_w_m2_nm[:, :5] / extraterrestrial_spectrum_w_m2_nm()[:5]
    assert np.all(ratio < 1e-6)


def test_most_uvb_absorbed_most_uva_transmitted():
    # Common practice, no source: most UVB is absorbed (mostly by ozone), most UVA
    # passes. Sun overhead, 300 DU: measured UVB 12 %, UVA 75 % of the extraterrestrial.
    sky = clear_sky.spectral_irradiance(np.array([0.0]), 1.0, 300.0, 1013.25, 0.05, 0.1, 1.3,
                                        0.93, 0.7, method="direct")
    etr = extraterrestrial_spectrum_w_m2_nm()
    surface = sky.global_horizontal_w_m2_nm[0]
    assert surface @ UVB_WEIGHTS_NM < 0.3 * (etr @ UVB_WEIGHTS_NM)
    assert surface @ UVA_WEIGHTS_NM > 0.6 * (etr @ UVA_WEIGHTS_NM)
