"""The error the grid-cell cache costs, with the real engine.

The cache answers every record with the engine's result for its cell centre (README,
"Cache"). The documented bound, checked here on random records over the globe, the year
and the hours of the day, with random optional inputs:

- UV Index within max(2 % of the exact value, 0.05 UVI);
- each effective irradiance, and the UVB and UVA integrals, within max(3 % of the exact
  value, 0.5 % of its value for a high sun: 2.8° zenith, 300 DU, sea level, default
  aerosol — the same scale as 0.05 UVI is of a UVI near 12) while the sun is more than
  1° above the horizon. Within 1° of the horizon and below it, within 3 % of that
  high-sun value: there the irradiance is small and changes fastest in relative terms
  (the twilight sky fades to zero 6° below the horizon), so a record and its cell centre
  a minute apart differ by a large share of a small value.

Both bounds are our own (common practice, no source): well inside the spread of clear-sky
models against measurement, and the absolute floor keeps night and twilight from being
judged on relative error. The engine itself is checked against published values in
``tests/models``; here it is only compared with itself at shifted inputs.
"""
from __future__ import annotations

import numpy as np
import pytest

from uvdose.models import engine
from uvdose.service.cache import CellGrid, GridCellCache

CONTEXT = "spectra=erythema,actinic_icnirp,plant_damage"
QUANTITIES = ("effective_w_m2.erythema", "effective_w_m2.actinic_icnirp",
              "effective_w_m2.plant_damage", "uvb_w_m2", "uva_w_m2")
YEAR_START_UNIX_S = 1_767_225_600.0  # 2026-01-01T00:00:00Z
HORIZON_BAND_ZENITH_DEG = 89.0


def engine_columns(columns: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    return engine.compute(engine.Conditions.from_columns(columns)).as_columns()


def random_records(n: int, seed: int) -> dict[str, np.ndarray]:
    """Uniform over the sphere up to 81° latitude, uniform in time over 2026; each
    optional input given for about half of the records, over its usual range."""
    rng = np.random.default_rng(seed)

    def sometimes(low: float, high: float, share: float = 0.5) -> np.ndarray:
        return np.where(rng.random(n) < share, rng.uniform(low, high, n), np.nan)

    tilted = rng.random(n) < 0.3
    return {
        "time_unix_s": YEAR_START_UNIX_S + rng.uniform(0, 365 * 86_400, n),
        "latitude_deg": np.degrees(np.arcsin(rng.uniform(-1, 1, n))) * 0.9,
        "longitude_deg": rng.uniform(-180, 180, n),
        "elevation_m": sometimes(0, 3500),
        "pressure_hpa": sometimes(700, 1030, share=0.2),
        "ozone_du": sometimes(220, 450),
        "aod_550": sometimes(0.02, 0.8),
        "angstrom_exponent": sometimes(0.5, 2.0, share=0.3),
        "single_scattering_albedo": sometimes(0.8, 0.99, share=0.3),
        "surface_albedo": sometimes(0, 0.9, share=0.3),
        "cloud_modification_factor": sometimes(0.1, 1.3),
        "tilt_deg": np.where(tilted, rng.uniform(0, 90, n), np.nan),
        "receiver_azimuth_deg": np.where(tilted, rng.uniform(0, 360, n), np.nan),
        "sky_view_factor": np.where(tilted, rng.uniform(0.5, 1, n), np.nan),
    }


@pytest.fixture(scope="module")
def high_sun() -> dict[str, float]:
    """Engine values at the equator near noon on 2026-09-16, 300 DU, sea level."""
    reference = engine_columns({
        "time_unix_s": np.array([1_789_560_000.0]),  # 2026-09-16T12:00:00Z
        "latitude_deg": np.array([0.0]),
        "longitude_deg": np.array([0.0]),
        "ozone_du": np.array([300.0]),
    })
    assert reference["solar_zenith_deg"][0] < 5
    return {name: float(reference[name][0]) for name in (*QUANTITIES, "uv_index")}


def worst_over_bound(grid: CellGrid, columns, high_sun) -> dict[str, float]:
    """Largest |cell-centre result − exact result| / bound for each quantity (see the
    module docstring; records within 1° of the horizon have their own, looser bound)."""
    exact = engine_columns(columns)
    cached = GridCellCache("memory", grid=grid).compute_through(columns, engine_columns, CONTEXT)
    a, b = exact["uv_index"], cached["uv_index"]
    worst = {"uv_index": float(np.max(np.abs(b - a) / np.maximum(0.02 * a, 0.05)))}
    near_horizon = exact["solar_zenith_deg"] > HORIZON_BAND_ZENITH_DEG
    for name in QUANTITIES:
        a, b = exact[name], cached[name]
        bound = np.where(near_horizon, 0.03 * high_sun[name], np.maximum(0.03 * a, 0.005 * high_sun[name]))
        worst[name] = float(np.max(np.abs(b - a) / bound))
    return worst


@pytest.mark.parametrize("seed", [1, 2])
def test_default_cells_stay_within_the_documented_bound(seed, high_sun):
    columns = random_records(300, seed)
    exact_uvi = engine_columns(columns)["uv_index"]
    # The sample must hold real daylight, or the bound would be judged on zeros.
    assert (exact_uvi > 3).sum() >= 30 and (exact_uvi == 0).sum() >= 60
    worst = worst_over_bound(CellGrid(), columns, high_sun)
    assert max(worst.values()) <= 1.0, worst


def test_the_check_catches_cells_that_are_too_coarse(high_sun):
    # 1° × 30 min cells break the bound: the comparison above can fail.
    worst = worst_over_bound(CellGrid(cell_deg=1.0, cell_minutes=30.0), random_records(300, 1), high_sun)
    assert worst["uv_index"] > 1.0


def test_a_served_record_is_the_engine_at_its_cell_centre():
    columns = random_records(50, 3)
    cache = GridCellCache("memory")
    served = cache.compute_through(columns, engine_columns, CONTEXT)
    again = cache.compute_through(columns, engine_columns, CONTEXT)  # all hits
    centre = engine_columns(cache.cell_centres(columns))
    # Equal up to rounding: the engine's sums run in another order for another batch.
    for name in ("uv_index", *QUANTITIES, "solar_zenith_deg", "ozone_du"):
        np.testing.assert_allclose(served[name], centre[name], rtol=1e-12, atol=1e-14, err_msg=name)
        np.testing.assert_array_equal(again[name], served[name], err_msg=name)
    assert list(served["exposure_category"]) == list(centre["exposure_category"])
    assert list(served["ozone_source"]) == list(centre["ozone_source"])
