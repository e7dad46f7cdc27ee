"""CSV in and out of POST /v1/irradiance: same field names, same numbers as JSON."""
import csv
import io

import pytest

URL = "/v1/irradiance"

# Demo scenario of our own: the invented "Vaubrise" parcel depot's morning van stops.
STOPS_CSV = (
    "id,time,lat,lon,elevation_m,cloud_factor,surface_type\n"
    "van-3/stop-1,2026-07-14T09:10:00+02:00,45.7485,4.8467,170,,asphalt\n"
    "van-3/stop-2,2026-07-14T09:40:00+02:00,45.7612,4.8590,175,0.7,\n"
    "van-3/stop-3,2026-07-14T10:05:00+02:00,45.7702,4.8803,180,1.2,concrete\n"
)


def post_csv(client, text, accept="text/csv", query=""):
    return client.post(URL + query, data=text.encode(), content_type="text/csv", headers={"Accept": accept})


def parse(response):
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.mimetype == "text/csv"
    return list(csv.DictReader(io.StringIO(response.get_data(as_text=True))))


def test_csv_in_csv_out_has_one_line_per_record_and_the_documented_header(client):
    rows = parse(post_csv(client, STOPS_CSV, query="?spectra=erythema,actinic_icnirp"))
    assert [row["id"] for row in rows] == ["van-3/stop-1", "van-3/stop-2", "van-3/stop-3"]
    assert list(rows[0]) == [
        "id", "solar_zenith_deg", "solar_azimuth_deg", "uv_index", "exposure_category",
        "effective_w_m2.erythema", "effective_w_m2.actinic_icnirp", "uvb_w_m2", "uva_w_m2",
        "ozone_du", "ozone_source", "pressure_hpa", "surface_albedo", "cloud_factor",
        "uncertainty.uv_index", "uncertainty.effective_w_m2.erythema", "uncertainty.effective_w_m2.actinic_icnirp",
        "uncertainty.components.ozone", "uncertainty.components.aerosol", "uncertainty.components.clouds",
        "uncertainty.components.surface_albedo", "uncertainty.components.model", "uncertainty.components.cache",
        "uncertainty.ozone_relative", "uncertainty.cloud_source", "caution"]
    assert [float(row["cloud_factor"]) for row in rows] == [1.0, 0.7, 1.2]  # empty cell = default 1
    assert float(rows[2]["surface_albedo"]) == pytest.approx(0.1)


def test_csv_and_json_give_the_same_numbers(client):
    from_csv = parse(post_csv(client, STOPS_CSV))
    lines = list(csv.DictReader(io.StringIO(STOPS_CSV)))
    records = []
    for line in lines:
        record = {"id": line["id"], "time": line["time"], "lat": float(line["lat"]), "lon": float(line["lon"]),
                  "elevation_m": float(line["elevation_m"])}
        if line["cloud_factor"]:
            record["cloud_factor"] = float(line["cloud_factor"])
        if line["surface_type"]:
            record["surface_type"] = line["surface_type"]
        records.append(record)
    from_json = client.post(URL, json={"records": records}).get_json()["results"]
    for text_row, json_row in zip(from_csv, from_json):
        assert float(text_row["uv_index"]) == json_row["uv_index"]  # repr round-trips exactly
        assert float(text_row["effective_w_m2.plant_damage"]) == json_row["effective_w_m2"]["plant_damage"]


def test_json_body_can_ask_for_csv_back_with_spectra_columns(client):
    body = {"records": [{"time": "2026-07-14T09:10:00+02:00", "lat": 45.75, "lon": 4.85}],
            "spectra": ["uva"], "include_spectrum": True}
    rows = parse(client.post(URL, json=body, headers={"Accept": "text/csv"}))
    assert "spectrum_w_m2_nm.280" in rows[0] and "spectrum_w_m2_nm.400" in rows[0]
    # Practically nothing at 280 nm reaches the ground (common practice, no source).
    assert float(rows[0]["spectrum_w_m2_nm.280"]) < 1e-9 * float(rows[0]["spectrum_w_m2_nm.400"])
    assert rows[0]["id"] == ""


def test_csv_errors_name_the_record_line_and_field(client):
    bad = STOPS_CSV.replace("45.7612", "north").replace("0.7,", "1.7,")
    response = post_csv(client, bad)
    assert response.status_code == 422
    assert response.get_json()["errors"] == [
        {"index": 1, "id": "van-3/stop-2", "field": "lat", "reason": "must be a number"},
        {"index": 1, "id": "van-3/stop-2", "field": "cloud_factor", "reason": "must be between 0 and 1.5"},
    ]


@pytest.mark.parametrize("text, status, field", [
    ("id,time,lat,lon,sun_hours\na,2026-07-14T09:10:00Z,45,4,3\n", 422, "sun_hours"),
    ("id,time,lat\na,2026-07-14T09:10:00Z,45\n", 422, "lon"),
    ("id,time,lat,lon\na,2026-07-14T09:10:00Z,45\n", 422, ""),
    ("id,time,lat,lon\na,2026-07-14T09:10:00Z,nan,4\n", 422, "lat"),
    ("id,time,lat,lon\n", 422, "records"),  # no record: as an empty `records` array
    ("", 422, "records"),
    ("time,time,lat,lon\na,b,1,2\n", 400, None),
])
def test_malformed_csv_is_a_problem(client, text, status, field):
    response = post_csv(client, text)
    assert response.status_code == status
    if field is not None:
        assert field in {error["field"] for error in response.get_json()["errors"]}


def test_csv_options_in_the_query_string_are_validated(client):
    response = post_csv(client, STOPS_CSV, query="?spectra=erythema,sunburn&include_spectrum=maybe")
    assert response.status_code == 422
    assert {error["field"] for error in response.get_json()["errors"]} == {"spectra[1]", "include_spectrum"}


def test_a_utf8_byte_order_mark_and_crlf_line_ends_are_accepted(client):
    text = "\ufeff" + STOPS_CSV.replace("\n", "\r\n")
    assert len(parse(post_csv(client, text))) == 3


def test_csv_that_is_not_utf8_is_a_400(client):
    response = client.post(URL, data="id,time,lat,lon\n\xe9,x,1,2\n".encode("latin-1"), content_type="text/csv")
    assert response.status_code == 400


def test_query_options_with_a_json_body_are_refused_not_ignored(client):
    body = {"records": [{"time": "2026-07-14T09:10:00+02:00", "lat": 45.75, "lon": 4.85}]}
    response = client.post(URL + "?spectra=uva", json=body)
    assert response.status_code == 422
    assert [e["field"] for e in response.get_json()["errors"]] == ["spectra"]
