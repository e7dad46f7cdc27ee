"""GET /v1/catalogue: what the models define, with sources, and the enforced record ranges."""
import pytest

from uvdose.models.action_spectra import ACTION_SPECTRA
from uvdose.models.filters import FILTERS
from uvdose.models.surfaces import SURFACE_TYPES


@pytest.fixture
def catalogue(client):
    response = client.get("/v1/catalogue")
    assert response.status_code == 200
    return response.get_json()


def test_every_action_spectrum_is_listed_with_source_and_normalisation(catalogue):
    listed = {entry["name"]: entry for entry in catalogue["action_spectra"]}
    assert set(listed) == set(ACTION_SPECTRA)
    for entry in listed.values():
        assert entry["source"] and "normalisation_nm" in entry
    # CIE S 007/E-1998 (ISO 17166): the erythema spectrum is 1 at and below 298 nm.
    assert listed["erythema"]["normalisation_nm"] == pytest.approx(298, abs=10)
    assert "CIE" in listed["erythema"]["source"] or "ISO" in listed["erythema"]["source"]


def test_surfaces_and_filters_are_listed(catalogue):
    surfaces = {entry["name"]: entry for entry in catalogue["surface_types"]}
    assert set(surfaces) == set(SURFACE_TYPES)
    # WHO (2002) Practical Guide: fresh snow reflects up to about 80 % of UV.
    assert 0.7 <= surfaces["fresh_snow"]["uv_albedo"] <= 0.95
    assert {entry["name"] for entry in catalogue["filters"]} == set(FILTERS)


def test_record_fields_state_the_ranges_that_validation_enforces(client, catalogue):
    fields = {entry["name"]: entry for entry in catalogue["record_fields"]}
    assert fields["cloud_factor"]["maximum"] == 1.5 and fields["lat"]["required"]
    # Whatever the catalogue says is the maximum is accepted, and just past it is not.
    record = {"time": "2026-06-21T12:00:00Z", "lat": 44.0, "lon": 4.9}
    for name in ("cloud_factor", "ozone_du", "elevation_m"):
        top = fields[name]["maximum"]
        assert client.post("/v1/irradiance", json={"records": [{**record, name: top}]}).status_code == 200
        assert client.post("/v1/irradiance", json={"records": [{**record, name: top + 1e-6}]}).status_code == 422


def test_defaults_limits_and_caution(catalogue, make_app, contract_client_for):
    assert catalogue["default_spectra"] == ["erythema", "actinic_icnirp", "plant_damage"]
    assert catalogue["limits"] == {"max_records": 10_000, "max_body_bytes": 16 * 1024 * 1024,
                                   "max_full_solve_records": 1000, "max_weather_readings": 200_000,
                                   "max_route_points": 500_000, "max_sample_spectra": 6_000_000,
                                   "chunk_sample_spectra": 250_000, "max_answer_bytes": 32 * 1024 * 1024,
                                   "max_streamed_answer_bytes": 256 * 1024 * 1024}
    assert "not a measurement" in catalogue["caution"]
    small = contract_client_for(make_app(UVDOSE_MAX_RECORDS=12, UVDOSE_MAX_FULL_SOLVE_RECORDS=5)).get(
        "/v1/catalogue").get_json()
    assert small["limits"]["max_records"] == 12 and small["limits"]["max_full_solve_records"] == 5
