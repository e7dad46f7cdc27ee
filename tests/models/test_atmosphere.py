"""Layered AFGL 1986 U.S. Standard atmosphere and the pseudo-spherical beam path."""

import numpy as np
import pytest
from pvlib.atmosphere import get_relative_airmass

from uvdose.models import atmosphere


@pytest.fixture(scope="module")
def layers():
    return atmosphere.standard_layers()


def test_committed_profile_matches_joseki():
    # Source: AFGL 1986 U.S. Standard (Anderson et al. 1986) as shipped by joseki.
    joseki = pytest.importorskip("joseki")
    ds = joseki.make("afgl_1986-us_standard")
    profile = atmosphere.standard_profile()
    np.testing.assert_allclose(profile.altitude_km, ds["z"].values, rtol=1e-9)
    np.testing.assert_allclose(profile.pressure_hpa, ds["p"].values / 100.0, rtol=1e-6)
    np.testing.assert_allclose(profile.temperature_k, ds["t"].values, rtol=1e-6)
    np.testing.assert_allclose(profile.air_number_density_cm3, ds["n"].values * 1e-6, rtol=1e-6)
    np.testing.assert_allclose(profile.ozone_number_density_cm3,
                               ds["n"].values * 1e-6 * ds["x_O3"].values, rtol=1e-6)


def test_layers_cover_0_to_100_km_top_down(layers):
    assert layers.count == 27
    assert layers.top_km[0] == 100.0 and layers.bottom_km[-1] == 0.0
    np.testing.assert_array_equal(layers.bottom_km[:-1], layers.top_km[1:])
    assert np.all(layers.thickness_km > 0)
    assert layers.air_column_fraction.sum() == pytest.approx(1.0)
    assert layers.ozone_column_fraction.sum() == pytest.approx(1.0)


def test_standard_ozone_column(layers):
    # Source: ASTM G173-03 states 0.3438 atm-cm (343.8 DU) as the U.S. Standard
    # Atmosphere ozone column it was computed with; the AFGL profile carries the same
    # column within 1 %.
    assert layers.total_ozone_du == pytest.approx(343.8, rel=0.01)


def test_air_column_is_hydrostatic(layers):
    # Hydrostatic column N = p / (m_air g) with p = 1013 hPa (the profile's surface value),
    # m_air = 28.9645 g/mol, g = 9.80665 m s⁻² (textbook constants, CODATA Avogadro).
    expected_cm2 = 101300.0 / (28.9645e-3 / 6.02214076e23 * 9.80665) * 1e-4
    assert layers.total_air_column_cm2 == pytest.approx(expected_cm2, rel=0.01)


def test_ozone_peak_and_temperatures(layers):
    # Common practice, no source: the mid-latitude ozone maximum lies at 20–25 km and the
    # stratospheric layers are cold (~217 K), the surface layer near 288 K.
    peak = np.argmax(layers.ozone_column_fraction / layers.thickness_km)
    assert 18.0 <= layers.mid_km[peak] <= 26.0
    assert layers.ozone_temperature_k[-1] == pytest.approx(285.0, abs=2.0)
    assert layers.ozone_temperature_k[peak] == pytest.approx(217.0, abs=3.0)


def test_ozone_layer_columns_sum_to_the_record_column(layers):
    columns = atmosphere.ozone_layer_columns_du(np.array([220.0, 300.0, 455.0]))
    assert columns.shape == (3, layers.count)
    np.testing.assert_allclose(columns.sum(axis=1), [220.0, 300.0, 455.0])


def test_exponential_layer_fraction(layers):
    share = atmosphere.exponential_layer_fraction(2.0)
    assert share.sum() == pytest.approx(1.0)
    # exp(-z/H): the lowest 1 km holds 1 − e^(−0.5) of the column.
    assert share[-1] == pytest.approx(1.0 - np.exp(-0.5), rel=1e-9)


@pytest.mark.parametrize("zenith_deg", [0.0, 30.0, 48.236, 60.0, 70.0, 80.0])
def test_air_weighted_beam_air_mass_matches_kasten_young(layers, zenith_deg):
    # Source: Kasten & Young (1989) relative optical air mass (pvlib.atmosphere,
    # reference library). Ours has no refraction, so agreement within 0.6 % to 80°.
    ours = (atmosphere.beam_air_mass(np.array([zenith_deg])) * layers.air_column_fraction).sum()
    reference = get_relative_airmass(zenith_deg, model="kastenyoung1989")
    assert ours == pytest.approx(reference, rel=0.006)


def test_beam_air_mass_geometry(layers):
    mass = atmosphere.beam_air_mass(np.array([0.0, 30.0, 90.0]))
    assert mass.shape == (3, layers.count)
    np.testing.assert_allclose(mass[0], 1.0)
    # Thin high layers see nearly the plane-parallel 1/cos at moderate angles.
    assert mass[1, 0] == pytest.approx(1 / np.cos(np.radians(30.0)), rel=0.01)
    # Horizontal ray through the lowest 1 km shell: the air along the chord of length
    # sqrt((R+1)² − R²), density exp(−h/H) at height h(s) = sqrt(R² + s²) − R, over the
    # layer's vertical column; reference: scipy's adaptive quadrature of that integral.
    from scipy.integrate import quad

    radius = atmosphere.EARTH_RADIUS_KM
    scale = layers.air_scale_height_km[-1]
    chord = np.sqrt((radius + 1.0) ** 2 - radius ** 2)
    along, _ = quad(lambda s: np.exp(-(np.hypot(radius, s) - radius) / scale), 0.0, chord,
                    epsabs=0.0, epsrel=1e-12)
    assert mass[2, -1] == pytest.approx(along / (scale * -np.expm1(-1.0 / scale)), rel=1e-6)
    assert np.all(np.isfinite(mass))
    # Slant paths grow with the zenith angle in every layer.
    assert np.all(np.diff(mass, axis=0) > 0)


def test_pressure_scale():
    np.testing.assert_allclose(atmosphere.pressure_scale([1013.25, 506.625]), [1.0, 0.5])
