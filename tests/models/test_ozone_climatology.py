"""The 1979 fit climatology ("van_heuklon_1979") against its source and known facts.

The observed default climatology has its own tests (test_ozone_climatology_observed.py
for the table, the end of this file for its run-time interpolation)."""
import numpy as np
import pytest
from scipy.interpolate import RegularGridInterpolator

from uvdose.models.ozone_climatology import (
    climatological_ozone_du,
    climatology_table,
    day_of_year_from_unix,
    van_heuklon_ozone_du,
)
from uvdose.models.record_errors import RecordErrors

DAYS = np.arange(1.0, 366.0)
FIT = "van_heuklon_1979"


def fit_ozone(latitude_deg, longitude_deg, day_of_year):
    return climatological_ozone_du(latitude_deg, longitude_deg, day_of_year, FIT)


def _unix(iso):
    return float(np.datetime64(iso, "s").astype("int64"))


def _zonal_mean(latitude_deg, days):
    lon = np.arange(-180.0, 180.0, 5.0)
    lat, lon, day = np.meshgrid(latitude_deg, lon, days, indexing="ij")
    return fit_ozone(lat, lon, day).mean()


# ---------------------------------------------------------------- the fit itself
def test_fit_reproduces_worked_value_northern_hemisphere():
    # 36 N, 122 W, day 185: 321.2 DU is the usage example printed with a 1997 MATLAB
    # implementation of Van Heuklon (1979) by W. Broenkow and S. Flora. By hand from
    # Table 1: 235 + (150 + 40 sin(0.9865*155) + 20 sin(3*(-122+0))) sin^2(1.28*36)
    #        = 235 + (150 + 18.22 - 2.09) * 0.5186 = 321.2 DU.
    assert van_heuklon_ozone_du(36.0, -122.0, 185.0) == pytest.approx(321.2, abs=0.05)


def test_fit_reproduces_hand_value_southern_hemisphere():
    # 45 S, 30 E, day 288, by hand from Van Heuklon (1979) Table 1 (southern set):
    # 235 + (100 + 30 sin(0.9865*(288+152.625)) + 20 sin(2*(30-75))) sin^2(1.5*-45)
    # sin(434.66 deg) = sin(74.66 deg) = 0.96437 -> 28.931; sin(-90 deg) = -1 -> -20;
    # sin^2(-67.5 deg) = 0.85355 -> 235 + 108.931 * 0.85355 = 327.98 DU.
    assert van_heuklon_ozone_du(-45.0, 30.0, 288.0) == pytest.approx(327.98, abs=0.02)


def test_fit_equator_is_coefficient_j():
    # Van Heuklon (1979) Table 1: J = 235 DU, the equatorial column, all year.
    lon = np.linspace(-180, 180, 37)
    assert np.allclose(van_heuklon_ozone_du(0.0, lon, 100.0), 235.0)


# ------------------------------------------------------------------- the table
def test_table_carries_its_provenance():
    meta = climatology_table(FIT).metadata
    assert "Van Heuklon" in meta["source"] and "Solar Energy 22" in meta["source"]
    assert "Antarctic" in meta["caveat"]
    assert climatology_table(FIT).ozone_du.dtype == np.float32


def test_table_nodes_equal_the_fit():
    table = climatology_table(FIT)
    day, lat, lon = np.meshgrid(
        table.day_nodes, table.latitude_nodes_deg, table.longitude_nodes_deg, indexing="ij"
    )
    expected = van_heuklon_ozone_du(lat, lon, day)
    assert np.allclose(table.ozone_du, expected, atol=1e-4)
    assert np.allclose(fit_ozone(lat, lon, day), expected, atol=1e-4)


def test_interpolation_matches_scipy_on_the_periodic_table():
    # Reference: scipy's RegularGridInterpolator (linear) on the table padded with
    # its wrap-around column and day plane.
    table = climatology_table(FIT)
    values = np.concatenate([table.ozone_du, table.ozone_du[:1]], axis=0)
    values = np.concatenate([values, values[:, :, :1]], axis=2).astype(float)
    reference = RegularGridInterpolator(
        (
            np.append(table.day_nodes, table.day_nodes[0] + 365.0),
            table.latitude_nodes_deg,
            np.append(table.longitude_nodes_deg, table.longitude_nodes_deg[0] + 360.0),
        ),
        values,
    )
    rng = np.random.default_rng(7)
    n = 5000
    lat = rng.uniform(-88.75, 88.75, n)
    lon = rng.uniform(-180.0, 180.0, n)
    day = rng.uniform(1.0, 366.0, n)
    lon_ref = np.where(lon < table.longitude_nodes_deg[0], lon + 360.0, lon)
    got = fit_ozone(lat, lon, day)
    want = reference(np.column_stack([day, lat, lon_ref]))
    assert np.max(np.abs(got - want)) < 1e-6


def test_interpolated_field_stays_close_to_the_fit_away_from_its_jumps():
    # Away from the fit's own longitude jumps (0 and 180 deg in the north) the
    # tabulated field should reproduce the fit to well under 1 DU.
    rng = np.random.default_rng(3)
    lat = rng.uniform(-88.0, 88.0, 20000)
    lon = rng.uniform(-170.0, -10.0, 20000)
    day = rng.uniform(1.0, 365.0, 20000)
    assert np.max(np.abs(fit_ozone(lat, lon, day) - van_heuklon_ozone_du(lat, lon, day))) < 1.0


# ------------------------------------------------------- facts of the field
def test_tropical_columns_roughly_240_to_300_du_all_year():
    # Tropical total ozone is low and nearly constant through the year, roughly
    # 240-300 DU, equatorial means about 250-270 DU (WMO Scientific Assessment of
    # Ozone Depletion 2018, ch. 3 figures, from memory). Van Heuklon (1979) fixes
    # the equator at J = 235 DU, a known low bias of the fit (documented in the
    # README): within 10 degrees of the equator the lower edge is therefore 230 DU,
    # and the 12.5-20 degree belts must sit inside 240-300 DU.
    lon = np.arange(-180.0, 180.0, 5.0)
    lat, lon, day = np.meshgrid(np.arange(-20.0, 20.1, 2.5), lon, DAYS, indexing="ij")
    ozone = fit_ozone(lat, lon, day)
    assert ozone.min() >= 230.0 and ozone.max() <= 300.0
    belts = np.abs(lat) >= 12.5
    assert ozone[belts].min() >= 240.0
    assert np.ptp(ozone.mean(axis=(0, 1))) < 25.0  # weak annual cycle


def test_northern_midlatitude_spring_maximum_exceeds_autumn_minimum():
    # Northern mid-latitude columns peak in late winter/spring and are lowest in
    # autumn, a seasonal swing of several tens of DU (WMO 2018 assessment; Van
    # Heuklon 1979 fig. 1; amplitude from memory).
    lat = np.arange(40.0, 60.1, 2.5)
    spring = _zonal_mean(lat, np.arange(60.0, 121.0))  # March-April
    autumn = _zonal_mean(lat, np.arange(244.0, 305.0))  # September-October
    assert spring - autumn > 20.0


def test_southern_midlatitude_spring_maximum():
    # Southern mid-latitudes peak in their spring (September-November) (WMO 2018
    # assessment, from memory).
    lat = np.arange(-60.0, -39.9, 2.5)
    spring = _zonal_mean(lat, np.arange(244.0, 335.0))
    autumn = _zonal_mean(lat, np.arange(60.0, 152.0))
    assert spring - autumn > 10.0


def test_global_area_weighted_mean_near_300_du():
    # Global mean total ozone is about 300 DU (WMO/UNEP assessments, common
    # textbook figure, from memory); accept 285-315 DU.
    table = climatology_table(FIT)
    weights = np.cos(np.radians(table.latitude_nodes_deg))
    zonal_annual = table.ozone_du.mean(axis=(0, 2))
    mean = float(np.sum(zonal_annual * weights) / np.sum(weights))
    assert 285.0 <= mean <= 315.0


@pytest.mark.parametrize(
    "station, lat, lon, annual_mean_du",
    [
        # Long-term annual means of ground-based (Dobson) records, all from memory:
        ("Arosa, Switzerland", 46.8, 9.7, 330.0),
        ("Mauna Loa, Hawaii", 19.5, -155.6, 270.0),
        ("Lauder, New Zealand", -45.0, 169.7, 315.0),
    ],
)
def test_station_annual_means_within_12_percent(station, lat, lon, annual_mean_du):
    # A coarse check only: the fit runs high at northern mid-latitudes (~+10 % at
    # Arosa) and low in the tropics (see the tropical test); 12 % bounds both.
    mean = fit_ozone(lat, lon, DAYS).mean()
    assert mean == pytest.approx(annual_mean_du, rel=0.12), station


def test_pre_depletion_climatology_shows_no_antarctic_ozone_hole():
    # The documented limitation: in October over 75-85 S observed columns since the
    # 1980s often fall below 220 DU (the usual threshold of depleted areas: common
    # practice, no source); this pre-1979 fit stays well above it, so such records
    # need client or operator values.
    ozone = fit_ozone(np.full(12, -80.0), np.linspace(-180, 150, 12), 288.0)
    assert ozone.min() > 220.0


# ------------------------------------------------------------ continuity
def test_smooth_across_year_boundary():
    lat = np.array([-60.0, -30.0, 30.0, 50.0, 70.0])
    lon = np.array([-100.0, 10.0, 60.0, -5.0, 140.0])
    end_of_year = fit_ozone(lat, lon, 365.9999)
    start_of_year = fit_ozone(lat, lon, 1.0)
    assert np.max(np.abs(end_of_year - start_of_year)) < 0.01
    # day 366 of a leap year continues the same wrap
    assert np.allclose(fit_ozone(lat, lon, 366.5), fit_ozone(lat, lon, 1.5))


def test_smooth_across_the_date_line():
    lat = np.linspace(-85.0, 85.0, 35)
    east = fit_ozone(lat, 179.9999, 80.0)
    west = fit_ozone(lat, -179.9999, 80.0)
    assert np.max(np.abs(east - west)) < 0.01
    assert np.array_equal(fit_ozone(lat, 180.0, 80.0), fit_ozone(lat, -180.0, 80.0))
    assert np.allclose(fit_ozone(lat, 200.0, 80.0), fit_ozone(lat, -160.0, 80.0))


def test_fit_jump_at_greenwich_becomes_a_ramp_over_one_cell():
    # The published fit jumps at 0 deg in the north (I = 0 west, 20 east); the table
    # turns the jump into a linear ramp between the cell centres at -2.5 and 2.5.
    lon = np.linspace(-2.5, 2.5, 11)
    ozone = fit_ozone(np.full(11, 48.75), lon, 121.0)
    steps = np.diff(ozone)
    assert np.allclose(steps, steps[0], atol=1e-4)
    assert abs(ozone[-1] - ozone[0]) > 5.0


# ------------------------------------------------------- interface behaviour
def test_vectorised_broadcasting():
    out = fit_ozone(np.array([[10.0], [50.0]]), np.array([0.0, 90.0, -90.0]), 172.0)
    assert out.shape == (2, 3)


@pytest.mark.parametrize(
    "args, field",
    [
        ((91.0, 0.0, 10.0), "latitude_deg"),
        ((np.nan, 0.0, 10.0), "latitude_deg"),
        ((10.0, 400.0, 10.0), "longitude_deg"),
        ((10.0, 0.0, 0.5), "day_of_year"),
        ((10.0, 0.0, 367.0), "day_of_year"),
    ],
)
def test_bad_input_names_field_and_record(args, field):
    lat, lon, day = args
    with pytest.raises(RecordErrors, match=rf"record 1: {field}") as raised:
        fit_ozone([0.0, lat], [0.0, lon], [1.0, day])
    assert [(e.index, e.field) for e in raised.value.errors] == [(1, field)]


def test_day_of_year_from_unix():
    assert day_of_year_from_unix(_unix("2026-01-01T00:00:00")) == pytest.approx(1.0)
    assert day_of_year_from_unix(_unix("2026-07-02T12:00:00")) == pytest.approx(183.5)
    # leap year: 2024-12-31T12:00 is 365.5 days into a 366-day year
    assert day_of_year_from_unix(_unix("2024-12-31T12:00:00")) == pytest.approx(1 + 365 * 365.5 / 366)
    assert day_of_year_from_unix(_unix("1965-03-01T00:00:00")) == pytest.approx(60.0)


def test_day_of_year_calendar_arithmetic_matches_numpy_datetimes():
    # reference: numpy's datetime64 calendar, over 1900-2200 (covers 1900 and 2100,
    # not leap years, and 2000, a leap year)
    rng = np.random.default_rng(9)
    t = np.floor(rng.uniform(_unix("1900-01-01T00:00:00"), _unix("2200-01-01T00:00:00"), 20000))
    t = np.concatenate([t, [_unix(f"{y}-01-01T00:00:00") + d for y in (1900, 2000, 2100, 1970, 1969)
                            for d in (-1.0, 0.0, 1.0)]])
    year = t.astype("int64").astype("datetime64[s]").astype("datetime64[Y]")
    start = year.astype("datetime64[s]").astype("int64").astype(float)
    end = (year + 1).astype("datetime64[s]").astype("int64").astype(float)
    assert np.allclose(day_of_year_from_unix(t), 1.0 + 365.0 * (t - start) / (end - start), rtol=0, atol=1e-9)


# ------------------------------------------ the observed default, at run time
def test_observed_is_the_default_and_names_are_checked():
    from uvdose.models.ozone_climatology import CLIMATOLOGY_NAMES, DEFAULT_CLIMATOLOGY

    assert DEFAULT_CLIMATOLOGY == "observed" and set(CLIMATOLOGY_NAMES) == {"observed", FIT}
    assert "McPeters" in climatology_table().metadata["source"]
    with pytest.raises(ValueError, match="unknown ozone climatology 'toms'"):
        climatological_ozone_du(0.0, 0.0, 10.0, "toms")


def test_observed_interpolation_reproduces_its_nodes_and_is_zonal():
    table = climatology_table("observed")
    day, lat = np.meshgrid(table.day_nodes, table.latitude_nodes_deg, indexing="ij")
    for lon in (-170.0, 0.0, 95.0, 300.0):
        assert np.allclose(climatological_ozone_du(lat, lon, day), table.ozone_du[:, :, 0], atol=1e-4)
    # halfway between two band centres and two month centres: the mean of the corners
    mid_day = 0.5 * (table.day_nodes[3] + table.day_nodes[4])
    corners = table.ozone_du[3:5, 10:12, 0].astype(float)
    assert climatological_ozone_du(20.0, 0.0, mid_day) == pytest.approx(corners.mean(), abs=1e-4)


def test_observed_wraps_the_year_and_holds_beyond_the_outer_bands():
    table = climatology_table("observed")
    # between the December (350.5) and January (16.5 + 365) centres: linear across New Year
    january, december = table.ozone_du[0, :, 0].astype(float), table.ozone_du[-1, :, 0].astype(float)
    at_new_year = climatological_ozone_du(table.latitude_nodes_deg, 0.0, 1.0)
    weight = (1.0 + 365.0 - 350.5) / (16.5 + 365.0 - 350.5)
    assert np.allclose(at_new_year, december + weight * (january - december), atol=1e-4)
    assert np.allclose(climatological_ozone_du(-90.0, 0.0, 288.0), climatological_ozone_du(-85.0, 0.0, 288.0))


def test_observed_default_brings_the_antarctic_spring_the_fit_lacks():
    # Common-practice depletion threshold 220 DU (no source): the default shows it in
    # mid-October at 80 S, the 1979 fit stays far above it.
    observed = climatological_ozone_du(-80.0, 0.0, 288.0)
    assert observed < 220.0 and fit_ozone(-80.0, 0.0, 288.0) > 300.0


def test_sigma_of_the_observed_and_of_the_fit():
    from uvdose.models.ozone_climatology import climatological_ozone_sigma_fraction

    lat = np.array([0.0, 45.0, -80.0])
    observed = climatological_ozone_sigma_fraction(lat, 0.0, 288.0)
    table = climatology_table("observed")
    assert np.all((observed > 0.0) & (observed < 0.25))
    assert observed[0] < observed[1] < observed[2]
    # the fit's sigma adds its difference from the observed means in quadrature
    fit = climatological_ozone_sigma_fraction(lat, 0.0, 288.0, FIT)
    bias = fit_ozone(lat, 0.0, 288.0) / climatological_ozone_du(lat, 0.0, 288.0) - 1.0
    assert np.allclose(fit, np.hypot(observed, bias))
    assert table.has_sigma and not climatology_table(FIT).has_sigma
