"""What the physics-state cache costs in accuracy, with the real engine, memory and Redis.

The cache keeps the radiative transfer of each rounded physics state; the solar position
and everything that acts on the transfer linearly (Earth–Sun distance, cloud factor,
receiver, filter) stay exact per record (README, "Cache"). Checked here against the same
engine with ``UVDOSE_CACHE=off`` on random records over the globe, the year and the hours
of the day, with every optional input over its whole schema range:

- ``solar_zenith_deg`` (and azimuth) within 1e-6 degrees, cache on or off;
- the UV Index within ``CACHE_ERROR_BOUND``: max(0.5 % of the cache-off value, 0.02);
- every effective irradiance and the UVB and UVA integrals within max(0.5 %, 0.2 % of its
  value for a high sun: 2.8° zenith, 300 DU, sea level, default aerosol; the same scale
  as 0.02 is of a UV Index near 12);
- window, field and route doses through the HTTP endpoints within 0.5 %.

The bounds are our own (common practice, no source): a small fraction of the engine's
own accuracy (1 % of the full solve for the tables, 3 % against DISORT), with an absolute
floor for night and twilight. The engine itself is checked against published values in
``tests/models``; here it is only compared with itself at rounded states.
"""
from __future__ import annotations

import json

import numpy as np
import pytest

from uvdose.models import engine
from uvdose.service.cache import CACHE_ERROR_BOUND, STATE_STEPS, StateCache

QUANTITIES = ("effective_w_m2.erythema", "effective_w_m2.actinic_icnirp",
              "effective_w_m2.plant_damage", "effective_w_m2.plant_growth", "uvb_w_m2", "uva_w_m2")
SPECTRA = ("erythema", "actinic_icnirp", "plant_damage", "plant_growth")
YEAR_START_UNIX_S = 1_767_225_600.0  # 2026-01-01T00:00:00Z


def random_records(n: int, seed: int) -> dict[str, np.ndarray]:
    """Uniform over the sphere, uniform in time over 2026; each optional input given for
    about half of the records, over its whole schema range (service/record_fields.py)."""
    rng = np.random.default_rng(seed)

    def sometimes(low: float, high: float, share: float = 0.5) -> np.ndarray:
        return np.where(rng.random(n) < share, rng.uniform(low, high, n), np.nan)

    tilted = rng.random(n) < 0.3
    return {
        "time_unix_s": YEAR_START_UNIX_S + rng.uniform(0, 365 * 86_400, n),
        "latitude_deg": np.degrees(np.arcsin(rng.uniform(-1, 1, n))),
        "longitude_deg": rng.uniform(-180, 180, n),
        "elevation_m": sometimes(-500, 9000, share=0.3),
        "pressure_hpa": sometimes(300, 1100, share=0.2),
        "ozone_du": sometimes(50, 700),
        "aod_550": sometimes(0, 5, share=0.3),
        "angstrom_exponent": sometimes(-0.5, 3.0, share=0.2),
        "single_scattering_albedo": sometimes(0.05, 1.0, share=0.2),
        "asymmetry_factor": sometimes(0.0, 0.95, share=0.2),
        "surface_albedo": sometimes(0, 1, share=0.3),
        "cloud_modification_factor": sometimes(0.0, 1.5),
        "tilt_deg": np.where(tilted, rng.uniform(0, 180, n), np.nan),
        "receiver_azimuth_deg": np.where(tilted, rng.uniform(0, 360, n), np.nan),
        "sky_view_factor": np.where(tilted, rng.uniform(0, 1, n), np.nan),
    }


def computed(columns: dict[str, np.ndarray], cache: StateCache | None) -> dict[str, np.ndarray]:
    """The engine on ``columns``, its transfer through ``cache`` (None: no cache)."""
    memo = None
    if cache is not None:
        writes = cache.allowance()

        def memo(description, state, transfer):
            return cache.compute_through(state, transfer, description, writes)

    return engine.compute(engine.Conditions.from_columns(columns), spectra=SPECTRA,
                          transfer_memo=memo).as_columns()


@pytest.fixture(params=["memory", "redis"])
def cache(request) -> StateCache:
    if request.param == "memory":
        return StateCache("memory")
    return StateCache("redis", redis_url=request.getfixturevalue("redis_url"))


@pytest.fixture(scope="module")
def high_sun() -> dict[str, float]:
    """Engine values at the equator near noon on 2026-09-16, 300 DU, sea level."""
    reference = computed({"time_unix_s": np.array([1_789_560_000.0]),  # 2026-09-16T12:00:00Z
                          "latitude_deg": np.array([0.0]), "longitude_deg": np.array([0.0]),
                          "ozone_du": np.array([300.0])}, None)
    assert reference["solar_zenith_deg"][0] < 5
    return {name: float(reference[name][0]) for name in QUANTITIES}


def worst_over_bound(exact: dict[str, np.ndarray], cached: dict[str, np.ndarray],
                     high_sun: dict[str, float]) -> dict[str, float]:
    """Largest |cached − exact| / bound for each quantity (module docstring)."""
    bound = CACHE_ERROR_BOUND
    a, b = exact["uv_index"], cached["uv_index"]
    worst = {"uv_index": float(np.max(np.abs(b - a) / np.maximum(bound["uv_index_relative"] * a,
                                                                 bound["uv_index_absolute"])))}
    for name in QUANTITIES:
        a, b = exact[name], cached[name]
        limit = np.maximum(bound["effective_relative"] * a, bound["effective_high_sun_fraction"] * high_sun[name])
        worst[name] = float(np.max(np.abs(b - a) / limit))
    return worst


@pytest.mark.parametrize("seed", [1, 2])
def test_the_cache_stays_within_its_documented_bound(cache, seed, high_sun, redis_client):
    columns = random_records(300, seed)
    exact = computed(columns, None)
    # The sample must hold real daylight, or the bound would be judged on zeros.
    assert (exact["uv_index"] > 3).sum() >= 20 and (exact["uv_index"] == 0).sum() >= 60
    first = computed(columns, cache)    # misses
    second = computed(columns, cache)   # hits
    assert cache.stats["hit"] > 0
    for served in (first, second):
        worst = worst_over_bound(exact, served, high_sun)
        assert max(worst.values()) <= 1.0, worst
        # The solar position is the record's own, cache or not.
        for name in ("solar_zenith_deg", "solar_azimuth_deg", "earth_sun_distance_au"):
            np.testing.assert_allclose(served[name], exact[name], rtol=0, atol=1e-6, err_msg=name)
        # So are the values reported as used.
        for name in ("ozone_du", "pressure_hpa", "surface_albedo", "cloud_modification_factor"):
            np.testing.assert_array_equal(served[name], exact[name], err_msg=name)
        assert list(served["ozone_source"]) == list(exact["ozone_source"])


def test_the_uncertainty_states_the_same_bound():
    # A uniform error of ±b has the standard deviation b / sqrt(3) (the cache component
    # of every answer's uncertainty, models.uncertainty).
    from uvdose.models import uncertainty

    for quantity, bound in (("uv_index", "uv_index_relative"), ("effective", "effective_relative")):
        assert uncertainty.CACHE_RELATIVE_SIGMA[quantity] == pytest.approx(CACHE_ERROR_BOUND[bound] / np.sqrt(3),
                                                                           abs=5e-5)


def test_the_check_catches_steps_that_are_too_coarse(monkeypatch, high_sun):
    # 0.5° zenith bins break the bound: the comparison above can fail.
    coarse = dict(STATE_STEPS, true_zenith_deg=("bin", 0.5))
    monkeypatch.setattr("uvdose.service.cache.physics_keys.STATE_STEPS", coarse)
    columns = random_records(300, 1)
    worst = worst_over_bound(computed(columns, None), computed(columns, StateCache("memory")), high_sun)
    assert worst["uv_index"] > 1.0


def test_an_equatorial_noon_record_reports_its_own_zenith():
    # At the cell centre of the place-and-time cache this record read 4.577 deg for 4.843.
    columns = {"time_unix_s": np.array([1_774_008_000.0]),  # 2026-03-20T12:00:00Z
               "latitude_deg": np.array([-4.8]), "longitude_deg": np.array([0.0])}
    exact = computed(columns, None)
    served = computed(columns, StateCache("memory"))
    assert served["solar_zenith_deg"][0] == exact["solar_zenith_deg"][0]
    assert abs(served["uv_index"][0] / exact["uv_index"][0] - 1) < CACHE_ERROR_BOUND["uv_index_relative"]


# -- doses through the endpoints -------------------------------------------------------------

def _post(client, path, body):
    response = client.post(path, data=json.dumps(body), content_type="application/json")
    assert response.status_code == 200, response.get_json()
    return response.get_json()["results"]


DOSE_REQUESTS = {
    "/v1/doses/windows": {
        "records": [{"id": f"crew-{i}", "start": "2026-06-10T05:00:00+02:00", "end": "2026-06-10T21:00:00+02:00",
                     "lat": 44.31 + 0.37 * i, "lon": 4.62 - 0.5 * i, "ozone_du": 280 + 9 * i,
                     "aod_550": 0.05 * i, "angstrom_exponent": 1.1, "single_scattering_albedo": 0.9}
                    for i in range(6)],
        "step_s": 900},
    "/v1/doses/fields": {
        "records": [{"id": f"plot-{i}", "lat": 52.1 + 0.8 * i, "lon": 5.2 + 0.3 * i, "surface_type": "grass"}
                    for i in range(4)],
        "first_day": "2026-03-01", "last_day": "2026-03-20", "spectra": ["plant_damage", "erythema"]},
    "/v1/doses/routes": {
        "routes": [{"id": "van-7", "cloud_factor": 0.9, "points": [
            {"time": "2026-07-15T07:30:00+01:00", "lat": 51.512, "lon": -0.091},
            {"time": "2026-07-15T11:55:00+01:00", "lat": 51.601, "lon": 0.044},
            {"time": "2026-07-15T15:40:00+01:00", "lat": 51.514, "lon": -0.088}]}],
        "driver_side": "right", "glazing": "clear_side_glass"},
}


def _doses(rows: list[dict]) -> np.ndarray:
    values = []
    for row in rows:
        doses = row.get("dose_j_m2")
        if doses is None:  # fields: one row per field with per-day lists
            doses = {name: sum(day["dose_j_m2"][name] for day in row["days"]) for name in row["days"][0]["dose_j_m2"]}
        values.extend(doses.values())
    return np.array(values)


@pytest.mark.parametrize("path", list(DOSE_REQUESTS))
def test_cached_doses_equal_uncached_within_the_bound(make_app, contract_client_for, path, redis_url, redis_client):
    body = DOSE_REQUESTS[path]
    uncached = _doses(_post(contract_client_for(make_app(UVDOSE_CACHE="off")), path, body))
    for settings in ({"UVDOSE_CACHE": "memory"}, {"UVDOSE_CACHE": "redis", "REDIS_URL": redis_url}):
        client = contract_client_for(make_app(**settings))
        for _ in range(2):  # misses, then hits
            cached = _doses(_post(client, path, body))
            assert np.all(np.abs(cached - uncached) <= CACHE_ERROR_BOUND["effective_relative"] * uncached + 1e-9)
    assert uncached.max() > 100.0  # real daytime doses, J m-2
