"""Operator ozone grids (CSV and NetCDF) and the per-record ozone resolution."""
import numpy as np
import pytest

from uvdose.models.ozone_climatology import climatological_ozone_du, day_of_year_from_unix
from uvdose.models.ozone_grids import OzoneGrid, OzoneGridError, OzoneResolver
from uvdose.models.record_errors import RecordErrors

# An invented regional grid for a demo scenario of our own (values are not data).
LATS = np.array([40.0, 42.5, 45.0])
LONS = np.array([-5.0, 0.0, 5.0, 10.0])
DATES = ["2026-03-01", "2026-03-02", "2026-03-04"]


def _unix(iso):
    return float(np.datetime64(iso, "s").astype("int64"))


def _values(seed=11):
    rng = np.random.default_rng(seed)
    return np.round(rng.uniform(280.0, 420.0, (len(DATES), LATS.size, LONS.size)), 1)


def _write_csv(path, dates, lats, lons, values, header="date,latitude_deg,longitude_deg,ozone_du"):
    lines = ["# invented demo grid", header]
    for k, date in enumerate(dates):
        for j, lat in enumerate(lats):
            for i, lon in enumerate(lons):
                lines.append(f"{date},{lat},{lon},{values[k, j, i]}")
    path.write_text("\n".join(lines) + "\n")
    return path


def _write_netcdf(path, dates, lats, lons, values, period="day", units="DU", variable="ozone_column",
                  dtype="f4"):
    netCDF4 = pytest.importorskip("netCDF4")
    with netCDF4.Dataset(path, "w") as ds:
        ds.ozone_period = period
        ds.createDimension("time", len(dates))
        ds.createDimension("latitude", len(lats))
        ds.createDimension("longitude", len(lons))
        time = ds.createVariable("time", "f8", ("time",))
        time.units = "days since 2026-01-01 00:00:00"
        base = np.datetime64("2026-01-01", "D")
        time[:] = [(np.datetime64(d, "D") - base).astype(int) for d in dates]
        ds.createVariable("latitude", "f8", ("latitude",))[:] = lats
        ds.createVariable("longitude", "f8", ("longitude",))[:] = lons
        var = ds.createVariable(variable, dtype, ("time", "latitude", "longitude"))
        var.units = units
        var[:] = values
    return path


@pytest.fixture
def csv_grid(tmp_path):
    return OzoneGrid.from_csv(_write_csv(tmp_path / "demo_daily.csv", DATES, LATS, LONS, _values()))


def _noon(date):
    return _unix(date + "T12:00:00")


# ------------------------------------------------------------------ round trip
def test_csv_values_at_nodes_come_back_exactly(csv_grid):
    values = _values()
    k, j, i = np.meshgrid(range(len(DATES)), range(LATS.size), range(LONS.size), indexing="ij")
    times = np.array([_noon(d) for d in DATES])[k]
    got, covered = csv_grid.lookup(LATS[j], LONS[i], times)
    assert covered.all()
    assert np.array_equal(got, values)


def test_between_nodes_is_the_bilinear_interpolant(csv_grid):
    v = _values()[1]
    # a point 30 % of the way from 42.5 to 45 N and 80 % of the way from 0 to 5 E
    lat, lon = 42.5 + 0.3 * 2.5, 0.0 + 0.8 * 5.0
    expected = (
        v[1, 1] * 0.7 * 0.2 + v[1, 2] * 0.7 * 0.8 + v[2, 1] * 0.3 * 0.2 + v[2, 2] * 0.3 * 0.8
    )
    got, covered = csv_grid.lookup([lat], [lon], [_noon(DATES[1])])
    assert covered[0] and got[0] == pytest.approx(expected, rel=1e-12)


def test_linear_in_time_between_period_centres(csv_grid):
    v = _values()
    # 2026-03-02 noon -> 2026-03-04 noon spans 48 h; 18:00 on 03-03 is 30/48 of the way
    t = _unix("2026-03-03T18:00:00")
    got, _ = csv_grid.lookup([LATS[0]], [LONS[0]], [t])
    assert got[0] == pytest.approx(v[1, 0, 0] + (v[2, 0, 0] - v[1, 0, 0]) * 30 / 48, rel=1e-12)
    # before the first centre (but inside the first day) the first value holds
    got, covered = csv_grid.lookup([LATS[0]], [LONS[0]], [_unix("2026-03-01T00:00:00")])
    assert covered[0] and got[0] == v[0, 0, 0]


def test_outside_span_or_extent_is_not_covered(csv_grid):
    lat = np.array([41.0, 41.0, 41.0, 39.9, 41.0, 41.0])
    lon = np.array([1.0, 1.0, 1.0, 1.0, 10.1, -5.0])
    t = np.array(
        [
            _unix("2026-02-28T23:59:59"),  # before the first day
            _unix("2026-03-05T00:00:00"),  # after the last day
            _unix("2026-03-04T23:59:59"),  # last second of the last day: inside
            _noon("2026-03-02"),  # south of the grid
            _noon("2026-03-02"),  # east of the grid
            _noon("2026-03-02"),  # on the western edge: inside
        ]
    )
    got, covered = csv_grid.lookup(lat, lon, t)
    assert covered.tolist() == [False, False, True, False, False, True]
    assert np.isnan(got[~covered]).all()


def test_netcdf_grid_matches_the_csv_grid(tmp_path, csv_grid):
    nc_grid = OzoneGrid.load(_write_netcdf(tmp_path / "demo_daily.nc", DATES, LATS, LONS, _values()))
    assert nc_grid.label == "grid:demo_daily.nc"
    rng = np.random.default_rng(5)
    lat = rng.uniform(40.0, 45.0, 200)
    lon = rng.uniform(-5.0, 10.0, 200)
    t = rng.uniform(_unix("2026-03-01T00:00:00"), _unix("2026-03-05T00:00:00"), 200)
    a, ca = nc_grid.lookup(lat, lon, t)
    b, cb = csv_grid.lookup(lat, lon, t)
    assert ca.all() and cb.all()
    # the NetCDF file stores float32
    assert np.max(np.abs(a - b)) < 1e-3


def test_netcdf_values_at_nodes_come_back_exactly(tmp_path):
    values = _values()
    grid = OzoneGrid.load(_write_netcdf(tmp_path / "exact.nc", DATES, LATS, LONS, values, dtype="f8"))
    k, j, i = np.meshgrid(range(len(DATES)), range(LATS.size), range(LONS.size), indexing="ij")
    got, covered = grid.lookup(LATS[j], LONS[i], np.array([_noon(d) for d in DATES])[k])
    assert covered.all() and np.array_equal(got, values)


def test_monthly_netcdf_grid(tmp_path):
    values = np.stack([np.full((2, 2), 300.0), np.full((2, 2), 360.0)])
    path = _write_netcdf(tmp_path / "monthly.nc", ["2026-01-01", "2026-02-01"], [0.0, 10.0], [0.0, 10.0],
                         values, period="month")
    grid = OzoneGrid.load(path)
    assert grid.time_span_unix_s == (_unix("2026-01-01T00:00:00"), _unix("2026-03-01T00:00:00"))
    got, _ = grid.lookup([5.0], [5.0], [_unix("2026-02-15T00:00:00")])
    assert got[0] == pytest.approx(360.0)


def test_monthly_grid_centres_on_mid_month(tmp_path):
    values = np.stack([np.full((2, 2), 300.0), np.full((2, 2), 360.0)])
    grid = OzoneGrid.from_csv(
        _write_csv(tmp_path / "monthly.csv", ["2026-01", "2026-02"], [0.0, 10.0], [0.0, 10.0], values)
    )
    mid_jan = _unix("2026-01-16T12:00:00")  # centre of a 31-day month
    mid_feb = _unix("2026-02-15T00:00:00")  # centre of a 28-day month
    got, covered = grid.lookup(
        [5.0] * 4, [5.0] * 4, [mid_jan, 0.5 * (mid_jan + mid_feb), _unix("2026-02-28T23:00:00"), _unix("2026-03-01")]
    )
    assert covered.tolist() == [True, True, True, False]
    assert got[:3] == pytest.approx([300.0, 330.0, 360.0])


def test_global_grid_wraps_across_the_date_line(tmp_path):
    lons = np.arange(0.0, 360.0, 90.0)  # 0, 90, 180, 270 east: the whole circle
    values = np.broadcast_to(np.array([300.0, 320.0, 340.0, 360.0]), (1, 2, 4)).copy()
    grid = OzoneGrid.from_csv(_write_csv(tmp_path / "global.csv", ["2026-05-01"], [-10.0, 10.0], lons, values))
    assert grid.wraps_longitude
    t = _noon("2026-05-01")
    got, covered = grid.lookup([0.0, 0.0, 0.0], [-45.0, 315.0, 180.0], [t, t, t])
    assert covered.all()
    # -45 = 315 E lies halfway between 270 E (360 DU) and 360 = 0 E (300 DU)
    assert got.tolist() == pytest.approx([330.0, 330.0, 340.0])


def test_regional_grid_across_the_date_line_in_0_360_longitudes(tmp_path):
    values = np.array([[[300.0, 310.0], [300.0, 310.0]]])
    grid = OzoneGrid.from_csv(
        _write_csv(tmp_path / "pacific.csv", ["2026-05-01"], [-20.0, -10.0], [170.0, 190.0], values)
    )
    t = _noon("2026-05-01")
    got, covered = grid.lookup([-15.0, -15.0, -15.0], [-175.0, 175.0, -160.0], [t, t, t])
    assert covered.tolist() == [True, True, False]
    assert got[:2].tolist() == pytest.approx([307.5, 302.5])


# ------------------------------------------------------------- malformed files
@pytest.mark.parametrize(
    "edit, message",
    [
        (lambda lines: lines[:1] + ["date,lat,lon,ozone"] + lines[2:], r"line 2: header must be date,latitude_deg"),
        (lambda lines: lines[:3] + ["2026-03-01,40.0,0.0,lots"] + lines[4:], r"line 4, column ozone_du: not a number"),
        (lambda lines: lines[:3] + ["2026-03-01,40.0,0.0,0.32"] + lines[4:], r"line 4, column ozone_du: 0.32 is outside \[50, 700\]"),
        (lambda lines: lines[:3] + ["2026-03-01,95.0,0.0,300"] + lines[4:], r"line 4, column latitude_deg"),
        (lambda lines: lines[:3] + ["2026-3-1,40.0,0.0,300"] + lines[4:], r"line 4, column date: expected YYYY-MM-DD"),
        (lambda lines: lines[:3] + ["2026-03-01,40.0,0.0"] + lines[4:], r"line 4: expected 4 columns, got 3"),
        (lambda lines: lines + [lines[2]], r"line \d+: same date, latitude_deg and longitude_deg as line 3"),
        (lambda lines: lines[:3] + lines[4:], r"grid is not complete: no line for date 2026-03-01, latitude_deg 40, longitude_deg 0"),
        (lambda lines: lines[:1], r"empty file|no data lines"),
    ],
)
def test_malformed_csv_names_line_and_column(tmp_path, edit, message):
    path = _write_csv(tmp_path / "bad.csv", DATES, LATS, LONS, _values())
    lines = path.read_text().splitlines()
    path.write_text("\n".join(edit(lines)) + "\n")
    with pytest.raises(OzoneGridError, match=r"bad\.csv.*" + message if "empty" not in message else message):
        OzoneGrid.from_csv(path)


def test_single_latitude_row_is_rejected(tmp_path):
    path = _write_csv(tmp_path / "row.csv", DATES[:1], [40.0], LONS, _values()[:1, :1])
    with pytest.raises(OzoneGridError, match="latitude_deg needs at least two"):
        OzoneGrid.from_csv(path)


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"units": "mol m-2"}, "units 'DU'"),
        ({"period": "week"}, "ozone_period"),
        ({"variable": "tco3"}, "missing variable 'ozone_column'"),
    ],
)
def test_malformed_netcdf_is_explained(tmp_path, kwargs, message):
    path = _write_netcdf(tmp_path / "bad.nc", DATES, LATS, LONS, _values(), **kwargs)
    with pytest.raises(OzoneGridError, match=message):
        OzoneGrid.load(path)


def test_netcdf_missing_values_are_rejected(tmp_path):
    values = np.ma.masked_array(_values(), mask=np.zeros(_values().shape, bool))
    values.mask[2, 1, 3] = True
    path = _write_netcdf(tmp_path / "gappy.nc", DATES, LATS, LONS, values)
    with pytest.raises(OzoneGridError, match=r"time 2026-03-04, latitude 42.5, longitude 10 .*not missing"):
        OzoneGrid.load(path)


def test_unknown_suffix_and_missing_file(tmp_path):
    with pytest.raises(OzoneGridError, match="unknown ozone grid format"):
        OzoneGrid.load(tmp_path / "grid.grib")
    with pytest.raises(OzoneGridError, match="cannot open"):
        OzoneGrid.load(tmp_path / "absent.csv")


# ------------------------------------------------------------------ resolver
def test_resolver_order_client_then_grids_then_climatology(tmp_path):
    first = _write_csv(tmp_path / "first.csv", DATES, LATS, LONS, _values(1))
    second_lons = np.array([-20.0, 20.0])
    second = _write_csv(
        tmp_path / "second.csv", DATES, LATS, second_lons, np.full((3, 3, 2), 333.0)
    )
    resolver = OzoneResolver.from_paths([first, second])
    t = _noon("2026-03-02")
    lat = np.array([41.0, 41.0, 41.0, 41.0, 60.0])
    lon = np.array([1.0, 1.0, 15.0, 1.0, 1.0])
    times = np.array([t, t, t, _unix("2026-06-01"), t])
    client = np.array([301.0, np.nan, np.nan, np.nan, np.nan])
    ozone, labels = resolver.resolve(lat, lon, times, client)
    assert labels.tolist() == ["client", "grid:first.csv", "grid:second.csv", "climatology", "climatology"]
    assert ozone[0] == 301.0
    assert ozone[1] == OzoneGrid.load(first).lookup([41.0], [1.0], [t])[0][0]
    assert ozone[2] == pytest.approx(333.0)
    expected = climatological_ozone_du(lat[3:], lon[3:], day_of_year_from_unix(times[3:]))
    assert np.array_equal(ozone[3:], expected)


def test_resolver_without_grids_is_the_climatology():
    rng = np.random.default_rng(2)
    lat, lon = rng.uniform(-90, 90, 50), rng.uniform(-180, 180, 50)
    t = rng.uniform(_unix("2000-01-01"), _unix("2030-01-01"), 50)
    ozone, labels = OzoneResolver().resolve(lat, lon, t, np.full(50, np.nan))
    assert set(labels) == {"climatology"}
    assert np.array_equal(ozone, climatological_ozone_du(lat, lon, day_of_year_from_unix(t)))


@pytest.mark.parametrize(
    "lat, lon, t, client, message",
    [
        (95.0, 0.0, 0.0, np.nan, "latitude_deg"),
        (0.0, -200.0, 0.0, np.nan, "longitude_deg"),
        (0.0, 0.0, np.nan, np.nan, "time_unix_s"),
        (0.0, 0.0, 0.0, 0.3, "ozone_du"),
        (0.0, 0.0, 0.0, np.inf, "ozone_du"),
    ],
)
def test_resolver_rejects_bad_records_by_index(lat, lon, t, client, message):
    with pytest.raises(RecordErrors, match=rf"record 1: {message}") as raised:
        OzoneResolver().resolve([0.0, lat], [0.0, lon], [0.0, t], [np.nan, client])
    assert [(e.index, e.field) for e in raised.value.errors] == [(1, message)]


def test_from_paths_in_order(tmp_path):
    a = _write_csv(tmp_path / "a.csv", DATES, LATS, LONS, _values())
    b = _write_netcdf(tmp_path / "b.nc", DATES, LATS, LONS, _values())
    resolver = OzoneResolver.from_paths([a, b])
    assert [g.label for g in resolver.grids] == ["grid:a.csv", "grid:b.nc"]
    assert OzoneResolver.from_paths([]).grids == []
    with pytest.raises(OzoneGridError, match="absent.csv"):
        OzoneResolver.from_paths([tmp_path / "absent.csv"])
    described = resolver.describe()[0]
    assert described["start"] == "2026-03-01T00:00:00Z" and described["end"] == "2026-03-05T00:00:00Z"


def test_fingerprint_changes_with_the_grids(tmp_path):
    for folder in ("copy", "changed"):
        (tmp_path / folder).mkdir()
    a = _write_csv(tmp_path / "a.csv", DATES, LATS, LONS, _values(1))
    same = _write_csv(tmp_path / "copy" / "a.csv", DATES, LATS, LONS, _values(1))
    changed = _write_csv(tmp_path / "changed" / "a.csv", DATES, LATS, LONS, _values(2))
    assert OzoneResolver().fingerprint == "none"
    assert OzoneResolver.from_paths([a]).fingerprint == OzoneResolver.from_paths([same]).fingerprint
    assert OzoneResolver.from_paths([a]).fingerprint != OzoneResolver.from_paths([changed]).fingerprint


def test_resolver_climatology_by_name_and_its_fingerprint():
    from uvdose.models.ozone_climatology import climatological_ozone_du as climatology

    lat, lon, t = np.array([-80.0, 45.0]), np.array([0.0, 10.0]), np.full(2, _unix("2026-10-15T12:00:00"))
    default = OzoneResolver()
    fit = default.with_climatology("van_heuklon_1979")
    assert default.climatology == "observed" and default.with_climatology(None) is default
    day = day_of_year_from_unix(t)
    assert np.array_equal(default.resolve(lat, lon, t)[0], climatology(lat, lon, day, "observed"))
    assert np.array_equal(fit.resolve(lat, lon, t)[0], climatology(lat, lon, day, "van_heuklon_1979"))
    # a cached result under one climatology must not be served under the other
    assert default.fingerprint == "none" and fit.fingerprint == "none;climatology=van_heuklon_1979"
    with pytest.raises(ValueError, match="unknown ozone climatology"):
        OzoneResolver(climatology="satellite")


def test_relative_sigma_by_source(tmp_path):
    from uvdose.models.ozone_climatology import climatological_ozone_sigma_fraction
    from uvdose.models.uncertainty import CLIENT_OZONE_SIGMA, DAILY_GRID_OZONE_SIGMA

    daily = OzoneGrid.from_csv(_write_csv(tmp_path / "daily.csv", DATES, LATS, LONS, _values()))
    monthly = OzoneGrid.from_csv(_write_csv(tmp_path / "monthly.csv", ["2026-05", "2026-06"], [0.0, 10.0],
                                            [0.0, 10.0], np.full((2, 2, 2), 260.0)))
    assert daily.period_kind == "day" and monthly.period_kind == "month"
    resolver = OzoneResolver([daily, monthly])
    lat = np.array([42.5, 42.5, 5.0, -60.0])
    lon = np.array([0.0, 0.0, 5.0, 0.0])
    t = np.array([_unix("2026-03-02T12:00:00"), _unix("2026-03-02T12:00:00"), _unix("2026-06-01T00:00:00"),
                  _unix("2026-06-01T00:00:00")])
    ozone, labels = resolver.resolve(lat, lon, t, [300.0, np.nan, np.nan, np.nan])
    assert labels.tolist() == ["client", "grid:daily.csv", "grid:monthly.csv", "climatology"]
    sigma = resolver.relative_sigma(labels, lat, lon, t)
    # a monthly mean is no better than the climatology's day-to-day spread
    expected = climatological_ozone_sigma_fraction(lat[2:], lon[2:], day_of_year_from_unix(t[2:]))
    assert sigma.tolist()[:2] == [CLIENT_OZONE_SIGMA, DAILY_GRID_OZONE_SIGMA]
    assert sigma[2:] == pytest.approx(expected)
    fit = resolver.with_climatology("van_heuklon_1979").relative_sigma(labels, lat, lon, t)
    assert fit[2] == pytest.approx(sigma[2]) and fit[3] > sigma[3]  # the fit's bias added
