"""POST /v1/irradiance: results against published numbers, layouts, validation and limits.

Every response here also passes through the contract check in conftest.py.
"""
import math

import numpy as np
import pytest

from uvdose.models.action_spectra import weight_matrix
from uvdose.service.column_checks import validate_columns
from uvdose.service.problems import Problem
from uvdose.service.irradiance_batch import IrradianceRecordSchema

URL = "/v1/irradiance"

# Demo scenario of our own: the "Combe Basse" orchard cooperative (invented), block B.
ORCHARD = {"time": "2026-06-21T13:30:00+02:00", "lat": 44.05, "lon": 4.92, "elevation_m": 120}


@pytest.fixture
def exact(make_app, contract_client_for):
    """A client with the cache off, so results are for the exact inputs (the cache
    computes the transfer of rounded physics states)."""
    return contract_client_for(make_app(UVDOSE_CACHE="off"))


def post(client, body, **kwargs):
    return client.post(URL, json=body, **kwargs)


def one(client, **fields):
    response = post(client, {"records": [{**ORCHARD, **fields}], "spectra": ["erythema", "uvb"]})
    assert response.status_code == 200, response.get_json()
    return response.get_json()["results"][0]


# --- numbers against published references ---------------------------------------------

def test_solar_position_reproduces_the_spa_worked_example(exact):
    # Reda & Andreas (2004), NREL/TP-560-34302, Table A4.1: 2003-10-17 12:30:30 UTC-7,
    # 39.742476 N, 105.1786 W, 1830.14 m, 820 hPa (11 °C, ΔT 67 s) -> topocentric zenith
    # 50.11162°, azimuth 194.34024°. The service uses 12 °C for refraction; at 50° that
    # changes the zenith by well under 0.001°.
    record = {"id": "spa", "time": "2003-10-17T12:30:30-07:00", "lat": 39.742476, "lon": -105.1786,
              "elevation_m": 1830.14, "pressure_hpa": 820}
    result = post(exact, {"records": [record]}).get_json()["results"][0]
    assert result["solar_zenith_deg"] == pytest.approx(50.11162, abs=1e-3)
    assert result["solar_azimuth_deg"] == pytest.approx(194.34024, abs=1e-3)
    assert result["pressure_hpa"] == 820


def test_uv_index_is_40_times_the_erythemal_irradiance(exact):
    # WMO/WHO, Global Solar UV Index: A Practical Guide (2002): UVI = 40 m² W⁻¹ × E_ery.
    result = one(exact)
    assert result["uv_index"] == pytest.approx(40 * result["effective_w_m2"]["erythema"], rel=1e-12)


@pytest.mark.parametrize("time, lat, ozone", [
    ("2026-06-21T12:00:00Z", 0.0, 300),
    ("2026-06-21T12:00:00Z", 45.0, 350),
    ("2026-03-20T12:00:00Z", 60.0, 300),
])
def test_clear_sky_uv_index_agrees_with_the_madronich_closed_form(exact, time, lat, ozone):
    # Madronich (2007), Photochem. Photobiol. 83:1537: clear-sky sea-level UVI ≈
    # 12.5 μ0^2.42 (Ω/300 DU)^-1.23. An approximation (its stated spread is about ±10 %
    # for moderate zenith angles, from memory); we allow 20 % end to end.
    result = one(exact, time=time, lat=lat, lon=0.0, elevation_m=0, ozone_du=ozone)
    mu0 = math.cos(math.radians(result["solar_zenith_deg"]))
    expected = 12.5 * mu0 ** 2.42 * (ozone / 300) ** -1.23
    assert result["uv_index"] == pytest.approx(expected, rel=0.20)


def test_no_uv_with_the_sun_below_the_horizon(client):
    # Common practice, no source: at local midnight in mid-latitudes nothing reaches the ground.
    result = one(client, time="2026-06-21T00:30:00+02:00")
    assert result["solar_zenith_deg"] > 90
    assert result["uv_index"] == 0 and result["uvb_w_m2"] == 0 and result["uva_w_m2"] == 0
    assert result["exposure_category"] == "low"


def test_the_cloud_factor_scales_the_result_and_is_reported(client):
    clear, cloudy = one(client), one(client, cloud_factor=0.5)
    assert cloudy["cloud_factor"] == 0.5 and clear["cloud_factor"] == 1.0
    assert cloudy["uv_index"] == pytest.approx(0.5 * clear["uv_index"], rel=1e-9)
    enhanced = one(client, cloud_factor=1.5)  # broken-cloud enhancement is legitimate input
    assert enhanced["uv_index"] == pytest.approx(1.5 * clear["uv_index"], rel=1e-9)


def test_ozone_climatology_option_picks_the_column_and_the_cache_keeps_them_apart(client):
    # The 1979 fit by name, on the same records and the same (cached) app: in mid-October
    # at 80 S the observed default has the Antarctic depletion (below 220 DU, the common-
    # practice threshold), the fit does not, so the fit's answer has less UV.
    polar = {"time": "2026-10-15T12:00:00Z", "lat": -80.0, "lon": 0.0}
    records = [{**ORCHARD}, polar]
    default = post(client, {"records": records}).get_json()["results"]
    fit = post(client, {"records": records, "ozone_climatology": "van_heuklon_1979"}).get_json()["results"]
    again = post(client, {"records": records}).get_json()["results"]
    assert default[1]["ozone_du"] < 220.0 < 300.0 < fit[1]["ozone_du"]
    assert fit[1]["uv_index"] < 0.8 * default[1]["uv_index"]
    assert again == default
    csv = client.post(URL + "?ozone_climatology=van_heuklon_1979", data="time,lat,lon\n2026-10-15T12:00:00Z,-80,0\n",
                      content_type="text/csv", headers={"Accept": "text/csv"})
    assert csv.status_code == 200 and f"{fit[1]['ozone_du']:.3f}"[:5] in csv.get_data(as_text=True)


def test_more_ozone_means_less_uvb_and_the_used_values_are_reported(client):
    # Facts of the trade (common practice, no source): ozone absorbs UVB, barely UVA.
    thin, thick = one(client, ozone_du=250), one(client, ozone_du=400)
    assert thin["ozone_source"] == "client" and thin["ozone_du"] == 250
    assert thick["uvb_w_m2"] < 0.8 * thin["uvb_w_m2"]
    assert thick["uva_w_m2"] == pytest.approx(thin["uva_w_m2"], rel=0.05)
    assert one(client)["ozone_source"] == "climatology"


def test_surface_type_sets_the_albedo_used(client):
    assert one(client, surface_type="fresh_snow")["surface_albedo"] == pytest.approx(0.88)
    assert one(client, surface_albedo=0.3)["surface_albedo"] == 0.3


# --- layouts -----------------------------------------------------------------------------

def _records(n):
    times = ["2026-06-21T08:00:00+02:00", "2026-06-21T13:30:00+02:00", "2026-12-21T13:30:00+01:00"]
    return [{"id": f"tree-{i}", **ORCHARD, "time": times[i % 3], "lat": 44.0 + 0.01 * i} for i in range(n)]


def test_results_come_back_in_request_order_with_ids(client):
    response = post(client, {"records": _records(7)})
    body = response.get_json()
    assert [r["id"] for r in body["results"]] == [f"tree-{i}" for i in range(7)]
    assert body["spectra"] == ["erythema", "actinic_icnirp", "plant_damage"]  # the documented default
    assert "not medical or occupational-health advice" in body["caution"]
    assert set(body["results"][0]["effective_w_m2"]) == set(body["spectra"])


@pytest.mark.parametrize("cache", ["memory", "off"])
def test_the_column_layout_gives_the_same_numbers_as_rows(make_app, contract_client_for, cache):
    client = contract_client_for(make_app(UVDOSE_CACHE=cache))
    records = _records(5)
    rows = post(client, {"records": records, "spectra": ["dna_damage", "uva"]}).get_json()["results"]
    columns = {name: [r[name] for r in records] for name in records[0]}
    body = post(client, {"columns": columns, "spectra": ["dna_damage", "uva"], "include_spectrum": True}).get_json()
    out = body["columns"]
    assert out["id"] == [r["id"] for r in rows]
    # The second request also asks for the spectrum, so it is weighted from the spectrum
    # where the first took the weighted integrals: the two paths agree within 0.5 %
    # (tests/models/test_weighted_table.py).
    assert out["uv_index"] == pytest.approx([r["uv_index"] for r in rows], rel=5e-3)
    assert out["effective_w_m2.dna_damage"] == pytest.approx([r["effective_w_m2"]["dna_damage"] for r in rows],
                                                             rel=5e-3)
    assert out["effective_w_m2.uva"] == pytest.approx([r["effective_w_m2"]["uva"] for r in rows], rel=5e-3)
    assert len(out["spectrum_w_m2_nm"]) == 5 and len(out["spectrum_w_m2_nm"][0]) == len(body["wavelength_nm"])


def test_include_spectrum_adds_the_grid_and_a_spectrum_consistent_with_the_bands(exact):
    client = exact
    body = post(client, {"records": _records(2), "include_spectrum": True, "spectra": ["erythema"]}).get_json()
    wavelength = np.array(body["wavelength_nm"])
    np.testing.assert_array_equal(wavelength, np.arange(280, 401))
    for result in body["results"]:
        spectrum = np.array(result["spectrum_w_m2_nm"])
        assert spectrum.shape == (121,)
        bands = spectrum @ weight_matrix(["uvb", "uva", "erythema"], wavelength)
        assert bands == pytest.approx([result["uvb_w_m2"], result["uva_w_m2"],
                                       result["effective_w_m2"]["erythema"]], rel=1e-9)
    assert "spectrum_w_m2_nm" not in post(client, {"records": _records(1)}).get_json()["results"][0]


# --- validation ----------------------------------------------------------------------------

def _errors(response):
    assert response.status_code == 422, response.get_json()
    assert response.mimetype == "application/problem+json"
    return response.get_json()["errors"]


def test_a_bad_record_rejects_the_whole_batch_naming_index_id_field_and_reason(client):
    records = _records(5)
    records[3] = {**records[3], "id": "parcel-7", "lat": 91}
    errors = _errors(post(client, {"records": records}))
    assert errors == [{"index": 3, "id": "parcel-7", "field": "lat", "reason": "must be between -90 and 90"}]


@pytest.mark.parametrize("field, value, reason", [
    ("lon", 180.5, "must be between -180 and 180"),
    ("ozone_du", 49, "must be between 50 and 700"),
    ("ozone_du", 701, "must be between 50 and 700"),
    ("pressure_hpa", 299.9, "must be between 300 and 1100"),
    ("elevation_m", 9001, "must be between -500 and 9000"),
    ("surface_albedo", -0.01, "must be between 0 and 1"),
    ("cloud_factor", 1.51, "must be between 0 and 1.5"),
    ("lat", "44.0", "must be a number"),
    ("lat", True, "must be a number"),
    ("time", "2026-06-21T13:30:00", "must carry a UTC offset, e.g. 2026-05-20T12:00:00+02:00 or ...Z"),
    ("time", "21/06/2026 13:30", "must be an ISO 8601 date-time string"),
    ("time", "1949-12-31T23:59:59Z", "must be from 1950-01-01T00:00:00Z up to, not including, 2101-01-01T00:00:00Z"),
    ("time", "2101-01-01T00:00:00Z", "must be from 1950-01-01T00:00:00Z up to, not including, 2101-01-01T00:00:00Z"),
    ("id", 17, "must be a string"),
    ("sun_hours", 3, "is not a field of this record"),
])
def test_each_declared_rule_is_enforced(client, field, value, reason):
    errors = _errors(post(client, {"records": [{**ORCHARD, "id": "r", field: value}]}))
    assert errors == [{"index": 0, "id": None if field == "id" else "r", "field": field, "reason": reason}]


@pytest.mark.parametrize("field, value", [
    ("lat", 90), ("lat", -90), ("lon", 180), ("cloud_factor", 1.5), ("cloud_factor", 0),
    ("ozone_du", 50), ("ozone_du", 700), ("time", "2100-12-31T23:59:59Z"), ("time", "1950-01-01T00:00:00Z"),
    ("elevation_m", -500), ("ozone_du", None),
])
def test_range_ends_are_accepted_not_clamped(client, field, value):
    result = one(client, **{field: value})
    if field == "ozone_du" and value is not None:
        assert result["ozone_du"] == value
    if field == "cloud_factor":
        assert result["cloud_factor"] == value


def test_missing_required_fields_unknown_spectra_and_both_albedos_are_all_listed(client):
    records = [{"id": "a", "lat": 1}, {**ORCHARD, "id": "b", "surface_albedo": 0.1, "surface_type": "grass"},
               {**ORCHARD, "id": "c", "surface_type": "lava"}]
    errors = _errors(post(client, {"records": records, "spectra": ["erythema", "tan"]}))
    fields = {(e["index"], e["field"]) for e in errors}
    assert {(None, "spectra[1]"), (0, "time"), (0, "lon"), (1, "surface_type"), (2, "surface_type")} == fields
    assert any("lava" in e["reason"] and "fresh_snow" in e["reason"] for e in errors)


@pytest.mark.parametrize("body, status", [
    ({"records": []}, 422),
    ({"records": {"lat": 1}}, 422),
    ({"records": [ORCHARD], "columns": {"lat": [1]}}, 422),
    ({"spectra": ["erythema"]}, 422),
    ({"records": [ORCHARD], "include_spectrum": "yes"}, 422),
    ({"records": [ORCHARD], "spectra": []}, 422),
    ({"records": [ORCHARD], "colour": "red"}, 422),
    ({"columns": {"time": [ORCHARD["time"]], "lat": [1, 2], "lon": [1]}}, 422),
    ({"columns": {"time": [ORCHARD["time"]], "lat": [1]}}, 422),
    ([ORCHARD], 400),
])
def test_malformed_envelopes_are_problems_not_crashes(client, body, status):
    response = post(client, body)
    assert response.status_code == status
    assert response.get_json()["status"] == status


def test_not_json_wrong_media_type_and_unacceptable_accept(client):
    assert client.post(URL, data=b"{not json", content_type="application/json").status_code == 400
    assert client.post(URL, data=b"lat=1", content_type="application/x-www-form-urlencoded").status_code == 415
    assert post(client, {"records": [ORCHARD]}, headers={"Accept": "image/png"}).status_code == 406


def test_too_many_records_is_a_413_problem(make_app, contract_client_for):
    client = contract_client_for(make_app(UVDOSE_MAX_RECORDS=3))
    response = post(client, {"records": _records(4)})
    assert response.status_code == 413
    assert response.get_json()["max_records"] == 3
    assert post(client, {"records": _records(3)}).status_code == 200


def test_a_body_over_the_size_limit_is_a_413_problem(make_app, contract_client_for):
    client = contract_client_for(make_app(MAX_CONTENT_LENGTH=2000))
    response = post(client, {"records": _records(40)})
    assert response.status_code == 413
    assert response.mimetype == "application/problem+json"


# --- the column check and marshmallow agree -------------------------------------------------

def _fuzzed_records(rng, n):
    choices = {
        "lat": [0, 45.5, 90, 90.0001, -91, "1", None, True, 1e400 if False else 1e308],
        "lon": [0, 180, -180, 180.1, 3.5],
        "ozone_du": [None, 50, 49.99, 700, 700.5, 300],
        "cloud_factor": [None, 0, 1.5, 1.5001, -0.1, 1],
        "surface_albedo": [None, 0, 1, 1.2],
        "surface_type": [None, "grass", "lava", 3],
        "time": ["2026-01-01T00:00:00Z", "2026-01-01T00:00:00", "x", 5, "2100-12-31T23:59:59+00:00",
                 "1950-01-01T00:00:00+01:00"],
        "elevation_m": [None, -500, 9000, 9000.5, float("inf")],
    }
    records = []
    for _ in range(n):
        record = {name: values[rng.integers(len(values))] for name, values in choices.items()}
        records.append({k: v for k, v in record.items() if v is not None or rng.random() < 0.5})
    return records


def test_vectorised_checks_flag_exactly_the_records_marshmallow_rejects():
    schema = IrradianceRecordSchema()
    records = _fuzzed_records(np.random.default_rng(20261202), 400)
    expected_bad = set()
    for index, record in enumerate(records):
        try:
            schema.load({k: v for k, v in record.items() if v is not None})
        except Exception:
            expected_bad.add(index)
    assert 50 < len(expected_bad) < 400  # the sample exercises both verdicts
    names = set().union(*records)
    raw = {name: [r.get(name) for r in records] for name in names}
    with pytest.raises(Problem) as caught:
        validate_columns(raw, schema, n=len(records))
    flagged = {error.index for error in caught.value.errors}
    assert flagged == expected_bad
    assert not any(error.reason == "rejected by the column check" for error in caught.value.errors)


# --- the cache -------------------------------------------------------------------------------

@pytest.mark.redis
def test_repeated_cells_are_served_from_redis_with_the_same_numbers(make_app, contract_client_for, redis_client,
                                                                   redis_url):
    from uvdose.service import metrics

    client = contract_client_for(make_app(REDIS_URL=redis_url, UVDOSE_CACHE="redis"))
    def count(event):
        return metrics.CACHE_EVENTS.labels(event=event)._value.get()

    first = post(client, {"records": _records(6)}).get_json()["results"]
    hits, misses = count("hit"), count("miss")
    second = post(client, {"records": _records(6)}).get_json()["results"]
    assert count("hit") > hits and count("miss") == misses  # every cell of the repeat was stored
    assert [r["uv_index"] for r in second] == pytest.approx([r["uv_index"] for r in first], rel=1e-6)
    assert redis_client.keys(b"uvdose:*")  # the cache wrote to Redis


def test_problem_types_tell_record_errors_from_option_errors(client):
    options_only = post(client, {"records": [ORCHARD], "spectra": ["sunburn"]}).get_json()
    assert options_only["type"] == "urn:uvdose:problem:invalid-options"
    both = post(client, {"records": [{**ORCHARD, "lat": 100}], "spectra": ["sunburn"]}).get_json()
    assert both["type"] == "urn:uvdose:problem:invalid-records"
    assert {e["field"] for e in both["errors"]} == {"spectra[0]", "lat"}
    assert post(client, [1]).get_json()["type"] == "urn:uvdose:problem:malformed-body"


def test_the_vectorised_time_reader_agrees_with_python_fromisoformat():
    # Reference: CPython's datetime.fromisoformat (3.11) and datetime.timestamp().
    from uvdose.service.time_text import parse_offset_datetime, unix_seconds_of_canonical_times

    rng = np.random.default_rng(11)
    texts = []
    for _ in range(5000):
        y, m, d = rng.integers(1, 10000), rng.integers(0, 14), rng.integers(0, 33)
        h, mi, s = rng.integers(0, 25), rng.integers(0, 61), rng.integers(0, 61)
        tail = rng.choice(["Z", "+05:30", "-09:00", f"+{rng.integers(0, 25):02d}:{rng.integers(0, 61):02d}",
                           "z", "+0200", ""])
        texts.append(f"{y:04d}-{m:02d}-{d:02d}T{h:02d}:{mi:02d}:{s:02d}{tail}")
    texts += ["2000-02-29T12:00:00Z", "1900-02-29T12:00:00Z", "2026-06-21 12:00:00Z", "0000-01-01T00:00:00Z"]
    seconds, read = unix_seconds_of_canonical_times(texts)
    assert 1000 < read.sum() < len(texts)  # both outcomes exercised
    for text, value, was_read in zip(texts, seconds, read):
        try:
            expected = parse_offset_datetime(text)
        except ValueError:
            expected = None
        if was_read:
            assert value == expected, text
    # With the per-entry fallback for what it leaves, the column check reads every text as Python does.
    from uvdose.service.column_checks import ColumnRule, _check_time

    column, bad = _check_time(ColumnRule(wire="time", column="t", kind="time", required=True), texts, len(texts))
    for text, value, rejected in zip(texts, column, bad):
        try:
            expected = parse_offset_datetime(text)
        except ValueError:
            expected = None
        assert rejected if expected is None else (not rejected and value == expected), text


def test_nested_values_in_any_field_are_errors_not_crashes(exact):
    records = [{**ORCHARD, "time": ["2026"], "lat": [1], "surface_type": [None, None], "id": {"a": 1}},
               {**ORCHARD, "time": {"t": 1}}]
    errors = _errors(post(exact, {"records": records}))
    assert {(e["index"], e["field"]) for e in errors} == {(0, "time"), (0, "lat"), (0, "surface_type"), (0, "id"),
                                                          (1, "time")}
    columns = {"time": [[ORCHARD["time"]]], "lat": [[44.0]], "lon": [4.9]}
    assert {e["field"] for e in _errors(post(exact, {"columns": columns}))} == {"time", "lat"}


def test_an_operator_ozone_grid_in_the_app_config_is_used_and_named(tmp_path, make_app, contract_client_for):
    # Invented demo grid over the orchard's region: a flat 321 DU for two days.
    grid = tmp_path / "combe_basse_ozone.csv"
    lines = ["date,latitude_deg,longitude_deg,ozone_du"]
    for date in ("2026-06-20", "2026-06-21", "2026-06-22"):
        for lat in (43.0, 45.0):
            for lon in (4.0, 6.0):
                lines.append(f"{date},{lat},{lon},321")
    grid.write_text("\n".join(lines) + "\n")
    client = contract_client_for(make_app(UVDOSE_OZONE_GRIDS=str(grid), UVDOSE_CACHE="memory"))
    result = one(client)
    assert result["ozone_source"] == "grid:combe_basse_ozone.csv"
    assert result["ozone_du"] == pytest.approx(321)
    assert one(client, ozone_du=280)["ozone_source"] == "client"  # the client's value comes first


# --- cloud factor from a measured global irradiance ------------------------------------

def _clear_sky_ghi(record=ORCHARD):
    """Broadband clear-sky GHI at a record by pvlib's simplified Solis model (Ineichen 2008;
    reference library), with the SPA zenith from pvlib, the standard-atmosphere pressure and
    the day's extraterrestrial irradiance (pvlib's Spencer 1971 distance, at Solis' 1364 W m-2)."""
    import pandas as pd
    from pvlib import atmosphere, clearsky, irradiance, solarposition

    time = pd.DatetimeIndex([record["time"]])
    pressure_pa = atmosphere.alt2pres(record["elevation_m"])
    zenith = solarposition.get_solarposition(time, record["lat"], record["lon"], record["elevation_m"],
                                             pressure=pressure_pa)["apparent_zenith"].iloc[0]
    dni_extra = float(irradiance.get_extra_radiation(time, solar_constant=1364.0).iloc[0])
    return float(clearsky.simplified_solis(90.0 - zenith, pressure=pressure_pa, dni_extra=dni_extra)["ghi"])


def test_a_measured_global_irradiance_sets_the_cloud_factor_to_the_clear_sky_index(exact):
    # Clear-sky index K = GHI_measured / GHI_clear applied to UV (Thiel et al. 1997):
    # half the clear-sky GHI halves the UV Index; a clear-sky reading leaves it alone.
    clear = _clear_sky_ghi()
    reference = one(exact)
    at_clear, at_half = (one(exact, measured_ghi_w_m2=clear * k) for k in (1.0, 0.5))
    assert at_clear["cloud_factor"] == pytest.approx(1.0, abs=0.01)
    assert at_half["cloud_factor"] == pytest.approx(0.5, abs=0.005)
    assert at_half["uv_index"] == pytest.approx(at_half["cloud_factor"] * reference["uv_index"], rel=1e-9)


def test_an_implausible_measurement_or_one_beside_a_cloud_factor_is_rejected(exact):
    morning = {**ORCHARD, "time": "2026-06-21T08:00:00+02:00"}
    response = post(exact, {"records": [{**morning, "id": "station-1",
                                         "measured_ghi_w_m2": 1.6 * _clear_sky_ghi(morning)}]})
    assert response.status_code == 422
    error, = response.get_json()["errors"]
    assert (error["index"], error["id"], error["field"]) == (0, "station-1", "measured_ghi_w_m2")
    assert "clear-sky" in error["reason"]
    response = post(exact, {"records": [{**ORCHARD, "measured_ghi_w_m2": 500.0, "cloud_factor": 0.5}]})
    assert response.status_code == 422
    assert response.get_json()["errors"][0]["field"] in ("measured_ghi_w_m2", "cloud_factor")


def test_a_measurement_with_the_sun_too_low_leaves_the_sky_clear(exact):
    # Below 5° solar elevation the clear-sky index is not determinable (common practice).
    low_sun = {**ORCHARD, "time": "2026-06-21T05:40:00+02:00"}
    response = post(exact, {"records": [{**low_sun, "measured_ghi_w_m2": 20.0}]})
    assert response.status_code == 200
    assert response.get_json()["results"][0]["cloud_factor"] == 1.0


# --- the bound on full-solve records -----------------------------------------------------

@pytest.mark.parametrize("ssa", [0, 1e-6, 0.001])
def test_a_nearly_non_scattering_aerosol_is_answered(exact, ssa):
    # The schema allows any single scattering albedo in [0, 1] with asymmetry up to 0.95;
    # a purely absorbing aerosol (soot-like) is the low end of that range.
    result = one(exact, aod_550=1.0, single_scattering_albedo=ssa, asymmetry_factor=0.95)
    assert result["uv_index"] > 0


def test_records_beyond_the_full_solve_bound_are_a_413_problem_not_a_timeout(make_app, contract_client_for):
    # A strongly absorbing aerosol (soot-like) lies outside the precomputed tables, so each
    # such daytime record takes the full solve (~100 records/s per core); the bound keeps a
    # request within time. A client aerosol inside the tables' range does not count.
    client = contract_client_for(make_app(UVDOSE_CACHE="off", UVDOSE_MAX_FULL_SOLVE_RECORDS=2))
    hazy = {**ORCHARD, "angstrom_exponent": 0.9, "single_scattering_albedo": 0.3}
    own = {**ORCHARD, "angstrom_exponent": 0.9, "single_scattering_albedo": 0.88, "aod_550": 0.6,
           "pressure_hpa": 350, "ozone_du": 60}
    assert post(client, {"records": [own] * 50}).status_code == 200
    assert post(client, {"records": [hazy, hazy]}).status_code == 200
    response = post(client, {"records": [hazy, hazy, hazy, ORCHARD]})
    assert response.status_code == 413
    body = response.get_json()
    assert body["type"] == "urn:uvdose:problem:too-many-full-solve-records"
    assert body["max_full_solve_records"] == 2 and "3 records" in body["detail"]
    # Records the table covers do not count against the bound.
    assert post(client, {"records": [ORCHARD] * 5 + [hazy]}).status_code == 200
