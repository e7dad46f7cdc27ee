"""Time integration of effective irradiance: window doses, daily and seasonal totals.

A dose is D = ∫ E_eff(t) dt in J m⁻² (E_eff in W m⁻², t in s). Integration uses the
composite trapezoid rule on nodes that include both exact window edges plus every
multiple of ``step_s`` seconds of POSIX time inside the window. Aligning interior
nodes on a UTC grid means that many windows share sample times, which the solar
position code evaluates once per distinct time. The rule is exact for irradiance
constant or linear in time. The clear-sky model lights the sky through civil twilight
(until the sun is 6° below the horizon) and returns exact zeros beyond, where its UV
has fallen below 1e-4 of the high-sun value; the irradiance is continuous in time.

Irradiance comes from an *evaluator*: a function from a dict of per-sample input
columns (the names of ``models.engine.Conditions``) to a dict of result columns
(``EngineResult.as_columns()`` names, e.g. ``engine.effective_column("erythema")``).
:func:`engine_evaluator` wraps the engine (the service hands it its cache as the
engine's ``transfer_memo``); tests pass synthetic ones. Samples are evaluated in chunks
of bounded size.

Daily totals for fields integrate over each daylight period by Gauss–Legendre
quadrature (8 nodes by default: a smooth integrand between the edges, and 4–5 times
fewer engine samples than a 20-minute trapezoid for the same accuracy, measured in
``tests/models/test_dose.py``). Sunrise and sunset per field and day come from
``models.solar_geometry.sunrise_transit_sunset`` (Reda & Andreas 2004, Appendix A.2);
the integration limits use the same algorithm at the end of civil twilight, where the
model's sky goes dark (see :func:`field_season`).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Mapping, Sequence

import numpy as np

from uvdose.models import engine, uncertainty, weather_series
from uvdose.models.record_errors import check_records
from uvdose.models.solar_geometry import CIVIL_TWILIGHT_ZENITH_DEG, sunrise_transit_sunset

Columns = dict[str, np.ndarray]
Evaluator = Callable[[Columns], Columns]

DEFAULT_WINDOW_STEP_S = 600.0
"""Default step for time windows (10 min)."""
DEFAULT_DAY_STEP_S = 1200.0
"""Step for daily field totals when the trapezoid is chosen instead of Gauss–Legendre."""
MIN_STEP_S, MAX_STEP_S = 10.0, 3600.0
CHUNK_SAMPLES = 50_000
"""Samples per evaluator call: bounds memory (the engine holds several (n, 121) arrays)."""
DEFAULT_GAUSS_NODES = 8
"""Gauss–Legendre nodes per daylight period; ``tests/models/test_dose.py`` measures the
error against a 1-minute trapezoid on the engine (well under 1 %)."""


def engine_evaluator(spectra: Sequence[str], transmittance=None, method: str = "auto",
                     ozone_resolver=None, full_solve_budget=None, transfer_memo=None) -> Evaluator:
    """Evaluator that runs ``models.engine.compute`` on sample columns (one
    ``full_solve_budget`` and one ``transfer_memo``, if given, shared by every call)."""
    def evaluate(columns: Columns) -> Columns:
        result = engine.compute(engine.Conditions.from_columns(columns), spectra=tuple(spectra),
                                transmittance=transmittance, ozone_resolver=ozone_resolver,
                                method=method, full_solve_budget=full_solve_budget,
                                transfer_memo=transfer_memo)
        return result.as_columns()

    return evaluate


def evaluate_in_chunks(evaluate: Evaluator, columns: Mapping[str, np.ndarray],
                       chunk_samples: int = CHUNK_SAMPLES) -> Columns:
    """Run ``evaluate`` over sample columns in slices of at most ``chunk_samples``."""
    n = len(columns["time_unix_s"])
    if n == 0:
        return {}
    parts = [evaluate({k: v[i:i + chunk_samples] for k, v in columns.items()})
             for i in range(0, n, chunk_samples)]
    return {k: np.concatenate([p[k] for p in parts]) for k in parts[0]}


def check_step(step_s: float) -> float:
    """Validate an integration step in seconds (10 s to 1 h)."""
    step = float(step_s)
    if not MIN_STEP_S <= step <= MAX_STEP_S:
        raise ValueError(f"step_s must be between {MIN_STEP_S:g} and {MAX_STEP_S:g} s, got {step_s!r}")
    return step


@dataclass(frozen=True)
class Nodes:
    """Trapezoid nodes of K windows: times (M,), owning window (M,), weights in s (M,),
    and whether each node is a window edge."""

    time_unix_s: np.ndarray
    window: np.ndarray
    weight_s: np.ndarray
    is_edge: np.ndarray


def trapezoid_node_counts(start_unix_s, end_unix_s, step_s: float) -> np.ndarray:
    """(K,) the number of nodes :func:`trapezoid_nodes` puts in each window [start, end]:
    both edges and every multiple of ``step_s`` strictly inside (windows valid, ``end`` not
    before ``start``). Lets a caller count the work of windows before building any node."""
    start = np.atleast_1d(np.asarray(start_unix_s, dtype=float))
    end = np.atleast_1d(np.asarray(end_unix_s, dtype=float))
    step = check_step(step_s)
    interior = np.maximum(np.ceil(end / step) - 1.0 - np.floor(start / step), 0.0)
    return interior.astype(np.int64) + 2


def trapezoid_nodes(start_unix_s, end_unix_s, step_s: float) -> Nodes:
    """Nodes and composite-trapezoid weights for windows [start, end] (arrays (K,)).

    Nodes: both edges and every multiple of ``step_s`` strictly inside. Weights sum to
    each window's length. Raises ``RecordErrors`` naming every window whose end precedes
    its start.
    """
    start = np.atleast_1d(np.asarray(start_unix_s, dtype=float))
    end = np.atleast_1d(np.asarray(end_unix_s, dtype=float))
    check_records(~(np.isfinite(start) & np.isfinite(end)) | (end < start), "end_unix_s",
                  "must be finite and must not precede start", kind="window")
    step = check_step(step_s)
    first = np.floor(start / step) + 1.0
    counts = trapezoid_node_counts(start, end, step)
    window = np.repeat(np.arange(start.size), counts)
    offsets = np.cumsum(counts) - counts
    position = np.arange(window.size) - offsets[window]
    is_last = position == counts[window] - 1
    is_edge = (position == 0) | is_last
    times = np.where(position == 0, start[window],
                     np.where(is_last, end[window], (first[window] + position - 1) * step))
    gaps = np.diff(times)
    before = np.concatenate([[0.0], gaps])
    after = np.concatenate([gaps, [0.0]])
    before[position == 0] = 0.0
    after[is_last] = 0.0
    return Nodes(times, window, 0.5 * (before + after), is_edge)


def gauss_legendre_nodes(start_unix_s, end_unix_s, n: int) -> Nodes:
    """Gauss–Legendre nodes and weights (seconds) for windows [start, end], n per window.

    Abramowitz & Stegun (1964), *Handbook of Mathematical Functions*, 25.4.29 and
    table 25.4 (abscissae and weights; here from ``numpy.polynomial.legendre.leggauss``).
    Exact for polynomials of degree 2n − 1 in time; no node lies on an edge.
    """
    start = np.atleast_1d(np.asarray(start_unix_s, dtype=float))
    end = np.atleast_1d(np.asarray(end_unix_s, dtype=float))
    if not 1 <= int(n) <= 64:
        raise ValueError(f"gauss_nodes must be between 1 and 64, got {n!r}")
    check_records(~(np.isfinite(start) & np.isfinite(end)) | (end < start), "end_unix_s",
                  "must be finite and must not precede start", kind="window")
    x, w = np.polynomial.legendre.leggauss(int(n))
    half = (end - start)[:, None] / 2.0
    times = (start[:, None] + half * (1.0 + x[None, :])).ravel()
    weights = (half * w[None, :]).ravel()
    window = np.repeat(np.arange(start.size), int(n))
    return Nodes(times, window, weights, np.zeros(times.size, bool))


def dose_relative_sigma(result: Columns, owner: np.ndarray, weight_s: np.ndarray, names: Sequence[str],
                        n_windows: int) -> dict[str, dict[str, np.ndarray]]:
    """Relative 1-sigma components {name: {component: (K,)}} of K window doses.

    ``result`` the evaluator's columns at the samples (with ``relative_sigma.<name>.<component>``
    columns, see ``models.engine.EngineResult``), ``owner`` (M,) each sample's window,
    ``weight_s`` (M,) its quadrature weight. The samples' errors are combined as they
    correlate (``models.uncertainty.dose_relative_sigma``). Empty when the evaluator
    gives no uncertainty.
    """
    out = {}
    for name in names:
        keys = {c: engine.sigma_column(name, c) for c in uncertainty.COMPONENTS}
        if not all(key in result for key in keys.values()):
            continue
        share = np.asarray(weight_s) * result.get(engine.effective_column(name), np.zeros(len(owner)))
        out[name] = uncertainty.dose_relative_sigma(
            owner, result["time_unix_s"], share, {c: result[key] for c, key in keys.items()}, n_windows)
    return out


def integrate(nodes: Nodes, per_window: Mapping[str, np.ndarray], n_windows: int,
              evaluate: Evaluator, skip: np.ndarray | None = None,
              per_node: Mapping[str, np.ndarray] | None = None,
              spectra: Sequence[str] | None = None,
              series: weather_series.SeriesWeights | None = None) -> dict[str, object]:
    """Dose per window from the evaluator at the nodes.

    ``per_window`` columns (K,) are repeated onto the nodes; ``per_node`` columns (M,)
    are used as they are; ``skip`` (M,) marks nodes known to be zero (not evaluated).
    ``spectra`` names the doses to return (default: whatever the evaluator returns).
    ``series`` (``models.weather_series.series_weights``) replaces the node weights by the
    product-integration weights of a weather series, scales the rates at the nodes by the
    factor in force there (peak UV Index, final rates) and gives each node of a series
    window the clouds uncertainty of the cloud source in force there; the windows it
    concerns must have been given no cloud factor of their own (the engine runs under
    clear sky there).
    Returns ``dose_j_m2`` {name: (K,)}, ``peak_uv_index`` (K,), ``final_rate_w_m2``
    {name: (K,)} (the rate at each window's end node), ``relative_sigma`` {name:
    {component: (K,)}} (:func:`dose_relative_sigma`), ``samples`` (evaluated nodes) and,
    with ``series``, ``unclouded_dose_j_m2`` {name: (K,)} (the same samples with the
    nodes' own weights: the dose without the series' clouds).
    """
    use = np.ones(nodes.window.size, bool) if skip is None else ~skip
    columns = {k: np.asarray(v)[nodes.window[use]] for k, v in per_window.items()}
    for k, v in (per_node or {}).items():
        columns[k] = np.asarray(v)[use]
    columns["time_unix_s"] = nodes.time_unix_s[use]
    result = evaluate_in_chunks(evaluate, columns)
    owner = nodes.window[use]
    weight = nodes.weight_s[use]
    cloud_weight = weight if series is None else series.weight_s[use]
    node_cmf = np.ones(owner.size) if series is None else series.node_cmf[use]
    end_node = np.cumsum(np.bincount(nodes.window, minlength=n_windows)) - 1
    doses, final, unclouded = {}, {}, {}
    names = engine.effective_names(result) if spectra is None else list(spectra)
    for name in names:
        rate = result.get(engine.effective_column(name), np.zeros(owner.size))
        doses[name] = np.bincount(owner, weights=cloud_weight * rate, minlength=n_windows)
        if series is not None:
            unclouded[name] = np.bincount(owner, weights=weight * rate, minlength=n_windows)
        at_nodes = np.zeros(nodes.window.size)
        at_nodes[use] = rate * node_cmf
        final[name] = at_nodes[end_node] if n_windows else np.zeros(0)
    peak = np.zeros(n_windows)
    if "uv_index" in result and owner.size:
        np.maximum.at(peak, owner, result["uv_index"] * node_cmf)
    result.setdefault("time_unix_s", columns["time_unix_s"])
    if series is not None:
        _series_cloud_sigma(result, series, use, ["uv_index", *names])
    sigma = dose_relative_sigma(result, owner, cloud_weight, list(doses), n_windows)
    out = {"dose_j_m2": doses, "peak_uv_index": peak, "final_rate_w_m2": final, "relative_sigma": sigma,
           "samples": int(owner.size), "result": result, "owner": owner, "weight_s": weight}
    if series is not None:
        out["unclouded_dose_j_m2"] = unclouded
    return out


def _series_cloud_sigma(result: Columns, series: weather_series.SeriesWeights, use: np.ndarray,
                        quantities: Sequence[str]) -> None:
    """At the nodes of series windows, the clouds component of each quantity's sigma from
    the cloud sources actually used there: the series' for the part of the node's weight
    its readings give, the fallback's for the rest (``models.uncertainty.cloud_relative_sigma``),
    so that weight × sigma is the node's cloud error. The engine ran those nodes under the
    clear sky, with no cloud error of its own."""
    on = series.on_series[use]
    if not on.any():
        return
    pick = np.flatnonzero(use)[on]
    error = (series.series_part_s[pick] * uncertainty.cloud_relative_sigma(series.series_source[pick],
                                                                         series.series_mean_cmf[pick])
             + series.fallback_part_s[pick] * uncertainty.cloud_relative_sigma(series.fallback_source[pick],
                                                                             series.fallback_cmf[pick]))
    weight = series.weight_s[pick]
    sigma = np.where(weight != 0.0, error / np.where(weight != 0.0, weight, 1.0), 0.0)
    for quantity in quantities:
        key, model = engine.sigma_column(quantity, "clouds"), engine.sigma_column(quantity, "model")
        if key in result and model in result:
            column = np.array(result[key], dtype=float)
            column[on] = np.where(np.asarray(result[model])[on] > 0.0, sigma, 0.0)  # zero where unlit
            result[key] = column


def window_doses(per_window: Mapping[str, np.ndarray], start_unix_s, end_unix_s,
                 evaluate: Evaluator, step_s: float = DEFAULT_WINDOW_STEP_S,
                 spectra: Sequence[str] | None = None,
                 cloud_steps: weather_series.CloudSteps | None = None) -> dict[str, object]:
    """Doses over K time windows, each at its own place and conditions.

    ``per_window``: Conditions columns (K,) except ``time_unix_s``. ``cloud_steps``
    (``models.weather_series.cloud_steps``, records = windows) gives windows a weather
    series: its factor acts over each reading's interval (product integration on the
    trapezoid's hat functions), the window's own ``cloud_modification_factor`` (else
    clear sky; its ``cloud_source``) where the series has no reading. See
    :func:`integrate` for the result; with ``cloud_steps`` also ``series_covered_s``
    (K,), the seconds covered by readings.
    """
    start = np.atleast_1d(np.asarray(start_unix_s, dtype=float))
    end = np.atleast_1d(np.asarray(end_unix_s, dtype=float))
    nodes = trapezoid_nodes(start, end, step_s)
    series = None
    if cloud_steps is not None:
        given = np.asarray(per_window.get("cloud_modification_factor", np.full(start.size, np.nan)), dtype=float)
        series = weather_series.series_weights(cloud_steps, np.arange(start.size), start, end, nodes.time_unix_s,
                                               nodes.window, nodes.weight_s, given, "trapezoid",
                                               fallback_source=per_window.get("cloud_source"))
        per_window = dict(per_window)
        per_window["cloud_modification_factor"] = np.where(series.series, np.nan, given)
    out = integrate(nodes, per_window, start.size, evaluate, spectra=spectra, series=series)
    out.pop("result"), out.pop("owner"), out.pop("weight_s"), out.pop("unclouded_dose_j_m2", None)
    if series is not None:
        out["series_covered_s"] = series.covered_s
    return out


# -- daily and seasonal totals for fields ---------------------------------------------

@dataclass
class FieldSeason:
    """Daily totals for F fields over D days; arrays (F, D) unless stated.

    ``daily_dose_j_m2`` and ``season_dose_j_m2`` (running sum) map spectrum name to
    doses; ``clear_sky_reference_j_m2`` is the same field's dose under the ozone
    climatology and no cloud (CMF 1), ``ratio_to_clear_sky`` their quotient (NaN on
    days with a zero reference, e.g. polar night). ``sun_state`` as in
    ``models.solar_geometry.sunrise_transit_sunset``. ``samples`` counts evaluated
    irradiance samples. ``daily_relative_sigma`` and ``season_relative_sigma`` map
    spectrum name to {component: (F, D)} relative 1-sigma uncertainties of the daily
    doses and of the running totals (``models.uncertainty``).
    """

    day_unix_s: np.ndarray
    sunrise_unix_s: np.ndarray
    sunset_unix_s: np.ndarray
    sun_state: np.ndarray
    daily_dose_j_m2: dict[str, np.ndarray]
    season_dose_j_m2: dict[str, np.ndarray]
    clear_sky_reference_j_m2: dict[str, np.ndarray]
    ratio_to_clear_sky: dict[str, np.ndarray]
    peak_uv_index: np.ndarray
    samples: int
    daily_relative_sigma: dict[str, dict[str, np.ndarray]] = field(default_factory=dict)
    season_relative_sigma: dict[str, dict[str, np.ndarray]] = field(default_factory=dict)
    series_share_of_daylight: np.ndarray | None = None
    """(F, D) share of each daylight period covered by weather-series readings (0 on days
    without daylight or readings); ``None`` when no series was given."""


def _climatological_ozone(latitude_deg, longitude_deg, time_unix_s):
    from uvdose.models.ozone_climatology import climatological_ozone_du, day_of_year_from_unix

    return climatological_ozone_du(latitude_deg, longitude_deg, day_of_year_from_unix(time_unix_s))


def field_season(per_field: Mapping[str, np.ndarray], day_unix_s, evaluate: Evaluator,
                 ozone_du=None, cloud_modification_factor=None, cloud_source=None,
                 step_s: float = DEFAULT_DAY_STEP_S, reference_ozone=_climatological_ozone,
                 spectra: Sequence[str] | None = None, day_quadrature: str = "gauss_legendre",
                 gauss_nodes: int = DEFAULT_GAUSS_NODES,
                 cloud_steps: weather_series.CloudSteps | None = None) -> FieldSeason:
    """Daily doses from civil dawn to dusk for F fields on D days, with season sums.

    ``per_field``: Conditions columns (F,) (at least latitude_deg, longitude_deg).
    ``day_unix_s`` (D,): UTC midnights; day d is the daylight period around the solar
    transit that falls on that UTC date, from dawn to dusk of civil twilight.
    ``ozone_du`` and ``cloud_modification_factor`` optional (F, D) per-day inputs, NaN =
    not given (resolver ozone, CMF 1); ``cloud_source`` (F, D) optionally says where each
    CMF came from (``models.uncertainty.CLOUD_SOURCES``).
    Quadrature over each daylight period: Gauss–Legendre with ``gauss_nodes`` nodes
    (default) or the composite trapezoid at ``step_s``.
    All field-days go through the evaluator together, in bounded chunks.
    The clear-sky reference reuses the first pass wherever that pass already used
    climatological ozone (reference = dose / CMF); only the remaining field-days are
    evaluated again with ``reference_ozone`` and CMF 1.
    ``cloud_steps`` (``models.weather_series.cloud_steps``, records = fields) gives fields
    a weather series: on every day of such a field the engine runs under clear sky and
    the series' factor enters through product-integration weights
    (``models.weather_series.series_weights``), the day's ``cloud_modification_factor``
    (else clear sky) and ``cloud_source`` where the series has no reading.
    """
    days = np.atleast_1d(np.asarray(day_unix_s, dtype=float))
    lat = np.asarray(per_field["latitude_deg"], dtype=float)
    lon = np.asarray(per_field["longitude_deg"], dtype=float)
    n_fields, n_days = lat.size, days.size
    shape = (n_fields, n_days)

    def per_day(values, name):
        if values is None:
            return np.full(shape, np.nan)
        arr = np.asarray(values, dtype=float)
        if arr.shape != shape:
            raise ValueError(f"{name} must have one value per field and day, shape {shape}, "
                             f"got {arr.shape}")
        return arr

    ozone = per_day(ozone_du, "ozone_du")
    cmf = per_day(cloud_modification_factor, "cloud_modification_factor")
    sunrise, _, sunset, state = sunrise_transit_sunset(days, lat, lon)
    # Integrate while the model's sky is lit: from dawn to dusk of civil twilight (true
    # elevation above −6°), where the clear-sky irradiance falls continuously to zero.
    rise, _, set_, model_state = sunrise_transit_sunset(
        days, lat, lon, elevation_deg=90.0 - CIVIL_TWILIGHT_ZENITH_DEG)
    start, end = rise.ravel(), set_.ravel()
    if day_quadrature == "gauss_legendre":
        nodes = gauss_legendre_nodes(start, end, gauss_nodes)
    elif day_quadrature == "trapezoid":
        nodes = trapezoid_nodes(start, end, step_s)
    else:
        raise ValueError(f"day_quadrature must be 'gauss_legendre' or 'trapezoid', got {day_quadrature!r}")
    skip = (model_state.ravel() == -1)[nodes.window]
    fields_of = np.repeat(np.arange(n_fields), n_days)
    per_window = {k: np.asarray(v)[fields_of] for k, v in per_field.items() if k != "time_unix_s"}
    per_window["ozone_du"] = ozone.ravel()
    per_window["cloud_modification_factor"] = cmf.ravel()
    if cloud_source is not None:
        per_window["cloud_source"] = np.asarray(cloud_source, dtype=object).reshape(-1)
    series = None
    if cloud_steps is not None:
        series = weather_series.series_weights(
            cloud_steps, fields_of, start, end, nodes.time_unix_s, nodes.window, nodes.weight_s, cmf.ravel(),
            day_quadrature, gauss_nodes=gauss_nodes, fallback_source=per_window.get("cloud_source"))
        per_window["cloud_modification_factor"] = np.where(series.series, np.nan, cmf.ravel())
    first = integrate(nodes, per_window, n_fields * n_days, evaluate, skip=skip, spectra=spectra, series=series)
    spectra = list(first["dose_j_m2"])
    daily = {k: v.reshape(shape) for k, v in first["dose_j_m2"].items()}

    # Clear-sky climatological reference.
    used_climatology = np.ones(n_fields * n_days, bool)
    if "ozone_source" in first["result"]:
        not_climatology = first["result"]["ozone_source"] != "climatology"
        used_climatology[np.unique(first["owner"][not_climatology])] = False
    # The factor each field-day was evaluated under: its own, or 1 under a weather series.
    cmf_flat = np.where(np.isnan(per_window["cloud_modification_factor"]), 1.0,
                        per_window["cloud_modification_factor"])
    evaluated = first.get("unclouded_dose_j_m2", first["dose_j_m2"])
    reusable = used_climatology & np.isnan(ozone.ravel()) & (cmf_flat > 0.0)
    reference = {k: np.where(reusable, v / np.where(reusable, cmf_flat, 1.0), 0.0)
                 for k, v in evaluated.items()}
    again = ~reusable[nodes.window] & ~skip
    if again.any():
        second_window = dict(per_window)
        second_window["cloud_modification_factor"] = np.ones(n_fields * n_days)
        second_window["cloud_source"] = np.full(n_fields * n_days, "factor", dtype=object)
        node_windows = nodes.window
        ref_ozone = reference_ozone(lat[fields_of][node_windows], lon[fields_of][node_windows],
                                    nodes.time_unix_s)
        second = integrate(nodes, second_window, n_fields * n_days, evaluate, skip=~again,
                           per_node={"ozone_du": ref_ozone}, spectra=spectra)
        for k, v in second["dose_j_m2"].items():
            reference[k] = np.where(reusable, reference[k], v)
        first["samples"] += second["samples"]
    reference = {k: v.reshape(shape) for k, v in reference.items()}
    daily_sigma = {name: {c: v.reshape(shape) for c, v in parts.items()}
                   for name, parts in first["relative_sigma"].items()}
    season_sigma = {name: uncertainty.running_total_relative_sigma(daily[name], parts)
                    for name, parts in daily_sigma.items()}
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = {k: np.where(reference[k] > 0.0, daily[k] / reference[k], np.nan) for k in daily}
    return FieldSeason(
        day_unix_s=days, sunrise_unix_s=sunrise, sunset_unix_s=sunset, sun_state=state,
        daily_dose_j_m2=daily,
        season_dose_j_m2={k: np.cumsum(v, axis=1) for k, v in daily.items()},
        clear_sky_reference_j_m2=reference, ratio_to_clear_sky=ratio,
        peak_uv_index=first["peak_uv_index"].reshape(shape), samples=first["samples"],
        daily_relative_sigma=daily_sigma, season_relative_sigma=season_sigma,
        series_share_of_daylight=None if series is None else _share(series.covered_s, end - start, shape))


def _share(covered_s: np.ndarray, length_s: np.ndarray, shape) -> np.ndarray:
    """Covered seconds over period lengths, 0 for empty periods, reshaped."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(length_s > 0.0, np.minimum(covered_s / np.where(length_s > 0.0, length_s, 1.0), 1.0),
                        0.0).reshape(shape)
