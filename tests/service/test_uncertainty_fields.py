"""Each irradiance and dose answer carries its uncertainty, by source, on every layout.

Every response here also passes through the contract check in conftest.py (the
schemas of openapi.yaml: IrradianceUncertainty, DoseUncertainty)."""
import csv
import io
import json

import numpy as np
import pytest

from uvdose.models import uncertainty

URL = "/v1/irradiance"
# Demo scenario of our own: the "Combe Basse" orchard cooperative (invented), block B.
ORCHARD = {"id": "block-b", "time": "2026-06-21T13:30:00+02:00", "lat": 44.05, "lon": 4.92}
NIGHT = {"id": "night", "time": "2026-06-21T01:30:00+02:00", "lat": 44.05, "lon": 4.92}


@pytest.fixture
def exact(make_app, contract_client_for):
    return contract_client_for(make_app(UVDOSE_CACHE="off"))


def _rows(client, records, **options):
    response = client.post(URL, json={"records": records, "spectra": ["erythema", "plant_damage"], **options})
    assert response.status_code == 200, response.get_json()
    return response.get_json()


def test_every_daytime_answer_carries_a_positive_finite_uncertainty_and_night_zero(exact):
    body = _rows(exact, [ORCHARD, NIGHT])
    assert "1-sigma relative" in body["uncertainty_basis"] and "upper bound" in body["uncertainty_basis"]
    day, night = (r["uncertainty"] for r in body["results"])
    assert 0.0 < day["uv_index"] < 1.0 and all(0.0 < v < 1.0 for v in day["effective_w_m2"].values())
    assert day["uv_index"] == pytest.approx(np.sqrt(sum(v * v for v in day["components"].values())))
    assert day["cloud_source"] == "none" and day["components"]["clouds"] == 0.0 and day["components"]["cache"] == 0.0
    assert day["ozone_relative"] > uncertainty.CLIENT_OZONE_SIGMA
    assert night["uv_index"] == 0.0 and set(night["effective_w_m2"].values()) == {0.0}


def test_it_shrinks_with_what_the_client_sends_and_names_the_cloud_source(exact):
    default = _rows(exact, [ORCHARD])["results"][0]["uncertainty"]
    given = _rows(exact, [{**ORCHARD, "ozone_du": 330, "aod_550": 0.12, "surface_albedo": 0.03,
                           "cloud_factor": 0.9}])["results"][0]["uncertainty"]
    assert given["cloud_source"] == "factor" and given["ozone_relative"] == uncertainty.CLIENT_OZONE_SIGMA
    for component in ("ozone", "aerosol", "surface_albedo"):
        assert given["components"][component] < default["components"][component]
    assert given["uv_index"] < default["uv_index"]
    measured = _rows(exact, [{**ORCHARD, "measured_ghi_w_m2": 500}])["results"][0]
    assert measured["uncertainty"]["cloud_source"] == "irradiance"
    assert measured["uncertainty"]["components"]["clouds"] >= uncertainty.IRRADIANCE_CMF_SIGMA


def test_the_cache_adds_its_cell_error(client, exact):
    cached = _rows(client, [ORCHARD])["results"][0]["uncertainty"]
    assert cached["components"]["cache"] == uncertainty.CACHE_RELATIVE_SIGMA["uv_index"]
    assert _rows(exact, [ORCHARD])["results"][0]["uncertainty"]["components"]["cache"] == 0.0


def test_columns_and_csv_carry_the_same_figures(exact):
    rows = _rows(exact, [ORCHARD])["results"][0]["uncertainty"]
    columns = exact.post(URL, json={"columns": {"time": [ORCHARD["time"]], "lat": [ORCHARD["lat"]],
                                                "lon": [ORCHARD["lon"]]},
                                    "spectra": ["erythema", "plant_damage"]}).get_json()["columns"]
    assert columns["uncertainty.uv_index"] == [rows["uv_index"]]
    assert columns["uncertainty.components.ozone"] == [rows["components"]["ozone"]]
    text = exact.post(URL + "?spectra=erythema,plant_damage", data="time,lat,lon\n2026-06-21T13:30:00+02:00,44.05,4.92\n",
                      content_type="text/csv", headers={"Accept": "text/csv"}).get_data(as_text=True)
    line = next(csv.DictReader(io.StringIO(text)))
    assert float(line["uncertainty.effective_w_m2.plant_damage"]) == pytest.approx(rows["effective_w_m2"]["plant_damage"])
    assert line["uncertainty.cloud_source"] == "none"


def _post(client, path, body):
    response = client.post(path, data=json.dumps(body), content_type="application/json")
    assert response.status_code == 200, response.get_data(as_text=True)[:500]
    return response.get_json()


def test_window_doses_cover_costs_more_than_a_factor(client):
    window = {"start": "2026-06-10T08:00:00+02:00", "end": "2026-06-10T16:00:00+02:00", "lat": 44.31, "lon": 4.62}
    body = _post(client, "/v1/doses/windows", {"records": [{**window, "cloud_cover": 0.75},
                                                           {**window, "cloud_factor": 0.6}, window]})
    by_cover, by_factor, clear = (r["uncertainty"] for r in body["results"])
    assert (by_cover["cloud_source"], by_factor["cloud_source"], clear["cloud_source"]) == ("cover", "factor", "none")
    assert by_cover["clouds"]["erythema"] > by_factor["clouds"]["erythema"] > 0.0
    assert clear["clouds"]["erythema"] == 0.0
    assert by_cover["dose_j_m2"]["erythema"] > by_factor["dose_j_m2"]["erythema"] > 0.0


def test_field_days_and_season_totals(client):
    body = _post(client, "/v1/doses/fields", {
        "records": [{"id": "north-plot", "lat": 52.1, "lon": 5.2}],
        "first_day": "2026-05-01", "last_day": "2026-05-07", "spectra": ["erythema"],
        "daily": {"field": [0], "day": ["2026-05-02"], "cloud_oktas": [6]}})
    days = body["results"][0]["days"]
    assert days[1]["uncertainty"]["cloud_source"] == "cover" and days[0]["uncertainty"]["cloud_source"] == "none"
    daily_ozone = [d["uncertainty"]["ozone"]["erythema"] for d in days]
    season_ozone = [d["season_total_uncertainty"]["ozone"]["erythema"] for d in days]
    assert season_ozone[0] == pytest.approx(daily_ozone[0]) and season_ozone[-1] < 0.6 * np.mean(daily_ozone)


def test_route_doses_carry_uncertainty(client):
    points = [{"lat": 45.75, "lon": 4.85, "time": "2026-07-14T09:00:00+02:00"},
              {"lat": 45.80, "lon": 4.90, "time": "2026-07-14T10:00:00+02:00"}]
    result = _post(client, "/v1/doses/routes", {"routes": [{"id": "van", "points": points}]})["results"][0]
    assert 0.0 < result["uncertainty"]["dose_j_m2"]["erythema"] < 1.0
