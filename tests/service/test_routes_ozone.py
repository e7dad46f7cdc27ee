"""POST /v1/ozone: the ozone column the engine uses, per record, held to openapi.yaml."""
import json
import urllib.request

import numpy as np
import pytest

from uvdose.models.ozone_climatology import climatological_ozone_du, day_of_year_from_unix
from uvdose.models.ozone_grids import OzoneResolver

from tests.service.conftest import record_errors as _errors

ROUTE = "/v1/ozone"


def _unix(iso):
    return float(np.datetime64(iso, "s").astype("int64"))


def _write_grid(path):
    # An invented grid for a demo scenario of our own: a regional daily product over
    # the Low Countries for three April days (values are not data).
    lines = ["date,latitude_deg,longitude_deg,ozone_du"]
    for day, base in (("2026-04-13", 350.0), ("2026-04-14", 360.0), ("2026-04-15", 340.0)):
        for lat in (50.0, 52.0):
            for lon in (3.0, 6.0):
                lines.append(f"{day},{lat},{lon},{base + (lat - 50.0) * 5 + (lon - 3.0)}")
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.fixture
def grid_app(make_app, tmp_path):
    return make_app(UVDOSE_OZONE_GRIDS=str(_write_grid(tmp_path / "lowlands_april.csv")))


def test_climatology_values_for_instants_and_dates(client):
    records = [
        {"id": "orchard", "lat": 36.0, "lon": -122.0, "date": "2026-07-04"},
        {"id": "depot", "lat": -33.9, "lon": 18.4, "time": "2026-10-15T14:00:00+02:00"},
        {"lat": 0.0, "lon": 179.9, "time": "2026-01-01T00:00:00Z"},
    ]
    response = client.post(ROUTE, json={"records": records})
    assert response.status_code == 200
    body = response.get_json()
    assert "not measurements" in body["caution"] and "medical" in body["caution"]
    assert body["ozone_grids"] == []
    results = body["results"]
    assert [r["id"] for r in results] == ["orchard", "depot", None]
    assert [r["time"] for r in results] == ["2026-07-04T12:00:00Z", "2026-10-15T12:00:00Z", "2026-01-01T00:00:00Z"]
    times = np.array([_unix(r["time"].rstrip("Z")) for r in results])
    expected = climatological_ozone_du([36.0, -33.9, 0.0], [-122.0, 18.4, 179.9], day_of_year_from_unix(times))
    assert [r["ozone_du"] for r in results] == expected.tolist()
    assert {r["ozone_source"] for r in results} == {"climatology"}
    assert body["ozone_climatology"] == "observed"
    # The 1979 fit by name: Van Heuklon (1979) at 36 N 122 W early July is about
    # 321 DU (worked value, see tests/models/test_ozone_climatology.py); the table
    # interpolant is within 2 DU.
    fit = client.post(ROUTE, json={"records": records, "ozone_climatology": "van_heuklon_1979"}).get_json()
    assert fit["ozone_climatology"] == "van_heuklon_1979"
    assert fit["results"][0]["ozone_du"] == pytest.approx(321.2, abs=2.0)
    unknown = client.post(ROUTE, json={"records": records, "ozone_climatology": "tabulated"})
    assert unknown.status_code == 422 and "unknown ozone climatology" in unknown.get_data(as_text=True)


def test_operator_grid_then_climatology_and_same_resolver(grid_app, contract_client_for):
    client = contract_client_for(grid_app)
    records = [
        {"id": "inside", "lat": 51.0, "lon": 4.5, "time": "2026-04-14T12:00:00Z"},
        {"id": "halfway", "lat": 51.0, "lon": 4.5, "time": "2026-04-15T00:00:00Z"},
        {"id": "after", "lat": 51.0, "lon": 4.5, "date": "2026-04-16"},
        {"id": "outside", "lat": 48.0, "lon": 4.5, "date": "2026-04-14"},
    ]
    body = client.post(ROUTE, json={"records": records}).get_json()
    sources = [r["ozone_source"] for r in body["results"]]
    assert sources == ["grid:lowlands_april.csv", "grid:lowlands_april.csv", "climatology", "climatology"]
    ozone = [r["ozone_du"] for r in body["results"]]
    # bilinear at the cell centre of the 14th: 360 + 1*5 + 1.5 = 366.5; halfway to the
    # 15th (346.5 there): 356.5
    assert ozone[:2] == pytest.approx([366.5, 356.5])
    assert body["ozone_grids"][0]["source"] == "grid:lowlands_april.csv"
    assert body["ozone_grids"][0]["start"] == "2026-04-13T00:00:00Z"

    resolver = grid_app.extensions["uvdose_ozone"]
    assert isinstance(resolver, OzoneResolver)
    times = [_unix("2026-04-14T12:00:00"), _unix("2026-04-15T00:00:00"), _unix("2026-04-16T12:00:00"),
             _unix("2026-04-14T12:00:00")]
    direct, labels = resolver.resolve([51.0, 51.0, 51.0, 48.0], [4.5] * 4, times)
    assert ozone == direct.tolist() and sources == labels.tolist()


def test_the_engine_uses_the_same_values(grid_app, contract_client_for):
    engine = pytest.importorskip("uvdose.models.engine")
    client = contract_client_for(grid_app)
    lat, lon = np.array([51.0, 48.0]), np.array([4.5, 4.5])
    t = np.array([_unix("2026-04-14T11:00:00"), _unix("2026-04-14T11:00:00")])
    body = client.post(ROUTE, json={"columns": {"lat": lat.tolist(), "lon": lon.tolist(),
                                                "time": ["2026-04-14T11:00:00Z"] * 2}}).get_json()
    conditions = engine.Conditions.from_columns({"time_unix_s": t, "latitude_deg": lat, "longitude_deg": lon})
    result = engine.compute(conditions, ozone_resolver=grid_app.extensions["uvdose_ozone"])
    assert body["columns"]["ozone_du"] == result.ozone_du.tolist()
    assert body["columns"]["ozone_source"] == list(result.ozone_source)


def test_columns_in_columns_out(client):
    body = client.post(ROUTE, json={"columns": {"id": ["a", None], "lat": [10.0, -45.0], "lon": [20.0, 30.0],
                                                "date": ["2026-03-01", None],
                                                "time": [None, "2026-10-15T00:00:00-03:00"]}}).get_json()
    assert set(body["columns"]) == {"id", "time", "ozone_du", "ozone_source"}
    assert body["columns"]["id"] == ["a", None]
    assert body["columns"]["time"] == ["2026-03-01T12:00:00Z", "2026-10-15T03:00:00Z"]


def test_csv_in_csv_out(client):
    csv_body = "id,lat,lon,date\nfield-1,44.1,4.8,2026-05-20\nfield-2,44.2,4.9,2026-05-21\n"
    response = client.post(ROUTE, data=csv_body, content_type="text/csv", headers={"Accept": "text/csv"})
    assert response.status_code == 200 and response.mimetype == "text/csv"
    lines = response.get_data(as_text=True).strip().splitlines()
    assert lines[0] == "id,time,ozone_du,ozone_source,caution"
    assert lines[1].startswith("field-1,2026-05-20T12:00:00Z,") and ",climatology," in lines[1]
    assert len(lines) == 3


def test_bad_records_name_index_id_and_field(client):
    records = [
        {"id": "ok", "lat": 10.0, "lon": 10.0, "date": "2026-01-01"},
        {"id": "no-when", "lat": 10.0, "lon": 10.0},
        {"id": "both", "lat": 10.0, "lon": 10.0, "date": "2026-01-01", "time": "2026-01-01T00:00:00Z"},
        {"id": "bad-date", "lat": 10.0, "lon": 10.0, "date": "2026-02-30"},
        {"id": "short-date", "lat": 10.0, "lon": 10.0, "date": "2026-2-3"},
        {"id": "no-offset", "lat": 10.0, "lon": 10.0, "time": "2026-01-01T10:00:00"},
        {"id": "too-early", "lat": 10.0, "lon": 10.0, "time": "1949-12-31T23:00:00Z"},
    ]
    errors = _errors(client.post(ROUTE, json={"records": records}))
    assert errors == {
        (1, "no-when", "date"): "give time or date, exactly one",
        (2, "both", "time"): "give time or date, exactly one",
        (3, "bad-date", "date"): "must be an ISO 8601 date YYYY-MM-DD from 1950-01-01 to 2100-12-31",
        (4, "short-date", "date"): "must be an ISO 8601 date YYYY-MM-DD from 1950-01-01 to 2100-12-31",
        (5, "no-offset", "time"): "must carry a UTC offset, e.g. 2026-05-20T12:00:00+02:00 or ...Z",
        (6, "too-early", "time"): (
            "must be an ISO 8601 date-time from 1950-01-01T00:00:00Z up to, not including, 2101-01-01T00:00:00Z"
        ),
    }


def test_bad_place_fields_are_named(client):
    records = [
        {"id": "north", "lat": 91.0, "lon": 0.0, "date": "2026-01-01"},
        {"id": "text", "lat": 10.0, "lon": "east", "date": "2026-01-01"},
        {"id": "extra", "lat": 10.0, "lon": 0.0, "date": "2026-01-01", "ozone": 300},
    ]
    errors = _errors(client.post(ROUTE, json={"records": records}))
    assert errors[(0, "north", "lat")] == "must be between -90 and 90"
    assert errors[(1, "text", "lon")] == "must be a number"
    assert errors[(2, "extra", "ozone")] == "is not a field of this record"


def test_envelope_errors(client, make_app, contract_client_for):
    assert client.post(ROUTE, data="lat=1", content_type="text/plain").status_code == 415
    assert client.post(ROUTE, data="{not json", content_type="application/json").status_code == 400
    assert client.post(ROUTE, json={"records": [], "x": 1}).status_code == 422
    small = contract_client_for(make_app(UVDOSE_MAX_RECORDS=2))
    records = [{"lat": 0.0, "lon": 0.0, "date": "2026-01-01"}] * 3
    assert small.post(ROUTE, json={"records": records}).status_code == 413
    assert client.post(ROUTE, json={"records": records[:1]}, headers={"Accept": "image/png"}).status_code == 406


def test_unreadable_operator_grid_fails_at_start_up(make_app, tmp_path):
    from uvdose.models.ozone_grids import OzoneGridError

    bad = tmp_path / "broken.csv"
    bad.write_text("date,latitude_deg,longitude_deg,ozone_du\n2026-04-13,50,3,0.35\n")
    with pytest.raises(OzoneGridError, match=r"broken\.csv line 2, column ozone_du"):
        make_app(UVDOSE_OZONE_GRIDS=str(bad))


def test_grids_named_in_the_environment_reach_the_app_and_the_offline_batch(monkeypatch, tmp_path):
    # README "Total ozone": UVDOSE_OZONE_GRIDS, comma-separated, tried in order.
    from uvdose.service import engine_gateway
    from uvdose.service.app import create_app

    first = _write_grid(tmp_path / "lowlands_april.csv")
    second = _write_grid(tmp_path / "lowlands_copy.csv")
    monkeypatch.setenv("UVDOSE_OZONE_GRIDS", f"{first}, {second}")
    expected = ["grid:lowlands_april.csv", "grid:lowlands_copy.csv"]
    app = create_app({"TESTING": True})
    assert [grid.label for grid in app.extensions["uvdose_ozone"].grids] == expected
    assert [grid.label for grid in engine_gateway.offline().ozone_resolver.grids] == expected
    monkeypatch.setenv("UVDOSE_OZONE_GRIDS", "")
    assert create_app({"TESTING": True}).extensions["uvdose_ozone"].grids == []


@pytest.mark.gunicorn
def test_served_by_gunicorn(gunicorn_server):
    payload = json.dumps({"records": [{"id": "g", "lat": 45.0, "lon": 7.0, "date": "2026-06-21"}]}).encode()
    request = urllib.request.Request(gunicorn_server + ROUTE, data=payload,
                                     headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(request, timeout=30) as reply:
        body = json.loads(reply.read())
    expected = climatological_ozone_du(45.0, 7.0, day_of_year_from_unix(_unix("2026-06-21T12:00:00")))[0]
    assert body["results"][0]["ozone_du"] == expected
    assert body["results"][0]["ozone_source"] == "climatology"


def test_irradiance_endpoint_reports_the_same_ozone(make_app, contract_client_for):
    # With the grid-cell cache off the irradiance endpoint computes at the exact inputs;
    # the ozone it reports using must then be the value this endpoint gives. (With the
    # cache on it computes, and reports, the ozone of the cell centre.)
    client = contract_client_for(make_app(UVDOSE_CACHE="off"))
    records = [
        {"id": "a", "lat": 48.2, "lon": 16.4, "time": "2026-03-21T10:00:00Z"},
        {"id": "b", "lat": -23.5, "lon": -46.6, "time": "2026-12-21T15:00:00-03:00"},
    ]
    ozone = client.post(ROUTE, json={"records": records}).get_json()["results"]
    irradiance = client.post("/v1/irradiance", json={"records": records, "spectra": ["erythema"]})
    assert irradiance.status_code == 200
    used = irradiance.get_json()["results"]
    assert [r["ozone_du"] for r in used] == [r["ozone_du"] for r in ozone]
    assert [r["ozone_source"] for r in used] == [r["ozone_source"] for r in ozone]


def test_time_and_date_columns_may_mix_records(client):
    columns = {"id": ["a", "b", "c"], "lat": [10.0, 10.0, 10.0], "lon": [0.0, 0.0, 0.0],
               "time": [None, "2026-03-01T06:00:00-03:00", None], "date": ["2026-03-01", None, None]}
    errors = _errors(client.post(ROUTE, json={"columns": columns}))
    assert errors == {(2, "c", "date"): "give time or date, exactly one"}
    columns["date"][2] = "2026-03-02"
    body = client.post(ROUTE, json={"columns": columns}).get_json()
    assert body["columns"]["time"] == ["2026-03-01T12:00:00Z", "2026-03-01T09:00:00Z", "2026-03-02T12:00:00Z"]
