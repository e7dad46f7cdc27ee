"""The `weather` table of POST /v1/doses/fields and /windows: answers held to openapi.yaml,
per-day cloud provenance, and errors that name the field, the reading and the reason.

Scenario (invented): the Combe Basse orchard cooperative, block B (44.05° N 4.92° E, 120 m),
its weather mast logging 10-minute global irradiance.
"""
import numpy as np
import pytest

from tests.service.conftest import record_errors
from uvdose.models import weather_series
from uvdose.models.solar_geometry import CIVIL_TWILIGHT_ZENITH_DEG, sunrise_transit_sunset

BLOCK_B = {"id": "combe-basse/block-b", "lat": 44.05, "lon": 4.92, "elevation_m": 120}
JUNE_12 = float(np.datetime64("2026-06-12", "s").astype(np.int64))


def _iso(seconds) -> list[str]:
    return [str(np.datetime64(int(s), "s")) + "Z" for s in seconds]


def _day_of_readings(factor=0.5, start_h=0.0, end_h=24.0):
    t = JUNE_12 + 600.0 * np.arange(1, 145)
    t = t[(t - JUNE_12 > start_h * 3600) & (t - JUNE_12 <= end_h * 3600)]
    clear = weather_series.clear_sky_ghi_mean_w_m2(t - 600.0, t, 44.05, 4.92, 120.0)[0]
    return t, np.round(clear * factor, 2)


def _season(client, weather=None, daily=None, **options):
    body = {"records": [BLOCK_B], "first_day": "2026-06-12", "last_day": "2026-06-13", "spectra": ["erythema"],
            **options}
    if weather is not None:
        body["weather"] = weather
    if daily is not None:
        body["daily"] = daily
    return client.post("/v1/doses/fields", json=body)


def test_a_station_day_sets_the_days_dose_and_says_where_its_clouds_came_from(client):
    clear = _season(client).get_json()["results"][0]["days"]
    t, ghi = _day_of_readings(0.5)
    r = _season(client, {"field": [0] * t.size, "time": _iso(t), "ghi_w_m2": ghi.tolist()},
                daily={"field": [0], "day": ["2026-06-13"], "cloud_oktas": [8]})
    assert r.status_code == 200, r.get_data(as_text=True)
    days = r.get_json()["results"][0]["days"]
    assert days[0]["dose_j_m2"]["erythema"] == pytest.approx(0.5 * clear[0]["dose_j_m2"]["erythema"], rel=2e-3)
    assert days[0]["ratio_to_clear_sky"]["erythema"] == pytest.approx(0.5, rel=2e-3)
    assert days[0]["clouds"] == {"series": "ghi_w_m2", "series_share": 1.0, "outside_series": "clear_sky"}
    # The next day has no reading: its daily okta value (Kasten & Czeplak: 0.25 at 8 oktas).
    assert days[1]["clouds"] == {"series": "ghi_w_m2", "series_share": 0.0, "outside_series": "cloud_oktas"}
    assert days[1]["dose_j_m2"]["erythema"] == pytest.approx(0.25 * clear[1]["dose_j_m2"]["erythema"], rel=1e-6)
    assert clear[0]["clouds"] == {"series": None, "series_share": 0.0, "outside_series": "clear_sky"}


def test_a_gap_is_stated_as_the_share_of_the_day_covered(client):
    t, ghi = _day_of_readings(0.5, start_h=9.0, end_h=12.0)  # three hours of readings
    day = _season(client, {"field": [0] * t.size, "time": _iso(t), "ghi_w_m2": ghi.tolist()}).get_json()
    first = day["results"][0]["days"][0]
    # The dose's day runs from civil dawn to dusk (models.dose).
    dawn, _, dusk, _ = sunrise_transit_sunset(np.array([JUNE_12]), np.array([44.05]), np.array([4.92]),
                                              elevation_deg=90.0 - CIVIL_TWILIGHT_ZENITH_DEG)
    assert first["clouds"]["series_share"] == pytest.approx(3 * 3600 / (dusk - dawn)[0, 0], abs=3e-3)


def test_time_stamp_conventions_and_cover_series(client):
    t = JUNE_12 + 3600.0 * np.arange(6, 20)
    r = _season(client, {"field": [0] * t.size, "time": _iso(t), "cloud_oktas": [4] * t.size},
                weather_time_stamps="interval_middle")
    assert r.status_code == 200
    assert r.get_json()["results"][0]["days"][0]["clouds"]["series"] == "cloud_oktas"


def test_bad_readings_name_the_field_the_entry_and_the_reason(client):
    t, ghi = _day_of_readings(0.5)
    ghi[3] = 250.0  # 00:40 UTC, the sun far below the horizon
    r = _season(client, {"field": [0] * t.size, "time": _iso(t), "ghi_w_m2": ghi.tolist()})
    errors = record_errors(r)
    assert list(errors) == [(0, "combe-basse/block-b", "weather.ghi_w_m2[3]")]
    assert "below the horizon" in errors[(0, "combe-basse/block-b", "weather.ghi_w_m2[3]")]
    times = _iso(t)
    times[10] = times[9]
    errors = record_errors(_season(client, {"field": [0] * t.size, "time": times, "cloud_factor": [0.5] * t.size}))
    assert "out of order or repeated" in errors[(0, "combe-basse/block-b", "weather.time[10]")]


@pytest.mark.parametrize("weather, field, index", [
    ({"field": [0, 0], "time": ["2026-06-12T10:00:00Z", "2026-06-12T10:10:00Z"], "ghi_w_m2": [400, 2000]},
     "weather.ghi_w_m2[1]", 0),
    ({"field": [0, 3], "time": ["2026-06-12T10:00:00Z", "2026-06-12T10:10:00Z"], "cloud_factor": [0.5, 0.5]},
     "weather.field[1]", None),
    ({"field": [0, 0], "time": ["2026-06-12T10:00:00Z", "2026-06-12T10:10:00"], "cloud_factor": [0.5, 0.5]},
     "weather.time[1]", 0),
    ({"field": [0, 0], "time": ["2026-06-12T10:00:00Z", "2026-06-12T10:10:00Z"], "cloud_factor": [0.5, 0.5],
      "cloud_oktas": [None, 3]}, "weather.cloud_factor[1]", 0),
    ({"field": [0, 0], "time": ["2026-06-12T10:00:00Z", "2026-06-12T10:10:00Z"], "cloud_factor": [0.5, None]},
     "weather.time[1]", 0),
    ({"field": [0, 0], "time": ["2026-06-12T10:00:00Z", "2026-06-12T10:10:00Z"], "rain_mm": [0, 0]},
     "weather.rain_mm", None),
])
def test_table_errors_are_named(client, weather, field, index):
    errors = record_errors(_season(client, weather))
    assert any(key[2] == field and key[0] == index for key in errors), errors


def test_too_many_readings_is_a_413_naming_the_setting(make_app, contract_client_for):
    client = contract_client_for(make_app(UVDOSE_MAX_WEATHER_READINGS=5))
    t, ghi = _day_of_readings(0.5, 9.0, 11.0)
    r = _season(client, {"field": [0] * t.size, "time": _iso(t), "ghi_w_m2": ghi.tolist()})
    assert r.status_code == 413
    assert "UVDOSE_MAX_WEATHER_READINGS" in r.get_json()["detail"]
    assert client.get("/v1/catalogue").get_json()["limits"]["max_weather_readings"] == 5


def test_window_series_fills_its_gaps_with_the_windows_own_factor(client):
    t, ghi = _day_of_readings(0.5, 8.0, 12.0)
    window = {"id": "pickers", "start": "2026-06-12T08:00:00Z", "end": "2026-06-12T14:00:00Z",
              "lat": 44.05, "lon": 4.92, "elevation_m": 120}
    plain = client.post("/v1/doses/windows", json={"records": [window], "spectra": ["erythema"]}).get_json()
    r = client.post("/v1/doses/windows", json={
        "records": [dict(window, cloud_factor=0.5)], "spectra": ["erythema"],
        "weather": {"window": [0] * t.size, "time": _iso(t), "ghi_w_m2": ghi.tolist()}})
    assert r.status_code == 200, r.get_data(as_text=True)
    result = r.get_json()["results"][0]
    assert result["clouds"] == {"series": "ghi_w_m2", "series_share": pytest.approx(4 / 6, abs=1e-4),
                                "outside_series": "cloud_factor"}
    assert result["dose_j_m2"]["erythema"] == pytest.approx(0.5 * plain["results"][0]["dose_j_m2"]["erythema"],
                                                            rel=2e-3)
    assert plain["results"][0]["clouds"]["series"] is None
