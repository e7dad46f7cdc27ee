"""The engine facade: defaults, precedence of inputs, and the result's round trip.

Accuracy against published references lives beside each physics module; these tests
check that the facade wires the pipeline the way its docstrings say.
"""
import numpy as np
import pytest

from uvdose.models import engine
from uvdose.models.solar_geometry import pressure_from_elevation_hpa
from uvdose.models.spectral_grid import WAVELENGTH_NM

# 2024-03-20 12:00 UTC (near the March equinox); noon at Greenwich.
EQUINOX_NOON_UTC = 1710936000.0


def _conditions(n=3, **columns):
    base = {
        "time_unix_s": np.full(n, EQUINOX_NOON_UTC),
        "latitude_deg": np.full(n, 10.0),
        "longitude_deg": np.zeros(n),
    }
    base.update({k: np.asarray(v) for k, v in columns.items()})
    return engine.Conditions.from_columns(base)


def test_sun_below_horizon_gives_exact_zeros():
    # Longitude 180 at 12:00 UTC is local midnight.
    result = engine.compute(_conditions(longitude_deg=[180.0, 179.0, -179.0]))
    assert np.all(result.solar_zenith_deg > 90)
    for values in (result.uv_index, result.uvb_w_m2, result.uva_w_m2, *result.effective_w_m2.values()):
        assert np.array_equal(values, np.zeros(3))
    assert list(result.exposure_category) == ["low"] * 3


def test_client_ozone_overrides_climatology_and_says_so():
    result = engine.compute(_conditions(ozone_du=[250.0, np.nan, 400.0]))
    assert list(result.ozone_source) == ["client", "climatology", "client"]
    assert result.ozone_du[0] == 250.0 and result.ozone_du[2] == 400.0
    # Thinner ozone, more erythemal UV (common practice, no source).
    assert result.uv_index[0] > result.uv_index[2]


def test_without_a_resolver_the_engine_uses_the_climatology_whatever_the_environment(monkeypatch):
    # Operator grids enter as an argument (the service builds the resolver from its
    # settings); models/ reads no environment variable.
    monkeypatch.setenv("UVDOSE_OZONE_GRIDS", "/nonexistent/grid.csv")
    result = engine.compute(_conditions())
    assert list(result.ozone_source) == ["climatology"] * 3


def test_pressure_comes_from_elevation_unless_given():
    result = engine.compute(_conditions(elevation_m=[0.0, 2000.0, 2000.0], pressure_hpa=[np.nan, np.nan, 900.0]))
    assert result.pressure_hpa[0] == pytest.approx(1013.25)
    assert result.pressure_hpa[1] == pytest.approx(pressure_from_elevation_hpa(np.array([2000.0]))[0])
    assert result.pressure_hpa[2] == 900.0


def test_albedo_given_beats_surface_type_beats_default():
    result = engine.compute(
        _conditions(surface_albedo=[0.3, np.nan, np.nan], surface_type=["fresh_snow", "fresh_snow", ""])
    )
    assert result.surface_albedo[0] == 0.3
    assert result.surface_albedo[1] > 0.6
    assert result.surface_albedo[2] == engine.DEFAULT_SURFACE_ALBEDO


def test_cloud_factor_scales_every_irradiance_linearly():
    result = engine.compute(_conditions(cloud_modification_factor=[1.0, 0.5, 1.2]))
    for values in (result.uv_index, result.uvb_w_m2, result.effective_w_m2["erythema"]):
        np.testing.assert_allclose(values[1:] / values[0], [0.5, 1.2], rtol=1e-12)


def test_filter_reduces_receiver_values_but_not_the_uv_index():
    opaque = np.zeros_like(WAVELENGTH_NM, dtype=float)
    open_sky = engine.compute(_conditions(1))
    behind = engine.compute(_conditions(1), transmittance=opaque)
    assert behind.uv_index[0] == open_sky.uv_index[0] > 0
    assert behind.effective_w_m2["erythema"][0] == 0.0


def test_vertical_receiver_gets_less_than_horizontal_under_a_high_sun():
    result = engine.compute(_conditions(2, tilt_deg=[0.0, 90.0], receiver_azimuth_deg=[180.0, 180.0]))
    horizontal, vertical = result.effective_w_m2["erythema"]
    assert 0 < vertical < horizontal


def test_erythemal_effective_irradiance_is_the_uv_index_over_40():
    # UVI = 40 m² W⁻¹ × erythemal irradiance (WMO/WHO 2002 Practical Guide).
    result = engine.compute(_conditions(1), spectra=("erythema",))
    assert result.uv_index[0] == pytest.approx(40.0 * result.effective_w_m2["erythema"][0])


def test_result_round_trips_through_columns():
    result = engine.compute(_conditions(2), include_spectrum=True)
    again = engine.EngineResult.from_columns(result.as_columns())
    np.testing.assert_array_equal(again.spectrum_w_m2_nm, result.spectrum_w_m2_nm)
    for name, values in result.effective_w_m2.items():
        np.testing.assert_array_equal(again.effective_w_m2[name], values)
    np.testing.assert_array_equal(again.ozone_source, result.ozone_source)
    np.testing.assert_array_equal(again.uv_index, result.uv_index)


def test_columns_of_the_wrong_length_are_refused():
    with pytest.raises(ValueError, match="latitude_deg"):
        engine.Conditions.from_columns(
            {"time_unix_s": np.zeros(2), "latitude_deg": np.zeros(3), "longitude_deg": np.zeros(2)}
        )
