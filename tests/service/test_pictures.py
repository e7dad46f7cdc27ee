"""The pictures: valid SVG with the structure they promise, and plotted values equal to the
JSON answers for the same request, which equal the batch endpoints' answers.

Scenario (invented, our own): block B of the Combe Basse orchard cooperative.
"""
from __future__ import annotations

import xml.etree.ElementTree as ET

import numpy as np

from tests.service.conftest import record_errors

SVG = "{http://www.w3.org/2000/svg}"
UV_DAY = "/v1/pictures/uv-index-day"
SEASON = "/v1/pictures/field-season"
BLOCK_B = {"id": "combe-basse/block-b", "lat": 44.05, "lon": 4.92, "elevation_m": 120, "surface_type": "grass"}
PIXEL = 0.005  # coordinates are written to 0.01 px: at most half of that off


def _svg(response) -> ET.Element:
    assert response.status_code == 200, response.get_data(as_text=True)[:500]
    assert response.mimetype == "image/svg+xml"
    root = ET.fromstring(response.get_data())  # well-formed XML or this raises
    assert root.tag == SVG + "svg" and root.get("viewBox") == "0 0 800 450"
    assert root.find(SVG + "title").text and root.find(SVG + "desc").text
    assert not list(root.iter(SVG + "script")) and not list(root.iter(SVG + "style"))
    assert all("style" not in element.attrib and not any(k.startswith("on") for k in element.attrib)
               for element in root.iter())
    return root


def _texts(root: ET.Element, css_class: str) -> list[str]:
    return ["".join(t.itertext()) for t in root.iter(SVG + "text") if css_class in (t.get("class") or "").split()]


def _axis(root: ET.Element, css_class: str, coordinate: str):
    """value = a + b * pixel, fitted to the tick marks of one axis."""
    ticks = [t for t in root.iter(SVG + "line") if t.get("class") == css_class]
    assert len(ticks) >= 3
    values = np.array([float(t.get("data-value")) for t in ticks])
    pixels = np.array([float(t.get(coordinate)) for t in ticks])
    slope, intercept = np.polyfit(pixels, values, 1)
    assert np.allclose(intercept + slope * pixels, values, rtol=0, atol=PIXEL * abs(slope) * 1.01)
    return lambda pixel: intercept + slope * np.asarray(pixel, dtype=float), abs(slope)


def _polyline(root: ET.Element, css_class: str) -> np.ndarray:
    (line,) = [p for p in root.iter(SVG + "polyline") if css_class in p.get("class").split()]
    return np.array([[float(v) for v in point.split(",")] for point in line.get("points").split()])


def _caution_text(root: ET.Element) -> str:
    return " ".join(_texts(root, "caution-text"))


def _query(**extra):
    return {**BLOCK_B, **extra}


def test_uv_day_picture_is_svg_with_bands_axes_units_and_the_caution(client):
    root = _svg(client.get(UV_DAY, query_string=_query(date="2026-06-21", utc_offset="+02:00")))
    bands = [r.get("data-category") for r in root.iter(SVG + "rect") if r.get("class") == "band"]
    assert bands == ["low", "moderate", "high", "very high", "extreme"]
    assert _texts(root, "band-label") == bands
    assert _texts(root, "x-label") == ["Local time (UTC+02:00), every 10 minutes"]
    assert _texts(root, "y-label") == ["UV Index (WHO), horizontal surface"]
    assert _texts(root, "x-tick-label")[:3] == ["00:00", "03:00", "06:00"]
    assert "combe-basse/block-b" in _texts(root, "picture-title")[0]
    caution = _caution_text(root)
    assert "not a measurement" in caution and "not medical or occupational-health" in caution


def test_uv_day_plotted_values_are_the_json_answer_and_the_irradiance_answer(client):
    query = _query(date="2026-06-21", utc_offset="+02:00", step_min="15", cloud_factor=0.8)
    root = _svg(client.get(UV_DAY, query_string=query))
    values = client.get(UV_DAY, query_string=query, headers={"Accept": "application/json"}).get_json()
    samples = values["samples"]
    assert len(samples["time"]) == 97 and samples["time"][0] == "2026-06-20T22:00:00Z"

    to_value, per_pixel = _axis(root, "y-tick", "y1")
    to_hour, _ = _axis(root, "x-tick", "x1")
    points = _polyline(root, "uv-index")
    np.testing.assert_allclose(to_value(points[:, 1]), samples["uv_index"], atol=2 * PIXEL * per_pixel)
    np.testing.assert_allclose(to_hour(points[:, 0]), np.arange(97) * 0.25, atol=1e-3)

    # The same records through POST /v1/irradiance give the same numbers, exactly.
    record = {k: v for k, v in BLOCK_B.items()}
    records = [dict(record, time=time, cloud_factor=0.8) for time in samples["time"]]
    answer = client.post("/v1/irradiance", json={"records": records, "spectra": ["erythema"]}).get_json()
    assert [r["uv_index"] for r in answer["results"]] == samples["uv_index"]
    assert [r["exposure_category"] for r in answer["results"]] == samples["exposure_category"]
    assert max(samples["uv_index"]) > 5  # a June noon in Provence under light cloud


def test_season_picture_values_are_the_json_answer_and_the_fields_answer(client):
    query = _query(first_day="2026-04-01", last_day="2026-06-30", spectrum="plant_growth",
                   glazing="polyethylene_film")
    root = _svg(client.get(SEASON, query_string=query))
    values = client.get(SEASON, query_string=query, headers={"Accept": "application/json"}).get_json()
    days = values["days"]
    assert len(days["day"]) == 91 and values["glazing"] == "polyethylene_film"

    to_daily_kj, per_pixel = _axis(root, "y-tick", "y1")
    bars = [r for r in root.iter(SVG + "rect") if r.get("class") == "day"]
    assert [bar.get("data-day") for bar in bars] == days["day"]
    tops = np.array([float(bar.get("y")) for bar in bars])
    np.testing.assert_allclose(to_daily_kj(tops) * 1000, days["dose_j_m2"], atol=2000 * PIXEL * per_pixel)
    to_total_kj, per_pixel2 = _axis(root, "y2-tick", "y1")
    line = _polyline(root, "season-total")
    np.testing.assert_allclose(to_total_kj(line[:, 1]) * 1000, days["season_total_j_m2"],
                               atol=2000 * PIXEL * per_pixel2)
    assert _texts(root, "x-tick-label") == ["1 Apr", "1 May", "1 Jun"]
    assert _texts(root, "y-label") == ["Daily dose, kJ m⁻² (plant_growth)"]
    assert _texts(root, "y2-label") == ["Season total, kJ m⁻² (plant_growth)"]
    assert "defer to agronomic advice" in _caution_text(root)

    # The same field through POST /v1/doses/fields, exactly.
    field = {k: v for k, v in BLOCK_B.items()}
    answer = client.post("/v1/doses/fields", json={
        "records": [field], "first_day": "2026-04-01", "last_day": "2026-06-30",
        "spectra": ["plant_growth"], "glazing": "polyethylene_film"}).get_json()
    day_rows = answer["results"][0]["days"]
    assert [d["dose_j_m2"]["plant_growth"] for d in day_rows] == days["dose_j_m2"]
    assert [d["season_total_j_m2"]["plant_growth"] for d in day_rows] == days["season_total_j_m2"]


def test_picture_queries_are_checked_like_records(client):
    errors = record_errors(client.get(UV_DAY, query_string=_query(date="2026-02-30", lat=95, ozone_du="lots",
                                                                  colour="red")))
    assert errors == {
        (None, None, "colour"): "is not a parameter of this picture",
        (None, None, "lat"): "must be between -90 and 90",
        (None, None, "ozone_du"): "must be a number",
        (None, None, "date"): "must be an ISO 8601 date YYYY-MM-DD",
    }
    errors = record_errors(client.get(UV_DAY, query_string=_query(date="2026-06-21", surface_albedo=0.1)))
    assert errors == {(None, None, "surface_type"): "give surface_albedo or surface_type, not both"}
    errors = record_errors(client.get(SEASON, query_string=_query(first_day="2026-04-01", last_day="2027-04-02")))
    assert errors == {(None, None, "last_day"): "must be on or after first_day and at most 366 days later"}
    errors = record_errors(client.get(SEASON, query_string={"lat": 44.05, "lon": 4.92, "first_day": "2026-04-01",
                                                            "last_day": "2026-04-02", "spectrum": "sunburn"}))
    assert list(errors) == [(None, None, "spectrum")]
    assert client.get(UV_DAY, query_string=_query(date="2026-06-21", step_min="7")).status_code == 422
    assert client.get(UV_DAY, query_string=_query(date="2026-06-21"), headers={"Accept": "text/csv"}
                      ).status_code == 406


def test_polar_night_and_midnight_sun_draw(client):
    night = client.get(UV_DAY, query_string={"lat": 78.2, "lon": 15.6, "date": "2026-12-21"})
    root = _svg(night)
    to_value, per_pixel = _axis(root, "y-tick", "y1")
    assert np.abs(to_value(_polyline(root, "uv-index")[:, 1])).max() <= 2 * PIXEL * per_pixel
    season = _svg(client.get(SEASON, query_string={"lat": 78.2, "lon": 15.6, "first_day": "2026-05-01",
                                                   "last_day": "2026-05-03"}))
    assert len([r for r in season.iter(SVG + "rect") if r.get("class") == "day"]) == 3
