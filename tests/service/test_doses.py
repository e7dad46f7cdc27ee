"""POST /v1/doses/windows, /fields, /routes: contract, errors that name the record and
field, and the physics facts that survive the HTTP layer."""
import json
import urllib.request

import numpy as np
import pytest

from tests.service.conftest import record_errors as _errors_of

WINDOW = {"id": "crew-1", "start": "2026-06-10T08:00:00+02:00", "end": "2026-06-10T12:00:00+02:00",
          "lat": 44.31, "lon": 4.62, "ozone_du": 320}


def _post(client, path, body):
    return client.post(path, data=json.dumps(body), content_type="application/json")


def _problem_fields(response):
    assert response.mimetype == "application/problem+json"
    return [(e["index"], e["id"], e["field"]) for e in response.get_json()["errors"]]


def test_window_dose_is_additive_and_carries_caution(client):
    split = [dict(WINDOW, id="a", end="2026-06-10T10:00:00+02:00"),
             dict(WINDOW, id="b", start="2026-06-10T10:00:00+02:00")]
    r = _post(client, "/v1/doses/windows", {"records": [WINDOW, *split], "step_s": 1200})
    assert r.status_code == 200
    body = r.get_json()
    assert "not medical" in body["caution"]
    whole, a, b = (row["dose_j_m2"]["erythema"] for row in body["results"])
    assert whole == pytest.approx(a + b, rel=1e-9)
    row = body["results"][0]
    # 1 SED = 100 J m⁻² (CIE S 007); skin type I MED 200 J m⁻² (planning figure).
    assert row["standard_erythemal_doses"] == pytest.approx(whole / 100.0)
    assert row["med_fraction"]["I"] == pytest.approx(whole / 200.0)
    assert row["icnirp_limit_fraction"] == pytest.approx(row["dose_j_m2"]["actinic_icnirp"] / 30.0)


def test_window_cloud_cover_lowers_the_dose(client):
    clear = dict(WINDOW, id="clear")
    overcast = dict(WINDOW, id="overcast", cloud_oktas=8)
    body = _post(client, "/v1/doses/windows", {"records": [clear, overcast], "step_s": 1800}).get_json()
    d_clear, d_overcast = (row["dose_j_m2"]["erythema"] for row in body["results"])
    # Kasten & Czeplak (1980) form at 8 oktas: CMF 0.25.
    assert d_overcast == pytest.approx(0.25 * d_clear, rel=1e-9)
    assert body["results"][1]["cloud_factor"] == pytest.approx(0.25)


@pytest.mark.parametrize("change,field", [
    ({"end": "2026-06-10T07:00:00+02:00"}, "end"),
    ({"cloud_oktas": 9}, "cloud_oktas"),
    ({"cloud_oktas": 2.5}, "cloud_oktas"),
    ({"tilt_deg": 200}, "tilt_deg"),
    ({"start": "2026-06-10T08:00:00"}, "start"),
])
def test_window_errors_name_record_and_field(client, change, field):
    r = _post(client, "/v1/doses/windows", {"records": [WINDOW, dict(WINDOW, id="bad", **change)]})
    assert r.status_code == 422
    assert (1, "bad", field) in _problem_fields(r)


def test_window_two_cloud_inputs_rejected(client):
    r = _post(client, "/v1/doses/windows", {"records": [dict(WINDOW, cloud_factor=0.5, cloud_cover=0.5)]})
    assert r.status_code == 422
    assert r.get_json()["errors"][0]["index"] == 0


def test_unknown_glazing_and_bad_curve_are_option_errors(client):
    r = _post(client, "/v1/doses/windows", {"records": [WINDOW], "glazing": "sunroof"})
    assert r.status_code == 422 and (None, None, "glazing") in _problem_fields(r)
    r = _post(client, "/v1/doses/windows", {"records": [WINDOW],
                                            "transmittance_curve": {"wavelength_nm": [300, 400],
                                                                    "transmittance": [0.0, 1.0]}})
    assert r.status_code == 422 and "must cover 280–400 nm" in r.get_json()["errors"][0]["reason"]


def test_a_transmittance_curve_has_at_most_2000_nodes(client):
    nodes = np.linspace(280, 400, 2001).tolist()
    r = _post(client, "/v1/doses/windows", {"records": [WINDOW], "transmittance_curve": {
        "wavelength_nm": nodes, "transmittance": [0.5] * len(nodes)}})
    assert {field for _, _, field in _problem_fields(r)} == {"transmittance_curve.wavelength_nm",
                                                           "transmittance_curve.transmittance"}
    r = _post(client, "/v1/doses/windows", {"records": [WINDOW], "transmittance_curve": {
        "wavelength_nm": nodes[:2000:2] + [400.0], "transmittance": [0.5] * 1001}})
    assert r.status_code == 200


def test_field_season_sums_and_clear_sky_ratio(client):
    body = {"records": [{"id": "north-plot", "lat": 52.1, "lon": 5.2, "surface_type": "grass"}],
            "first_day": "2026-05-01", "last_day": "2026-05-03", "step_s": 1800,
            "daily": {"field": [0], "day": ["2026-05-02"], "cloud_factor": [0.6]}}
    r = _post(client, "/v1/doses/fields", body)
    assert r.status_code == 200
    days = r.get_json()["results"][0]["days"]
    assert [d["day"] for d in days] == ["2026-05-01", "2026-05-02", "2026-05-03"]
    daily = [d["dose_j_m2"]["plant_damage"] for d in days]
    assert [d["season_total_j_m2"]["plant_damage"] for d in days] == pytest.approx(np.cumsum(daily))
    assert [d["ratio_to_clear_sky"]["erythema"] for d in days] == pytest.approx([1.0, 0.6, 1.0])
    # Almanac fact (from memory): early May at 52° N, sunrise about 04:10 UTC (06:10 CEST).
    assert days[0]["sunrise"].startswith("2026-05-01T04:")


def test_field_errors_name_the_daily_entry(client):
    body = {"records": [{"lat": 52.1, "lon": 5.2}], "first_day": "2026-05-01", "last_day": "2026-05-02",
            "daily": {"field": [3], "day": ["2026-06-01"]}}
    r = _post(client, "/v1/doses/fields", body)
    assert r.status_code == 422
    fields = {f for _, _, f in _problem_fields(r)}
    assert {"daily.field[0]", "daily.day[0]"} <= fields
    r = _post(client, "/v1/doses/fields", {"records": [{"lat": 52.1, "lon": 5.2}],
                                           "first_day": "2026-05-03", "last_day": "2026-05-01"})
    assert r.status_code == 422 and (None, None, "last_day") in _problem_fields(r)


DELIVERY = [
    {"time": "2026-07-15T09:00:00Z", "lat": 48.10, "lon": 11.50},
    {"time": "2026-07-15T09:40:00Z", "lat": 48.20, "lon": 11.60, "stop": True},
    {"time": "2026-07-15T10:00:00Z", "lat": 48.20, "lon": 11.60},
    {"time": "2026-07-15T10:45:00Z", "lat": 48.05, "lon": 11.75},
]


def test_route_points_and_geojson_agree_and_stops_are_reported(client):
    feature = {"type": "Feature", "id": "van-geo",
               "geometry": {"type": "LineString", "coordinates": [[p["lon"], p["lat"]] for p in DELIVERY]},
               "properties": {"times": [p["time"] for p in DELIVERY],
                              "stops": [bool(p.get("stop")) for p in DELIVERY]}}
    r = _post(client, "/v1/doses/routes", {"routes": [{"id": "van", "points": DELIVERY}, feature],
                                           "glazing": "open_window"})
    assert r.status_code == 200
    a, b = r.get_json()["results"]
    assert a["dose_j_m2"]["erythema"] == pytest.approx(b["dose_j_m2"]["erythema"], rel=1e-12)
    assert (a["driving_s"], a["parked_s"], a["gap_s"]) == (5100.0, 1200.0, 0.0)
    assert r.get_json()["glazing"] == "open_window"


def test_windscreen_and_side_glass_facts_through_the_api(client):
    # Common practice: laminated glass blocks ≥ 98 % of erythemal UV; side glass most UVB.
    doses = {}
    for glazing in ("open_window", "clear_side_glass", "laminated_windscreen"):
        r = _post(client, "/v1/doses/routes", {"routes": [{"id": "v", "points": DELIVERY}], "glazing": glazing})
        doses[glazing] = r.get_json()["results"][0]["dose_j_m2"]["erythema"]
    assert doses["laminated_windscreen"] <= 0.02 * doses["open_window"]
    assert doses["clear_side_glass"] < 0.5 * doses["open_window"]


def test_a_route_needs_two_points_whatever_its_form(client):
    feature = {"type": "Feature", "id": "one-geo", "geometry": {"type": "LineString", "coordinates": [[0.0, 51.5]]},
               "properties": {"times": [DELIVERY[0]["time"]]}}
    r = _post(client, "/v1/doses/routes", {"routes": [{"id": "empty", "points": []},
                                                      {"id": "one", "points": DELIVERY[:1]}, feature]})
    assert _errors_of(r) == {(0, "empty", "routes[0].points"): "needs at least two points",
                             (1, "one", "routes[1].points"): "needs at least two points",
                             (2, "one-geo", "routes[2].geometry.coordinates"): "needs at least two points"}


def test_route_errors_name_route_and_field(client):
    backwards = [dict(DELIVERY[0]), dict(DELIVERY[0], lat=48.2)]
    r = _post(client, "/v1/doses/routes", {"routes": [{"id": "ok", "points": DELIVERY},
                                                      {"id": "late", "points": backwards}]})
    assert r.status_code == 422
    # The engine's route checks name the value by its place in the body, as the schema's do.
    assert _errors_of(r) == {(1, "late", "routes[1].points[1].time"): "must be later than the previous point's"}
    feature = {"type": "Feature", "id": "late-geo",
               "geometry": {"type": "LineString", "coordinates": [[p["lon"], p["lat"]] for p in backwards]},
               "properties": {"times": [p["time"] for p in backwards]}}
    still = {"id": "parked", "points": [dict(DELIVERY[0]), dict(DELIVERY[0], time="2026-07-15T09:10:00Z")]}
    r = _post(client, "/v1/doses/routes", {"routes": [feature, still]})
    assert _errors_of(r) == {
        (0, "late-geo", "routes[0].properties.times[1]"): "must be later than the previous point's"}
    r = _post(client, "/v1/doses/routes", {"routes": [{"id": "ok", "points": DELIVERY}, still]})
    assert _errors_of(r) == {(1, "parked", "routes[1]"): "has all its points at one position, so the "
                             "heading (and the driver-side window) is unknown"}
    r = _post(client, "/v1/doses/routes", {"routes": [{"id": "x", "points": DELIVERY}], "driver_side": "middle"})
    assert r.status_code == 422 and (None, None, "driver_side") in _problem_fields(r)
    r = _post(client, "/v1/doses/routes", {"routes": [{"id": "x", "points": [dict(DELIVERY[0], time="09:00")]
                                                       + DELIVERY[1:]}]})
    assert r.status_code == 422 and r.get_json()["errors"][0]["field"] == "routes[0].points[0].time"


@pytest.mark.redis
def test_windows_through_a_real_redis_cache(make_app, contract_client_for, redis_url, redis_client):
    client = contract_client_for(make_app(REDIS_URL=redis_url))
    first = _post(client, "/v1/doses/windows", {"records": [WINDOW], "step_s": 1800}).get_json()
    assert redis_client.keys(b"uvdose:*")  # the cache wrote to Redis
    second = _post(client, "/v1/doses/windows", {"records": [WINDOW], "step_s": 1800}).get_json()
    assert first["results"] == second["results"]


@pytest.mark.gunicorn
def test_windows_served_by_gunicorn(gunicorn_server):
    request = urllib.request.Request(gunicorn_server + "/v1/doses/windows",
                                     data=json.dumps({"records": [WINDOW], "step_s": 1800}).encode(),
                                     headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(request, timeout=60) as reply:
        body = json.loads(reply.read())
    assert reply.status == 200 and body["results"][0]["dose_j_m2"]["erythema"] > 0


def test_engine_failure_is_a_server_error_not_the_clients(client, monkeypatch):
    from uvdose.models import dose

    def broken(*args, **kwargs):
        def evaluate(columns):
            raise ValueError("internal shape mismatch")
        return evaluate

    monkeypatch.setattr(dose, "engine_evaluator", broken)
    r = _post(client, "/v1/doses/windows", {"records": [WINDOW]})
    assert r.status_code == 500 and r.mimetype == "application/problem+json"


def test_geojson_multipoint_gaps_are_excluded_and_reported(client):
    feature = {"type": "Feature",
               "geometry": {"type": "MultiPoint", "coordinates": [[p["lon"], p["lat"]] for p in DELIVERY]},
               "properties": {"id": "van-gaps", "times": [p["time"] for p in DELIVERY],
                              "gaps": [False, True, False, False]}}
    r = _post(client, "/v1/doses/routes", {"routes": [feature]})
    assert r.status_code == 200
    row = r.get_json()["results"][0]
    assert (row["id"], row["driving_s"], row["parked_s"], row["gap_s"]) == ("van-gaps", 5100.0, 0.0, 1200.0)
    bad = dict(feature, properties=dict(feature["properties"], times=feature["properties"]["times"][:2]))
    r = _post(client, "/v1/doses/routes", {"routes": [bad]})
    assert r.status_code == 422 and r.get_json()["errors"][0]["field"] == "routes[0].properties.times"


def test_route_typos_are_errors_not_ignored(client):
    r = _post(client, "/v1/doses/routes", {"routes": [{"id": "v", "cloud_facter": 0.5, "points": DELIVERY}]})
    assert r.status_code == 422 and r.get_json()["errors"][0]["field"] == "routes[0].cloud_facter"
    points = [dict(DELIVERY[0], latitude=1.0)] + DELIVERY[1:]
    r = _post(client, "/v1/doses/routes", {"routes": [{"id": "v", "points": points}]})
    assert r.status_code == 422 and r.get_json()["errors"][0]["field"] == "routes[0].points[0].latitude"


def test_dose_samples_beyond_the_full_solve_bound_are_a_413_problem(make_app, contract_client_for):
    # 4 h at 30-min steps is 9 samples; a strongly absorbing aerosol (outside the
    # precomputed tables) sends each to the full solve; an ordinary client aerosol does not.
    client = contract_client_for(make_app(UVDOSE_CACHE="off", UVDOSE_MAX_FULL_SOLVE_RECORDS=5))
    hazy = dict(WINDOW, angstrom_exponent=0.9, single_scattering_albedo=0.3)
    own = dict(WINDOW, angstrom_exponent=0.9, single_scattering_albedo=0.85)
    assert _post(client, "/v1/doses/windows", {"records": [own], "step_s": 1800}).status_code == 200
    r = _post(client, "/v1/doses/windows", {"records": [hazy], "step_s": 1800})
    assert r.status_code == 413
    assert r.get_json()["type"] == "urn:uvdose:problem:too-many-full-solve-records"
    assert _post(client, "/v1/doses/windows", {"records": [WINDOW], "step_s": 1800}).status_code == 200


def test_route_points_are_strict_numbers_and_errors_name_route_point_and_field(client):
    # A text latitude and a boolean longitude were once coerced to numbers; both are errors.
    typed = [dict(DELIVERY[0], lat="48.10"), dict(DELIVERY[1], lon=True), DELIVERY[2],
             dict(DELIVERY[3], time="2026-07-15T10:45:00", stop="yes")]
    r = _post(client, "/v1/doses/routes", {"routes": [{"id": "ok", "points": DELIVERY}, {"id": "typed", "points": typed}]})
    assert _errors_of(r) == {
        (1, "typed", "routes[1].points[0].lat"): "must be a number",
        (1, "typed", "routes[1].points[1].lon"): "must be a number",
        (1, "typed", "routes[1].points[3].time"): "must carry a UTC offset, e.g. 2026-05-20T12:00:00+02:00 or ...Z",
        (1, "typed", "routes[1].points[3].stop"): "must be true or false",
    }
    assert r.get_json()["detail"].startswith("1 of 2 route(s)")
    r = _post(client, "/v1/doses/routes", {"routes": [{"id": "v", "points": [DELIVERY[0], 7, *DELIVERY[1:]]}]})
    assert _errors_of(r) == {(0, "v", "routes[0].points[1]"): "must be an object"}


def test_geojson_route_errors_name_the_coordinate_and_the_property(client):
    coordinates = [[p["lon"], p["lat"]] for p in DELIVERY]
    coordinates[2] = [11.6, 91.0]
    coordinates[3] = ["11.75", 48.05]
    times = [p["time"] for p in DELIVERY]
    times[1] = "2026-07-15 09:40"
    feature = {"type": "Feature", "id": "van-geo",
               "geometry": {"type": "LineString", "coordinates": coordinates},
               "properties": {"times": times, "stops": [False, 1, False, False], "ozone_du": 20,
                              "fleet": "north"}}  # other properties of a Feature are its own business
    errors = _errors_of(_post(client, "/v1/doses/routes", {"routes": [feature]}))
    expected = {"properties.ozone_du": "must be between 50 and 700",
                "geometry.coordinates[2][1]": "must be between -90 and 90",
                "geometry.coordinates[3][0]": "must be a number",
                "properties.times[1]": "must carry a UTC offset, e.g. 2026-05-20T12:00:00+02:00 or ...Z",
                "properties.stops[1]": "must be true or false"}
    assert errors == {(0, "van-geo", f"routes[0].{path}"): reason for path, reason in expected.items()}
    short = dict(feature, geometry={"type": "LineString", "coordinates": [[11.5, 48.1], [11.6]]},
                 properties={"times": times[:2]})
    assert _errors_of(_post(client, "/v1/doses/routes", {"routes": [short]})) == {
        (0, "van-geo", "routes[0].geometry.coordinates[1]"): "must be a [longitude, latitude] position"}


def test_route_conditions_are_the_record_fields_with_the_same_ranges(client):
    # One declaration: a route's ozone_du and cloud_factor are refused as a record's are.
    route = {"id": "r", "points": DELIVERY, "ozone_du": 20, "cloud_factor": 1.6, "surface_albedo": "snow"}
    route_errors = _errors_of(_post(client, "/v1/doses/routes", {"routes": [route]}))
    window = dict(WINDOW, id="r", ozone_du=20, cloud_factor=1.6, surface_albedo="snow")
    window_errors = _errors_of(_post(client, "/v1/doses/windows", {"records": [window]}))
    assert route_errors == {(0, "r", f"routes[0].{field}"): reason for (_, _, field), reason in window_errors.items()}
    assert len(route_errors) == 3


def test_daily_entries_are_records_named_by_their_position(client):
    season = {"records": [{"lat": 52.1, "lon": 5.2}, {"lat": 52.2, "lon": 5.3}],
              "first_day": "2026-05-01", "last_day": "2026-05-03"}
    daily = {"field": [0, 1.0, 0, 1], "day": ["2026-05-01", "2026-05-02", "2026-5-3", "2026-05-03"],
             "cloud_factor": [2, None, None, 0.5], "cloud_oktas": [None, None, None, 3], "ozone_du": [300, 300, 40, None]}
    errors = _errors_of(_post(client, "/v1/doses/fields", dict(season, daily=daily)))
    assert errors == {
        (None, None, "daily.cloud_factor[0]"): "must be between 0 and 1.5",
        (None, None, "daily.field[1]"): "must be a whole number",
        (None, None, "daily.day[2]"): "must be an ISO 8601 date YYYY-MM-DD",
        (None, None, "daily.ozone_du[2]"): "must be between 50 and 700",
        (None, None, "daily.cloud_oktas[3]"): "give cloud_factor or cloud_oktas, not both",
    }
    r = _post(client, "/v1/doses/fields", dict(season, daily={"field": [0], "day": ["2026-05-01"], "cloud": [0.5]}))
    assert _errors_of(r) == {(None, None, "daily.cloud"): "is not a column of the daily table"}
    assert r.get_json()["type"] == "urn:uvdose:problem:invalid-options"
    r = _post(client, "/v1/doses/fields", dict(season, daily={"field": [0, 1], "day": ["2026-05-01"]}))
    assert _errors_of(r) == {(None, None, "daily"): "arrays differ in length: [1, 2]"}
    r = _post(client, "/v1/doses/fields", dict(season, daily={"field": [0] * 7, "day": ["2026-05-01"] * 7}))
    assert list(_errors_of(r)) == [(None, None, "daily")]  # more entries than fields × days: refused unread
