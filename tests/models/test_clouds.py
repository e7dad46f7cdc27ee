"""Cloud modification factors against published relations and reference libraries."""
import numpy as np
import pytest
from pvlib import atmosphere, clearsky

from uvdose.models import clouds
from uvdose.models.record_errors import RecordErrors


def test_kasten_czeplak_overcast_and_clear():
    # Kasten & Czeplak (1980), Solar Energy 24:177: G/G_clear = 1 − 0.75 (N/8)^3.4
    # (from memory): 0 oktas → 1, 8 oktas → 0.25, 4 oktas → 1 − 0.75·0.5^3.4 = 0.929.
    cmf = clouds.cmf_from_cloud_fraction(clouds.cloud_fraction_from_oktas([0, 4, 8]))
    np.testing.assert_allclose(cmf, [1.0, 0.9290, 0.25], atol=5e-4)


def test_cover_relation_agrees_with_epa_sky_category_factors():
    # US EPA, "Calculating the UV Index" (SunWise), cloud transmission by sky category:
    # scattered (cover 0.2–0.7) 0.89, broken (0.7–0.9) 0.73, overcast (>0.9) 0.31.
    # A different, cruder source; agreement within 0.1 at mid-category cover.
    cmf = clouds.cmf_from_cloud_fraction([0.45, 0.8, 1.0])
    np.testing.assert_allclose(cmf, [0.89, 0.73, 0.31], atol=0.1)


def test_cubic_coefficient_lies_in_thiel_range():
    # Thiel et al. (1997), Photochem. Photobiol. 65:969: the overcast attenuation
    # coefficient ranges from 0.4 (high cloud) to about 1.0 (cumulonimbus).
    assert 0.4 <= 1.0 - clouds.cmf_from_cloud_fraction([1.0])[0] <= 1.0


def test_clear_sky_ghi_agrees_with_ineichen():
    # Reference library: pvlib's Ineichen–Perez clear sky (Linke turbidity 3, sea level);
    # the two clear-sky models differ by their aerosol assumptions, so 10 %.
    zenith = np.array([20.0, 40.0, 60.0])
    airmass = atmosphere.get_absolute_airmass(atmosphere.get_relative_airmass(zenith))
    ref = clearsky.ineichen(zenith, airmass, 3.0)["ghi"]
    np.testing.assert_allclose(clouds.clear_sky_global_horizontal_w_m2(zenith), ref, rtol=0.10)


def test_clear_sky_ghi_follows_the_earth_sun_distance():
    # Perihelion 0.98329 AU and aphelion 1.01671 AU (the orbit's eccentricity 0.0167,
    # Astronomical Almanac, from memory): the clear sky is 6.9 % higher in early January.
    zenith = np.array([30.0, 60.0])
    ratio = (clouds.clear_sky_global_horizontal_w_m2(zenith, earth_sun_distance_au=0.98329)
             / clouds.clear_sky_global_horizontal_w_m2(zenith, earth_sun_distance_au=1.01671))
    np.testing.assert_allclose(ratio, (1.01671 / 0.98329) ** 2, rtol=1e-9)


def test_measured_ghi_is_read_against_the_day_s_clear_sky():
    # The same clear-sky reading at the same solar zenith is a CMF of 1 in January and in
    # July: the seasonal 6.9 % of the distance is not taken for cloud.
    from uvdose.models.solar_geometry import solar_position
    times = np.array([np.datetime64("2026-01-03T12:00"), np.datetime64("2026-07-04T12:00")])
    unix = (times - np.datetime64("1970-01-01T00:00")) / np.timedelta64(1, "s")
    lat, lon = np.array([-30.0, 30.0]), np.array([0.0, 0.0])
    sun = solar_position(unix, lat, lon, np.zeros(2), np.full(2, 1013.25))
    clear = clouds.clear_sky_global_horizontal_w_m2(sun.zenith_deg, 1013.25,
                                                    earth_sun_distance_au=sun.earth_sun_distance_au)
    cmf = clouds.cmf_from_measured_global_irradiance(clear, unix, lat, lon, np.zeros(2), np.full(2, 1013.25))
    np.testing.assert_allclose(cmf, [1.0, 1.0], rtol=1e-9)
    assert clear[0] / clear[1] > 1.05


def test_cmf_from_global_irradiance():
    zenith = np.array([30.0, 30.0, 30.0, 88.0, 30.0])
    clear = clouds.clear_sky_global_horizontal_w_m2(zenith)
    measured = clear * np.array([1.0, 0.5, 1.2, 1.0, np.nan])
    cmf = clouds.cmf_from_global_irradiance(measured, zenith)
    np.testing.assert_allclose(cmf[:3], [1.0, 0.5, 1.2])
    assert np.isnan(cmf[3]) and np.isnan(cmf[4])
    np.testing.assert_allclose(
        clouds.cmf_from_global_irradiance(measured[:2], zenith[:2], exponent=0.5),
        [1.0, np.sqrt(0.5)])


@pytest.mark.parametrize("call,index,field,message", [
    (lambda: clouds.cmf_from_value([1.0, 1.6]), 1, "cloud_modification_factor", r"record 1: cloud_modification_factor=1.6"),
    (lambda: clouds.cmf_from_value([-0.1]), 0, "cloud_modification_factor", r"record 0: cloud_modification_factor"),
    (lambda: clouds.cloud_fraction_from_oktas([3, 9]), 1, "cloud_cover_oktas", r"record 1: cloud_cover_oktas=9"),
    (lambda: clouds.cloud_fraction_from_oktas([2.5]), 0, "cloud_cover_oktas", r"record 0: cloud_cover_oktas"),
    (lambda: clouds.cmf_from_cloud_fraction([1.2]), 0, "cloud_cover_fraction", r"record 0: cloud_cover_fraction"),
    (lambda: clouds.cmf_from_global_irradiance([-5.0], [30.0]), 0, "measured_ghi_w_m2", r"record 0: measured_ghi"),
    (lambda: clouds.cmf_from_global_irradiance([3000.0], [30.0]), 0, "measured_ghi_w_m2", r"more than 1.5 times"),
    (lambda: clouds.resolve_cmf([0.5, np.nan], [0.2, 0.3]), 0, "cloud_cover_fraction", r"record 0: cloud_cover_frac"),
])
def test_bad_cloud_inputs_name_record_and_field(call, index, field, message):
    with pytest.raises(RecordErrors, match=message) as raised:
        call()
    assert [(e.index, e.field) for e in raised.value.errors] == [(index, field)]


def test_every_bad_record_is_named_in_record_order():
    with pytest.raises(RecordErrors) as raised:
        clouds.resolve_cmf([0.5, np.nan, 0.7, 0.9], None, [np.nan, 3, 2, 1])
    assert [(e.index, e.field) for e in raised.value.errors] == [
        (2, "cloud_cover_oktas"), (3, "cloud_cover_oktas")]


def test_implausible_measurements_are_refused_by_record():
    # Local noon near Tucson on 21 June 2026; measurements invented at 1, 2 and 3 times the
    # clear-sky GHI.
    t = np.array([1781895600.0] * 3)
    lat, lon = np.full(3, 32.2), np.full(3, -110.9)
    clear = clouds.clear_sky_global_horizontal_w_m2(
        clouds.solar_position(t, lat, lon).zenith_deg)
    with pytest.raises(RecordErrors) as raised:
        clouds.cmf_from_measured_global_irradiance(clear * [1.0, 2.0, 3.0], t, lat, lon,
                                                   np.full(3, np.nan), np.full(3, np.nan))
    assert [(e.index, e.field) for e in raised.value.errors] == [
        (1, "measured_ghi_w_m2"), (2, "measured_ghi_w_m2")]
    assert raised.value.errors[0].reason == clouds.IMPLAUSIBLE_MEASUREMENT


def test_enhancement_above_one_is_accepted_and_resolve_mixes_sources():
    cmf = clouds.resolve_cmf(cloud_modification_factor=[1.3, np.nan, np.nan],
                             cloud_cover_oktas=[np.nan, 8, np.nan])
    np.testing.assert_allclose(cmf[:2], [1.3, 0.25])
    assert np.isnan(cmf[2])
