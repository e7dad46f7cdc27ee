"""The uncertainty of each answer: present, by source, first-order right, and calibrated.

The engine's own finite differences are the reference for the sensitivities; synthetic
truths drawn from the stated distributions check that the stated intervals cover them
at their stated rates.
"""
import numpy as np
import pytest

from uvdose.models import engine, uncertainty
from uvdose.models.ozone_climatology import climatological_ozone_du, day_of_year_from_unix

YEAR_2026_UNIX_S = 1767225600.0
SPECTRA = ("erythema", "plant_damage", "actinic_icnirp")


def records(n, seed, max_zenith=None, **extra):
    rng = np.random.default_rng(seed)
    columns = dict(time_unix_s=YEAR_2026_UNIX_S + rng.uniform(0.0, 365.0 * 86400.0, n),
                   latitude_deg=rng.uniform(-85.0, 85.0, n), longitude_deg=rng.uniform(-180.0, 180.0, n))
    if max_zenith is not None:
        result = engine.compute(engine.Conditions.from_columns(columns), spectra=("erythema",))
        keep = result.solar_zenith_deg < max_zenith
        columns = {k: v[keep] for k, v in columns.items()}
    n = len(columns["time_unix_s"])
    columns.update({k: (np.full(n, v) if np.isscalar(v) else v) for k, v in extra.items()})
    return columns


def run(columns, spectra=SPECTRA, **kwargs):
    return engine.compute(engine.Conditions.from_columns(columns), spectra=spectra, **kwargs)


def total(result, quantity):
    return uncertainty.combined(result.components_of(quantity))


# -------------------------------------------------------------- present and sane
def test_present_positive_finite_for_every_daytime_result_and_zero_at_night():
    result = run(records(3000, 1))
    day = result.uv_index > 0.0
    assert day.sum() > 1000 and (~day).sum() > 500
    for quantity in ("uv_index", *SPECTRA):
        sigma = total(result, quantity)
        lit = day if quantity == "uv_index" else result.effective_w_m2[quantity] > 0.0
        assert np.all(np.isfinite(sigma)) and np.all(sigma[lit] > 0.0), quantity
        assert np.all(sigma[~lit] == 0.0), quantity
        for component, values in result.components_of(quantity).items():
            assert np.all(np.isfinite(values) & (values >= 0.0)), (quantity, component)
    # a default answer, no clouds given: clear sky, said so; its clouds part is zero
    assert set(result.cloud_source) == {"none"}
    assert np.all(result.components_of("uv_index")["clouds"] == 0.0)


def test_shrinks_when_the_client_gives_ozone_aerosol_and_clouds():
    base = records(400, 2, max_zenith=80.0)
    ozone = climatological_ozone_du(base["latitude_deg"], base["longitude_deg"],
                                    day_of_year_from_unix(base["time_unix_s"]))
    by_cover = run({**base, "cloud_modification_factor": np.full(len(ozone), 0.6),
                    "cloud_source": np.full(len(ozone), "cover", dtype=object)})
    given = run({**base, "ozone_du": ozone, "aod_550": np.full(len(ozone), 0.1),
                 "cloud_modification_factor": np.full(len(ozone), 0.6)})
    for quantity in ("uv_index", *SPECTRA):
        default_parts, given_parts = by_cover.components_of(quantity), given.components_of(quantity)
        for component in ("ozone", "aerosol", "clouds"):
            assert np.all(given_parts[component] < default_parts[component]), (quantity, component)
        assert np.all(total(given, quantity) < total(by_cover, quantity))
    assert set(given.cloud_source) == {"factor"} and np.all(given.ozone_relative_sigma == uncertainty.CLIENT_OZONE_SIGMA)


def test_cloud_sigma_by_source():
    cmf = np.array([1.0, 0.8, 0.5, 0.3])
    none = uncertainty.cloud_relative_sigma(np.full(4, "none", dtype=object), cmf)
    factor = uncertainty.cloud_relative_sigma(np.full(4, "factor", dtype=object), cmf)
    irradiance = uncertainty.cloud_relative_sigma(np.full(4, "irradiance", dtype=object), cmf)
    cover = uncertainty.cloud_relative_sigma(np.full(4, "cover", dtype=object), cmf)
    assert np.all(none == 0.0) and np.all(factor == uncertainty.CLIENT_CMF_SIGMA)
    # Schwander et al. (2002): with a broadband measurement deviations mostly below 15 %,
    # from cover alone 50 % and more under heavy cloud. On top, the UV-versus-broadband
    # exponent (Thiel et al. 1997: 1; most studies: below 1) grows with the attenuation.
    assert np.all(irradiance[:2] < 0.15) and np.all(np.diff(irradiance) > 0)
    ambiguity = uncertainty.UV_TO_BROADBAND_EXPONENT_SIGMA * np.abs(np.log(cmf))
    assert irradiance == pytest.approx(np.hypot(uncertainty.IRRADIANCE_CMF_SIGMA, ambiguity))
    assert cover[0] == pytest.approx(uncertainty.COVER_CMF_SIGMA_CLEAR)
    assert cover[-1] > 0.35 and np.all(np.diff(cover) > 0) and np.all(cover[1:] > irradiance[1:])
    with pytest.raises(ValueError, match="record 1: unknown cloud source 'radar'"):
        uncertainty.cloud_relative_sigma(np.array(["none", "radar"], dtype=object), np.ones(2))


# ------------------------------------------- first order against the engine itself
def _log_slope(columns, name, low, high, quantity="uv_index", log_input=True):
    """Central difference of ln(quantity) in ln(input) (or in the input) from the engine."""
    results = [run({**columns, name: value}) for value in (low, high)]
    values = [r.uv_index if quantity == "uv_index" else r.effective_w_m2[quantity] for r in results]
    step = np.log(high / low) if log_input else high - low
    return (np.log(values[1]) - np.log(values[0])) / step


@pytest.mark.parametrize("quantity", ["uv_index", "plant_damage", "actinic_icnirp"])
def test_ozone_part_is_raf_times_ozone_sigma_against_engine_differences(quantity):
    # Varied conditions away from the sensitivity grid's reference (pressure, aerosol,
    # albedo): the first-order ozone part must still match the engine's own finite
    # difference within 8 % of the RAF, up to 80 degrees zenith.
    base = records(300, 3, max_zenith=80.0)
    n = len(base["time_unix_s"])
    rng = np.random.default_rng(4)
    ozone = rng.uniform(200.0, 480.0, n)
    base.update(elevation_m=rng.uniform(0.0, 2500.0, n), aod_550=rng.uniform(0.02, 0.5, n),
                surface_albedo=rng.uniform(0.02, 0.6, n))
    result = run({**base, "ozone_du": ozone})
    raf = result.components_of(quantity)["ozone"] / uncertainty.CLIENT_OZONE_SIGMA
    reference = -_log_slope(base, "ozone_du", ozone * 0.99, ozone * 1.01, quantity)
    assert np.max(np.abs(raf / reference - 1.0)) < 0.08
    if quantity == "uv_index":
        # Erythemal RAF about 1.1-1.3 at moderate sun (WMO ozone assessments, from memory;
        # Madronich 2007's exponent 1.23).
        moderate = result.solar_zenith_deg < 60.0
        assert 1.0 < np.median(reference[moderate]) < 1.35


def test_aerosol_and_albedo_parts_against_engine_differences():
    base = records(200, 5, max_zenith=75.0)
    n = len(base["time_unix_s"])
    rng = np.random.default_rng(6)
    aod, albedo = rng.uniform(0.05, 0.4, n), rng.uniform(0.03, 0.8, n)
    base.update(ozone_du=rng.uniform(220.0, 420.0, n))
    result = run({**base, "aod_550": aod, "surface_albedo": albedo})
    parts = result.components_of("uv_index")
    aod_slope = parts["aerosol"] / (aod * uncertainty._lognormal_spread(uncertainty.aerosol_log_sigma(aod)))
    reference = -_log_slope({**base, "surface_albedo": albedo}, "aod_550", aod - 0.01, aod + 0.01,
                            log_input=False)
    assert np.median(np.abs(aod_slope / reference - 1.0)) < 0.15
    albedo_slope = parts["surface_albedo"] / (albedo * uncertainty.albedo_log_sigma(albedo, albedo, False))
    reference = _log_slope({**base, "aod_550": aod}, "surface_albedo", albedo - 0.02, albedo + 0.02,
                           log_input=False)
    assert np.max(np.abs(albedo_slope / reference - 1.0)) < 0.15


# --------------------------------------------------------------- calibration
def test_stated_intervals_cover_synthetic_truths_at_their_stated_rates():
    # Truths drawn from the stated distributions of the default answer's sources: the
    # day's ozone about the climatology, ln AOD about ln 0.1, ln albedo about ln 0.05,
    # and a client cloud factor's own spread. The model's and the cache's parts are not
    # drawn (no truth to draw them from), so the sigma checked combines the drawn parts.
    # Checked, each within 3 standard errors of its sampling: the stated sigma is the
    # rms of ln(truth / answer) (mean square of the normalised deviation 1); the 90 %
    # interval covers 90 % (+-1 % more for the first-order model). The 1-sigma interval
    # covers 68.3 % only for a normal error; the log-normal AOD makes the error heavy-
    # tailed, so it may cover up to 4 % more (measured: 71 %), not less.
    base = records(12000, 7, max_zenith=75.0)
    n = len(base["time_unix_s"])
    rng = np.random.default_rng(8)
    cmf = np.full(n, 0.8)
    answer = run({**base, "cloud_modification_factor": cmf}, spectra=("erythema",))
    z = rng.standard_normal((4, n))
    truth = run({**base,
                 "ozone_du": answer.ozone_du * np.exp(answer.ozone_relative_sigma * z[0]),
                 "aod_550": 0.1 * np.exp(uncertainty.DEFAULT_AOD_LOG_SIGMA * z[1]),
                 "surface_albedo": 0.05 * np.exp(uncertainty.DEFAULT_ALBEDO_LOG_SIGMA * z[2]),
                 "cloud_modification_factor": cmf * np.exp(uncertainty.CLIENT_CMF_SIGMA * z[3])},
                spectra=("erythema",))
    parts = answer.components_of("uv_index")
    sigma = uncertainty.combined({k: parts[k] for k in ("ozone", "aerosol", "surface_albedo", "clouds")})
    normalised = np.log(truth.uv_index / answer.uv_index) / sigma
    assert n > 3000
    square = normalised ** 2
    assert abs(square.mean() - 1.0) < 3.0 * square.std() / np.sqrt(n)
    error = lambda rate: 3.0 * np.sqrt(rate * (1 - rate) / n)  # noqa: E731
    covered_90 = np.mean(np.abs(normalised) <= uncertainty.INTERVAL_90_FACTOR)
    assert abs(covered_90 - 0.90) < error(0.90) + 0.01, covered_90
    covered_1 = np.mean(np.abs(normalised) <= 1.0)
    assert 0.6827 - error(0.6827) < covered_1 < 0.6827 + error(0.6827) + 0.04, covered_1
    low, high = uncertainty.interval(answer.uv_index, sigma)
    assert np.all(low < answer.uv_index) and np.all(high > answer.uv_index)


# --------------------------------------------------------------------- doses
def test_dose_sigma_follows_the_correlation_of_its_samples():
    # Four equal samples per window. Window 0: one UTC day; window 1: two days.
    owner = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    day = 86400.0
    times = np.array([0, 1, 2, 3, 0, 1, day, day + 1]) * 1.0 + 10 * day
    share = np.ones(8)
    sigma = {name: np.full(8, 0.1) for name in ("ozone", "model", "cache")}
    out = uncertainty.dose_relative_sigma(owner, times, share, sigma, 2)
    # ozone: shared within a day -> one day: 0.1; two equal days: 0.1 / sqrt(2)
    assert out["ozone"] == pytest.approx([0.1, 0.1 / np.sqrt(2)])
    # model: one bias per window -> 0.1 whatever the days
    assert out["model"] == pytest.approx([0.1, 0.1])
    # cache: independent per sample -> 0.1 / sqrt(4)
    assert out["cache"] == pytest.approx([0.05, 0.05])
    empty = uncertainty.dose_relative_sigma(owner, times, np.zeros(8), sigma, 2)
    assert all(np.all(v == 0.0) for v in empty.values())


def test_running_totals_add_days_as_their_components_correlate():
    daily = np.array([[100.0, 100.0, 0.0, 100.0]])
    sigma = {"ozone": np.full((1, 4), 0.1), "aerosol": np.full((1, 4), 0.2)}
    running = uncertainty.running_total_relative_sigma(daily, sigma)
    assert running["ozone"][0] == pytest.approx([0.1, 0.1 / np.sqrt(2), 0.1 / np.sqrt(2), 0.1 / np.sqrt(3)])
    assert running["aerosol"][0] == pytest.approx([0.2, 0.2, 0.2, 0.2])


def test_engine_doses_carry_uncertainty_with_one_ozone_error_per_day():
    from uvdose.models import dose

    evaluate = dose.engine_evaluator(("erythema",))
    start = np.array([_unix_day("2026-06-21"), _unix_day("2026-06-21")])
    end = start + np.array([86400.0, 3 * 86400.0])
    where = {"latitude_deg": np.full(2, 45.0), "longitude_deg": np.full(2, 5.0)}
    out = dose.window_doses(where, start, end, evaluate, step_s=1200.0)
    parts = out["relative_sigma"]["erythema"]
    assert set(parts) == set(uncertainty.COMPONENTS)
    # The samples of one day share one ozone error: a one-day dose keeps (about) the
    # samples' ozone part; three days of nearly equal doses divide it by about sqrt(3).
    samples = run({"time_unix_s": np.array([_unix_day("2026-06-21") + 12 * 3600.0]),
                   "latitude_deg": np.array([45.0]), "longitude_deg": np.array([5.0])}, spectra=("erythema",))
    noon = samples.components_of("erythema")["ozone"][0]
    assert parts["ozone"][0] == pytest.approx(noon, rel=0.15)
    assert parts["ozone"][1] == pytest.approx(parts["ozone"][0] / np.sqrt(3), rel=0.1)
    # the model's error is one bias for the whole window
    assert parts["model"][1] == pytest.approx(parts["model"][0], rel=0.05)


def test_field_season_running_totals_shrink_for_daily_errors_only():
    from uvdose.models import dose

    evaluate = dose.engine_evaluator(("erythema",))
    days = _unix_day("2026-05-01") + 86400.0 * np.arange(10)
    season = dose.field_season({"latitude_deg": np.array([44.0]), "longitude_deg": np.array([5.0])},
                               days, evaluate, spectra=["erythema"])
    daily, total = season.daily_relative_sigma["erythema"], season.season_relative_sigma["erythema"]
    assert np.all(daily["ozone"] > 0.0)
    assert total["ozone"][0, -1] < 0.5 * daily["ozone"][0].mean()  # ten independent days
    assert total["aerosol"][0, -1] == pytest.approx(np.average(daily["aerosol"][0],
                                                               weights=season.daily_dose_j_m2["erythema"][0]))


def _unix_day(iso):
    return float(np.datetime64(iso, "s").astype("int64"))
