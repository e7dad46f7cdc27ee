"""Strict input: JSON read at one place with bounds, route points and the daily table held
to the record schemas, ids bounded and free of control characters, CSV answers that a
spreadsheet does not run, every time field within 1950-2100 and a route's span bounded.

Each test replays a hostile or careless request and asserts the 4xx problem that names
where the fault is (and never a 5xx)."""
import csv
import io
import json

import pytest

from tests.service.conftest import record_errors as _errors_of
from uvdose.service.json_body import MAX_JSON_DEPTH, MAX_NUMBER_CHARACTERS, parse_json_body
from uvdose.service.problems import Problem
from uvdose.service.record_fields import MAX_ID_CHARACTERS
from uvdose.service.wire_formats import csv_text

ROUTES = "/v1/doses/routes"
FIELDS = "/v1/doses/fields"
# Demo scenario of our own: two fixes of an invented delivery van, 40 minutes apart.
FIXES = [{"time": "2026-07-15T09:00:00Z", "lat": 48.10, "lon": 11.50},
         {"time": "2026-07-15T09:40:00Z", "lat": 48.20, "lon": 11.60}]
FIX_TEXT = json.dumps(FIXES)
SEASON = {"records": [{"lat": 52.1, "lon": 5.2}, {"lat": 52.2, "lon": 5.3}],
          "first_day": "2026-05-01", "last_day": "2026-05-03"}


def _post_raw(client, path, text, content_type="application/json"):
    return client.post(path, data=text.encode("utf-8") if isinstance(text, str) else text,
                       content_type=content_type)


def _detail(response, status=400):
    assert response.status_code == status, response.get_data(as_text=True)
    body = response.get_json()
    assert body["type"] == "urn:uvdose:problem:malformed-body"
    return body["detail"]


def _feature(geometry, properties):
    return {"routes": [{"type": "Feature", "id": "geo", "geometry": geometry, "properties": properties}]}


# --- the eight requests that were 500s ------------------------------------------------


@pytest.mark.parametrize("body, field", [
    (_feature("LINESTRING(11.5 48.1, 11.6 48.2)", {"times": []}), "routes[0]"),
    (_feature({"type": "LineString", "coordinates": [[11.5, 48.1], [11.6, 48.2]]}, [1]), "routes[0]"),
    (_feature({"type": "LineString", "coordinates": [[0], [1]]}, {"times": [f["time"] for f in FIXES]}),
     "routes[0].geometry.coordinates[0]"),
])
def test_malformed_geojson_routes_are_422s_naming_the_member(client, body, field):
    errors = _errors_of(client.post(ROUTES, json=body))
    assert field in {name for (_, _, name) in errors}


@pytest.mark.parametrize("text, where", [
    # A 400-digit latitude: refused before it is read as a number.
    ('{"routes": [{"points": [{"time": "2026-07-15T09:00:00Z", "lat": ' + "1" * 400 + ', "lon": 11.5}]}]}',
     f"line 1 column 65: it has a number longer than {MAX_NUMBER_CHARACTERS} characters"),
    # Arrays 100 000 deep in `points`, objects 100 000 deep in `id` (the second crashed the process).
    ('{"routes": [{"points": ' + "[" * 100_000 + "]" * 100_000 + "}]}",
     f"nests arrays and objects more than {MAX_JSON_DEPTH} deep"),
    ('{"routes": [{"id": ' + '{"a": ' * 100_000 + "1" + "}" * 100_000 + ', "points": []}]}',
     f"nests arrays and objects more than {MAX_JSON_DEPTH} deep"),
    # A lone UTF-16 surrogate in an id (RFC 8259 §8.2), in either half.
    ('{"routes": [{"id": "van\\ud800", "points": ' + FIX_TEXT + "}]}", "line 1 column 24: it has an unpaired UTF-16"),
    ('{"routes": [{"id": "\\udc00van", "points": ' + FIX_TEXT + "}]}", "line 1 column 21: it has an unpaired UTF-16"),
])
def test_unbounded_json_is_a_400_naming_the_line_and_column(client, text, where):
    assert where in _detail(_post_raw(client, ROUTES, text))


def test_a_daily_field_index_of_two_to_the_63_is_a_422(client):
    body = dict(SEASON, daily={"field": [2 ** 63, 1], "day": ["2026-05-01", "2026-05-01"]})
    assert _errors_of(client.post(FIELDS, json=body)) == {(None, None, "daily.field[0]"): "must be a record index 0–1"}


def test_paired_surrogates_escaped_backslashes_and_deep_enough_bodies_are_read():
    assert parse_json_body(b'{"id": "\\ud83d\\ude90 van \\\\ud800"}') == {"id": "\U0001F690 van \\ud800"}
    deepest = b"[" * MAX_JSON_DEPTH + b"]" * MAX_JSON_DEPTH
    assert parse_json_body(deepest) is not None
    assert parse_json_body(b'{"lat": ' + b"1" * MAX_NUMBER_CHARACTERS + b'}')["lat"] == int("1" * MAX_NUMBER_CHARACTERS)
    assert parse_json_body(b'{"id": "' + b"[1" * 1000 + b'"}')["id"] == "[1" * 1000  # brackets in a string are text


# --- route input held to the schemas; counts, media types, ids, duplicate keys ----------


def test_duplicate_json_keys_are_refused_not_last_one_wins(client):
    text = '{"routes": [{"points": ' + FIX_TEXT + '}], "step_s": 60, "step_s": 600}'
    assert "line 1 column 1: it names the member 'step_s' twice in one object" in _detail(_post_raw(client, ROUTES, text))
    nested = '{"routes": [{"points": [{"time": "2026-07-15T09:00:00Z", "lat": 48.1, "lat": 51.5, "lon": 11.5}]}]}'
    assert "line 1 column 25: it names the member 'lat' twice" in _detail(_post_raw(client, ROUTES, nested))
    with pytest.raises(Problem, match="NaN"):
        parse_json_body(b'{"lat": NaN}')


def test_route_input_is_checked_like_records(client, make_app, contract_client_for):
    typed = [dict(FIXES[0], lat="51.5"), dict(FIXES[1], lon=True)]
    assert _errors_of(client.post(ROUTES, json={"routes": [{"id": "v", "points": typed}]})) == {
        (0, "v", "routes[0].points[0].lat"): "must be a number", (0, "v", "routes[0].points[1].lon"): "must be a number"}
    assert _errors_of(client.post(ROUTES, json={"routes": [{"id": "v", "points": []}]})) == {
        (0, "v", "routes[0].points"): "needs at least two points"}
    response = client.post(ROUTES, data=json.dumps({"routes": [{"points": FIXES}]}), content_type="text/plain")
    assert response.status_code == 415
    small = contract_client_for(make_app(UVDOSE_MAX_RECORDS=3))
    response = small.post(ROUTES, json={"routes": [{"points": FIXES}] * 4})
    assert response.status_code == 413 and response.get_json()["type"] == "urn:uvdose:problem:too-many-records"
    assert response.get_json()["max_records"] == 3


@pytest.mark.parametrize("route_id, reason", [
    ("x" * (MAX_ID_CHARACTERS + 1), f"must be at most {MAX_ID_CHARACTERS} characters"),
    ("van\x00-3", "must not hold control characters (U+0000 at position 3)"),
    ("van\r\n=1", "must not hold control characters (U+000D at position 3)"),
    ("van\x9b", "must not hold control characters (U+009B at position 3)"),
])
def test_ids_are_bounded_and_free_of_control_characters_and_not_echoed_when_refused(client, route_id, reason):
    errors = _errors_of(client.post(ROUTES, json={"routes": [{"id": route_id, "points": FIXES}]}))
    assert errors == {(0, None, "routes[0].id"): reason}
    window = {"id": route_id, "start": FIXES[0]["time"], "end": FIXES[1]["time"], "lat": 48.1, "lon": 11.5}
    assert _errors_of(client.post("/v1/doses/windows", json={"records": [window]})) == {(0, None, "id"): reason}


def test_error_count_counts_every_error_of_the_daily_table(client):
    n = 450  # more than any list cap of the past (100 per kind), fewer than fields × days
    daily = {"field": [5] * n, "day": ["2026-05-01"] * n}
    response = client.post(FIELDS, json=dict(SEASON, last_day="2026-12-31", daily=daily))
    body = response.get_json()
    assert response.status_code == 422 and body["error_count"] == n and len(body["errors"]) == n
    small = {"field": [0, 0, 7, 0], "day": ["2026-05-01", "2026-05-01", "2026-05-02", "2026-06-01"]}
    assert _errors_of(client.post(FIELDS, json=dict(SEASON, daily=small))) == {
        (None, None, "daily.field[2]"): "must be a record index 0–1",
        (None, None, "daily.day[3]"): "must lie between first_day and last_day",
        (None, None, "daily.day[1]"): "repeats a field and day given before"}


def test_error_count_is_not_capped_with_the_listed_errors(make_app, contract_client_for):
    capped = contract_client_for(make_app(UVDOSE_MAX_ERRORS_LISTED=10))
    daily = {"field": [9] * 50, "day": ["2026-05-02"] * 50}
    body = capped.post(FIELDS, json=dict(SEASON, last_day="2026-12-31", daily=daily)).get_json()
    assert (body["error_count"], len(body["errors"])) == (50, 10)


# --- CSV answers a spreadsheet does not run ------------------------------------------


@pytest.mark.parametrize("record_id", ["=cmd|' /C calc'!A0", "+1+1", "-2+3", "@SUM(A1)"])
def test_csv_answers_neutralise_formula_cells(client, record_id):
    record = {"id": record_id, "time": "2026-07-14T09:10:00+02:00", "lat": 45.75, "lon": 4.85}
    for path in ("/v1/irradiance", "/v1/ozone"):
        response = client.post(path, json={"records": [record]}, headers={"Accept": "text/csv"})
        assert response.status_code == 200, response.get_data(as_text=True)
        (row,) = csv.DictReader(io.StringIO(response.get_data(as_text=True)))
        assert row["id"] == "'" + record_id  # OWASP's rule: a leading single quote
    response = client.post("/v1/irradiance", json={"records": [record]})  # JSON answers carry the id as sent
    assert response.get_json()["results"][0]["id"] == record_id


def test_csv_text_cells_with_a_tab_or_cr_lead_are_quoted_too():
    text = csv_text({"id": ["\tx", "\rx", "ok", "'=already", None], "n": [1.5, -2.0, 3, 4, float("nan")]})
    assert text == "id,n\n'\tx,1.5\n'\rx,-2.0\nok,3\n'=already,4\n,\n"  # numbers stay numbers


def test_csv_ids_with_control_characters_are_refused_at_input(client):
    text = "id,time,lat,lon\nvan\x00,2026-07-14T09:10:00+02:00,45.75,4.85\n"
    errors = _errors_of(client.post("/v1/irradiance", data=text.encode(), content_type="text/csv"))
    assert errors == {(0, None, "id"): "must not hold control characters (U+0000 at position 3)"}


# --- time ranges and the span of a route ---------------------------------------------


def test_a_two_point_route_over_two_centuries_is_refused_before_any_sample(client):
    far = [dict(FIXES[0], time="1900-01-01T00:00:00Z"), dict(FIXES[1], time="2100-01-01T00:00:00Z")]
    errors = _errors_of(client.post(ROUTES, json={"routes": [{"id": "far", "points": far}], "step_s": 10}))
    assert errors[(0, "far", "routes[0].points[0].time")] == \
        "must be from 1950-01-01T00:00:00Z up to, not including, 2101-01-01T00:00:00Z"
    # 32 days: were the bound lost, the work would stay modest (276 480 samples at 10 s).
    long = [dict(FIXES[0], time="2026-07-01T00:00:00Z"), dict(FIXES[1], time="2026-08-02T00:00:00Z")]
    feature = {"type": "Feature", "id": "geo", "geometry": {"type": "LineString", "coordinates": [[11.5, 48.1], [11.6, 48.2]]},
               "properties": {"times": ["2026-07-01T00:00:00Z", "2026-08-01T00:00:01Z"]}}
    errors = _errors_of(client.post(ROUTES, json={"routes": [{"id": "long", "points": long}, feature], "step_s": 10}))
    assert errors == {
        (0, "long", "routes[0].points[1].time"): "the route may span at most 31 days from its first point to its last; "
                                                  "it spans 32.0 days",
        (1, "geo", "routes[1].properties.times[1]"): "the route may span at most 31 days from its first point to its "
                                                      "last; it spans 31.0 days"}


def test_routes_whose_points_are_not_objects_are_named_not_a_500(client):
    # Found by schemathesis against a live gunicorn: when no point of any route is an
    # object, there is no time column at all, and the span check read a missing column.
    errors = _errors_of(client.post(ROUTES, json={"routes": [{"id": "van-9", "points": ["a", "b"]},
                                                             {"id": "van-10", "points": ["", 3]}]}))
    assert errors == {(0, "van-9", "routes[0].points[0]"): "must be an object",
                      (0, "van-9", "routes[0].points[1]"): "must be an object",
                      (1, "van-10", "routes[1].points[0]"): "must be an object",
                      (1, "van-10", "routes[1].points[1]"): "must be an object"}


@pytest.mark.parametrize("path, body, field", [
    (ROUTES, {"routes": [{"points": [dict(FIXES[0], time="1949-12-31T23:59:59Z"), FIXES[1]]}]},
     "routes[0].points[0].time"),
    ("/v1/doses/windows", {"records": [{"start": "2026-07-15T09:00:00Z", "end": "2101-01-01T00:00:00Z",
                                        "lat": 48.1, "lon": 11.5}]}, "end"),
    ("/v1/ozone", {"records": [{"date": "1949-12-31", "lat": 48.1, "lon": 11.5}]}, "date"),
    ("/v1/irradiance", {"records": [{"time": "1949-12-31T23:59:00+00:01", "lat": 48.1, "lon": 11.5}]}, "time"),
    (FIELDS, dict(SEASON, daily={"field": [0], "day": ["1949-12-31"]}), "daily.day[0]"),
    (FIELDS, dict(SEASON, first_day="1949-12-31", last_day="1950-01-02"), "first_day"),
])
def test_every_time_field_is_held_to_1950_2100(client, path, body, field):
    assert field in {name for (_, _, name) in _errors_of(client.post(path, json=body))}


# --- the contract and the service agree (cases schemathesis found) ---------------------


def _schema_validator(openapi_spec, name):
    from openapi_schema_validator import OAS31Validator

    return OAS31Validator({**openapi_spec["components"]["schemas"][name], "components": openapi_spec["components"]})


def test_glazing_and_surface_type_names_are_the_registries_and_an_empty_name_is_refused(client, openapi_spec):
    from uvdose.models.filters import FILTERS
    from uvdose.models.surfaces import SURFACE_TYPES

    schemas = openapi_spec["components"]["schemas"]
    assert set(schemas["GlazingName"]["enum"]) == set(FILTERS)
    assert set(schemas["SurfaceTypeName"]["enum"]) == set(SURFACE_TYPES)
    errors = _errors_of(client.post(ROUTES, json={"routes": [{"points": FIXES}], "glazing": ""}))
    assert [field for (_, _, field) in errors] == ["glazing"]


def test_an_ozone_record_gives_exactly_one_of_time_and_date_null_counting_as_not_given(client, openapi_spec):
    validator = _schema_validator(openapi_spec, "OzoneRecord")
    place = {"lat": 48.1, "lon": 11.5}
    date_only = dict(place, date="2026-07-15", time=None)
    assert validator.is_valid(date_only)
    assert client.post("/v1/ozone", json={"records": [date_only]}).status_code == 200
    for record in (place, dict(place, date="2026-07-15", time="2026-07-15T09:00:00Z"), dict(place, date=None, time=None)):
        assert not validator.is_valid(record)
        assert _errors_of(client.post("/v1/ozone", json={"records": [record]}))


def test_a_csv_body_without_a_record_line_is_a_422_as_an_empty_records_array(client):
    for text in ("", "id,time,lat,lon\n"):
        errors = _errors_of(client.post("/v1/irradiance", data=text.encode(), content_type="text/csv"))
        assert errors == {(None, None, "records"): "a CSV body needs a header line and at least one record line"}
    assert _errors_of(client.post("/v1/irradiance", json={"records": []})) == {
        (None, None, "records"): "must be a non-empty array of objects"}


def test_query_options_beside_a_json_body_stay_a_documented_422(client, openapi_spec):
    (spectra,) = [p for p in openapi_spec["paths"]["/v1/irradiance"]["post"]["parameters"] if p["name"] == "spectra"]
    assert "with a JSON body is a 422" in spectra["description"]
    body = {"records": [{"time": "2026-07-14T09:10:00+02:00", "lat": 45.75, "lon": 4.85}]}
    assert _errors_of(client.post("/v1/irradiance?spectra=", json=body)) == {
        (None, None, "spectra"): "is a query option for CSV bodies; give it in the JSON body"}


def test_any_if_none_match_is_read_and_an_empty_picture_parameter_is_not_given(client):
    assert client.get("/v1/catalogue", headers={"If-None-Match": "x" * 2000}).status_code == 200
    query = "lat=44.05&lon=4.92&date=2026-06-21&surface_type=&glazing=&elevation_m=&id="
    assert client.get("/v1/pictures/uv-index-day?" + query, headers={"Accept": "application/json"}).status_code == 200


def test_almost_no_aerosol_at_low_pressure_is_computed_not_a_500(client):
    # Generated by schemathesis: the aerosol's share of the scattering rounds to 0 there.
    query = "date=2026-04-01&lat=-11.23&lon=-28.64&ozone_du=50&aod_550=1.192092896e-07&pressure_hpa=300&step_min=5"
    response = client.get("/v1/pictures/uv-index-day?" + query, headers={"Accept": "application/json"})
    assert response.status_code == 200, response.get_data(as_text=True)


def test_errors_beyond_the_described_records_are_counted_as_described_ones_would_be(client, monkeypatch):
    from uvdose.service import column_checks

    bad_points = [dict(FIXES[0], lat=91), dict(FIXES[1], lat="x", lon=200), {"lat": 48.1, "lon": 11.5},
                  dict(FIXES[1], stop="yes"), dict(FIXES[0], lat=-91)] * 3
    records = [{"time": "2026-07-15T09:00:00Z", "lat": 91, "lon": 1, "surface_albedo": 0.1, "surface_type": "grass"},
               {"time": "2026-07-15T09:00:00Z", "lat": 45, "lon": 1, "surface_albedo": 0.1, "surface_type": "grass"},
               {"lat": 45, "lon": 1, "ozone_du": 20}] * 4
    requests = [(ROUTES, {"routes": [{"id": "a", "points": bad_points}, {"id": "b", "points": FIXES},
                                     {"id": "c", "points": bad_points[::-1]}]}),
                ("/v1/irradiance", {"records": records}),
                (FIELDS, dict(SEASON, daily={"field": [0, 1, 1.5, 0], "day": ["2026-05-01", "x", "2026-05-02", None]}))]
    for path, body in requests:
        described = client.post(path, json=body).get_json()
        monkeypatch.setattr(column_checks, "DESCRIBED_RECORDS_AT_MOST", 2)
        counted = client.post(path, json=body).get_json()
        monkeypatch.undo()
        assert counted["error_count"] == described["error_count"] > len(counted["errors"]), path
        assert counted["detail"] == described["detail"]
        assert all(error in described["errors"] for error in counted["errors"])
