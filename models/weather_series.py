"""Cloud modification factors from a weather time series, and the dose weights they give.

A farm's weather station logs broadband global horizontal irradiance (GHI) every 1 to 60
minutes; weather feeds give cloud cover; some clients have a cloud factor of their own.
This module turns such a series, per record (a field or a time window), into a *step
function* of the cloud modification factor (CMF) in time, refusing readings that cannot
be real, and integrates that step function against the dose quadrature of
``models.dose`` so that each reading acts over its own interval only.

Readings and their intervals
    Each reading stands for an interval: the ``spacing`` seconds before its time stamp
    (``"interval_end"``, as most loggers stamp their means), after it
    (``"interval_start"``) or around it (``"interval_middle"``). A series' spacing is the
    median time between its consecutive readings (1 to 60 minutes); an interval is cut
    short where the neighbouring reading comes sooner, and a longer pause between two
    readings is a *gap*.

From a reading to a CMF
    * a cloud factor is used as it is (``clouds.cmf_from_value``);
    * cloud cover (fraction or oktas) goes through Kasten & Czeplak (1980)
      (``clouds.cmf_from_cloud_fraction``);
    * a GHI reading through its clear-sky index against the same clear sky as
      ``POST /v1/irradiance`` uses (``clouds.clear_sky_global_horizontal_w_m2``, pvlib's
      simplified Solis, Ineichen 2008, at the record's pressure), **averaged over the
      reading's interval** (two-point Gauss–Legendre), so that an interval mean is set
      against an interval mean. The broadband index is the UV factor (exponent 1;
      Thiel et al. 1997, see ``models.clouds``). Below 5° solar elevation the index is
      not determinable (``clouds.MIN_SOLAR_ELEVATION_FOR_CLEAR_SKY_INDEX_DEG``): such a
      reading takes the index of the nearest determinable reading of its series within
      :data:`LOW_SUN_FILL_S`, else it counts as a gap.

Readings that cannot be real (``RecordErrors`` naming each reading, never dropped)
    * time stamps not later than the previous reading of the same record;
    * GHI above :data:`NIGHT_GHI_MAX_W_M2` while the sun is below
      :data:`NIGHT_ELEVATION_DEG` for the whole interval (a clock in local time instead of
      UTC shows up here first);
    * GHI outside the BSRN "physically possible" limits (Long & Dutton 2010), or negative
      while the index is determinable;
    * a clear-sky index above 1.5 (``clouds.CMF_RANGE``), or above
      :data:`SUSTAINED_INDEX_MAX` for longer than :data:`ENHANCEMENT_MAX_S` in a row:
      broken-cloud enhancement lasts minutes, not hours (Gueymard 2017).

Integration (why not sample the series at the dose nodes)
    The engine's UV scales linearly with the CMF (``models.engine`` multiplies direct and
    diffuse alike), so a dose is D = ∫ c(t) E(t) dt with E the clear-sky effective
    irradiance. E is smooth and the quadrature nodes of ``models.dose`` resolve it; c(t)
    is a step function that they do not. So the engine is run at the nodes under the
    clear sky, and each node k gets the *product-integration* weight
    W_k = ∫ c(t) φ_k(t) dt, φ_k the interpolation basis of the rule (the Lagrange
    polynomials of the Gauss–Legendre nodes, the hat functions of the trapezoid), giving
    D = Σ_k W_k E(t_k): exact for any step function when E is a polynomial of the rule's
    degree, and exactly the clear-sky dose when c ≡ 1 (Davis & Rabinowitz 1984, *Methods
    of Numerical Integration*, 2nd ed., §2.5, product integration). Sampling the series at
    eight Gauss–Legendre nodes instead turns one 10-minute reading into about an hour and a
    half of the day (``tests/models/test_weather_series.py`` measures both on broken-cloud
    days). Where the series has no reading the fallback factor applies: the record's own
    daily or window value where the client gave one, else clear sky (CMF 1).

References
----------
.. [1] F. Kasten and G. Czeplak (1980), Solar Energy 24:177–189.
.. [2] P. Ineichen (2008), "A broadband simplified version of the Solis clear sky model",
   Solar Energy 82:758–762.
.. [3] S. Thiel, K. Steiner and H. K. Seidlitz (1997), "Modification of global
   erythemally effective irradiance by clouds", Photochem. Photobiol. 65:969–973.
.. [4] C. N. Long and E. G. Dutton (2010), "BSRN Global Network recommended QC tests,
   V2.0", BSRN technical report (limits from memory).
.. [5] C. A. Gueymard (2017), "Cloud and albedo enhancement impacts on solar irradiance
   using high-frequency measurements from thermopile and photodiode radiometers",
   Solar Energy 153:755–765 (durations from memory).
.. [6] P. J. Davis and P. Rabinowitz (1984), *Methods of Numerical Integration*, 2nd ed.,
   Academic Press.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from uvdose.models import clouds
from uvdose.models.record_errors import RecordError, RecordErrors
from uvdose.models.solar_geometry import solar_position, surface_pressure_hpa

READING_KINDS = ("measured_ghi_w_m2", "cloud_cover_fraction", "cloud_cover_oktas",
                 "cloud_modification_factor")
"""What a series may hold, by the models' names (one kind per record's series)."""

UNCERTAINTY_SOURCE = {"measured_ghi_w_m2": "irradiance", "cloud_cover_fraction": "cover",
                      "cloud_cover_oktas": "cover", "cloud_modification_factor": "factor"}
"""The cloud source kind of each reading kind, in the vocabulary of the answer's
uncertainty (``none``, ``factor``, ``cover``, ``irradiance``)."""

TIME_STAMPS = ("interval_end", "interval_start", "interval_middle")
"""Which end of its interval a reading's time stamp marks."""

MIN_SPACING_S, MAX_SPACING_S = 60.0, 3600.0
"""A series' spacing (median time between consecutive readings) must lie in 1–60 min."""

NIGHT_ELEVATION_DEG = -2.0
NIGHT_GHI_MAX_W_M2 = 10.0
"""Night: the sun more than 2° below the horizon for a reading's whole interval; a GHI
reading above 10 W m⁻² then cannot be sunlight (twilight and pyranometer offsets stay a
few W m⁻²; common practice, no source)."""

BSRN_MIN_GHI_W_M2 = -4.0
"""Physically possible minimum of GHI (Long & Dutton 2010, from memory): thermopile
pyranometers read a few W m⁻² below zero at night."""
BSRN_SOLAR_CONSTANT_W_M2 = 1361.0
"""Solar constant of the BSRN limit, scaled by 1/R² (from memory)."""

SUSTAINED_INDEX_MAX = 1.25
ENHANCEMENT_MAX_S = 1200.0
"""Cloud-edge enhancement lifts GHI above the clear sky for seconds to minutes, rarely
above 1.25 × clear sky in a 10-minute mean (Gueymard 2017, from memory); a clear-sky index
above 1.25 for more than 20 minutes in a row is a calibration, unit or clock error."""

CHUNK_READINGS = 200_000
"""Readings per solar-position call (bounds memory: two instants per reading)."""
MAX_ELEVATION_RATE_DEG_S = 15.0 / 3600.0
"""The sun's elevation changes by at most the hour angle's rate, 15° an hour."""

LOW_SUN_FILL_S = 7200.0
"""A GHI reading with the sun below 5° takes the clear-sky index of the nearest reading of
its series with the sun higher, if one lies within 2 h; otherwise it is a gap."""


@dataclass(frozen=True)
class CloudSteps:
    """Cloud modification factor as a step function of time, for K records.

    ``owner`` (P,) record index of each step, ``start_unix_s``/``end_unix_s`` (P,) its
    interval (steps of one record sorted and not overlapping), ``cmf`` (P,) the factor;
    ``kind`` (K,) the reading kind of each record's series (:data:`READING_KINDS`, ``""``
    for records without one).
    """

    owner: np.ndarray
    start_unix_s: np.ndarray
    end_unix_s: np.ndarray
    cmf: np.ndarray
    kind: np.ndarray

    @property
    def has_series(self) -> np.ndarray:
        """(K,) whether each record has a series."""
        return self.kind != ""


def _errors(readings, field: str | None, reason: str, into: list) -> None:
    """Add one error per reading (indices as given) to ``into``."""
    into.extend(RecordError(int(i), field, reason, kind="reading") for i in np.asarray(readings).ravel())


def reading_intervals(owner, time_unix_s, n_records: int, time_stamp: str = "interval_end"):
    """Intervals of the readings of K records' series.

    ``owner`` (R,) record index of each reading, ``time_unix_s`` (R,) its time stamp, in
    any interleaving of records, each record's readings in time order. Returns (order (R,)
    readings sorted by record then time, start (R,), end (R,), spacing_s (K,), NaN for
    records without readings), all but ``order`` in the sorted order.

    Raises ``RecordErrors`` (index: the reading's position as given, field
    ``time_unix_s``) for a time not later than the record's previous reading, and (field
    ``None``, for each reading of the record) for a series whose spacing is outside
    1–60 minutes or that has a single reading.
    """
    if time_stamp not in TIME_STAMPS:
        raise ValueError(f"time_stamp must be one of {TIME_STAMPS}, got {time_stamp!r}")
    owner = np.asarray(owner, dtype=np.int64)
    times = np.asarray(time_unix_s, dtype=float)
    order = np.argsort(owner, kind="stable")
    o, t = owner[order], times[order]
    same = np.concatenate([[False], o[1:] == o[:-1]])
    step = np.concatenate([[np.inf], np.diff(t)])
    errors: list[RecordError] = []
    _errors(order[same & ~(step > 0)], "time_unix_s",
            "is not later than the previous reading of this series (out of order or repeated)", errors)
    if errors:
        raise RecordErrors(errors)
    spacing = np.full(n_records, np.nan)
    gaps = np.where(same, step, np.nan)
    counts = np.bincount(o, minlength=n_records)
    if o.size:
        starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
        for record in np.flatnonzero(counts > 1):  # one median per record's series
            spacing[record] = np.round(np.median(gaps[starts[record] + 1:starts[record] + counts[record]]))
    bad_record = (counts == 1) | ((counts > 1) & ~((spacing >= MIN_SPACING_S) & (spacing <= MAX_SPACING_S)))
    if bad_record.any():
        for record in np.flatnonzero(bad_record):
            reason = ("is the only reading of its series: a series needs two or more readings 1–60 minutes apart"
                      if counts[record] == 1 else
                      f"belongs to a series whose readings are {spacing[record] / 60:g} minutes apart (median); "
                      "a series needs 1–60 minutes between readings")
            _errors(order[o == record], None, reason, errors)
        raise RecordErrors(sorted(errors, key=lambda e: e.index))
    own = spacing[o]
    before = np.minimum(own, np.where(same, step, np.inf))
    after_step = np.concatenate([np.diff(t), [np.inf]])
    after = np.minimum(own, np.where(np.concatenate([same[1:], [False]]), after_step, np.inf))
    if time_stamp == "interval_end":
        start, end = t - before, t
    elif time_stamp == "interval_start":
        start, end = t, t + after
    else:
        start, end = t - before / 2.0, t + after / 2.0
    return order, start, end, spacing


def clear_sky_ghi_mean_w_m2(start_unix_s, end_unix_s, latitude_deg, longitude_deg,
                            elevation_m=np.nan, pressure_hpa=np.nan):
    """Mean clear-sky GHI over intervals, W m⁻², and the sun over them.

    The clear sky is ``clouds.clear_sky_global_horizontal_w_m2`` (pvlib simplified Solis,
    Ineichen 2008) at the pressure the engine resolves (given, else from elevation),
    averaged by two-point Gauss–Legendre over each interval (Abramowitz & Stegun 1964,
    25.4.29; exact for a cubic in time). Returns (mean GHI (R,), mean solar elevation of
    the two nodes (R,) degrees, an upper bound of the solar elevation over the whole
    interval (R,) degrees: the higher node plus the most the sun can rise in the rest of
    the interval, 0.25° a minute, Earth–Sun distance (R,) AU).
    """
    start = np.asarray(start_unix_s, dtype=float)
    end = np.asarray(end_unix_s, dtype=float)
    shape = start.shape
    lat, lon, elevation, pressure = (np.broadcast_to(np.asarray(v, dtype=float), shape)
                                     for v in (latitude_deg, longitude_deg, elevation_m, pressure_hpa))
    height = np.where(np.isnan(elevation), 0.0, elevation)
    resolved = surface_pressure_hpa(height, pressure)
    half, middle = (end - start) / 2.0, (end + start) / 2.0
    node = 1.0 / np.sqrt(3.0)
    times = np.concatenate([middle - node * half, middle + node * half])
    sun = solar_position(times, np.tile(lat, 2), np.tile(lon, 2), np.tile(height, 2), np.tile(resolved, 2))
    zenith = sun.zenith_deg.reshape(2, -1)
    distance = sun.earth_sun_distance_au.reshape(2, -1)
    mean = clouds.clear_sky_global_horizontal_w_m2(zenith, resolved[None, :],
                                                   earth_sun_distance_au=distance).mean(axis=0)
    elevation_deg = 90.0 - zenith
    # The sun's elevation changes by at most 15° an hour (the hour angle's rate).
    highest = elevation_deg.max(axis=0) + MAX_ELEVATION_RATE_DEG_S * (1.0 - node) * half
    return mean, elevation_deg.mean(axis=0), highest, distance[0]


def _irradiance_cmf(ghi, order, start, end, owner_sorted, place, errors):
    """Clear-sky indices of GHI readings (sorted order), with the plausibility checks;
    NaN where not determinable (sun below 5°, no usable neighbour within 2 h)."""
    lat, lon, elevation, pressure = (np.asarray(v, dtype=float)[owner_sorted] for v in place)
    parts = [clear_sky_ghi_mean_w_m2(start[i:i + CHUNK_READINGS], end[i:i + CHUNK_READINGS],
                                     *(v[i:i + CHUNK_READINGS] for v in (lat, lon, elevation, pressure)))
             for i in range(0, start.size, CHUNK_READINGS)]
    mean_clear, elevation_mid, highest, distance = (np.concatenate(column) for column in zip(*parts))
    night = highest < NIGHT_ELEVATION_DEG
    cos_max = np.sin(np.radians(np.clip(highest, -90.0, 90.0)))
    usable = elevation_mid >= clouds.MIN_SOLAR_ELEVATION_FOR_CLEAR_SKY_INDEX_DEG
    index = np.where(usable, ghi / np.where(usable, mean_clear, 1.0), np.nan)
    physical_max = 1.5 * BSRN_SOLAR_CONSTANT_W_M2 / distance ** 2 * np.clip(cos_max, 0.0, None) ** 1.2 + 100.0

    taken = np.zeros(ghi.size, bool)

    def flag(mask, field, reason):  # one reason per reading: the first that applies
        mask = mask & ~taken
        taken[mask] = True
        _errors(order[mask], field, reason, errors)

    flag(night & (ghi > NIGHT_GHI_MAX_W_M2), "measured_ghi_w_m2",
         f"is above {NIGHT_GHI_MAX_W_M2:g} W m-2 while the sun is more than {-NIGHT_ELEVATION_DEG:g} degrees "
         "below the horizon for the whole interval: check the time stamps (UTC offset) and the sensor")
    flag((ghi < BSRN_MIN_GHI_W_M2) | (ghi > physical_max), "measured_ghi_w_m2",
         "is outside the physically possible range for that sun (BSRN limits: -4 W m-2 up to "
         "1.5 S0 cos(zenith)^1.2 + 100 W m-2): check units and sensor")
    flag(usable & (ghi < 0.0), "measured_ghi_w_m2", "is negative while the sun is up: check the sensor's zero")
    flag(usable & (index > clouds.CMF_RANGE[1]), "measured_ghi_w_m2", clouds.IMPLAUSIBLE_MEASUREMENT)
    # Runs of readings above SUSTAINED_INDEX_MAX, within one series and without a pause.
    high = usable & (index > SUSTAINED_INDEX_MAX)
    joined = np.concatenate([[False], high[1:] & high[:-1] & (owner_sorted[1:] == owner_sorted[:-1])
                             & (start[1:] <= end[:-1])])
    run = np.cumsum(high & ~joined)
    duration = np.bincount(run, weights=np.where(high, end - start, 0.0))
    flag(high & (duration[run] > ENHANCEMENT_MAX_S), "measured_ghi_w_m2",
         f"is more than {SUSTAINED_INDEX_MAX:g} times the clear-sky global irradiance for over "
         f"{ENHANCEMENT_MAX_S / 60:g} minutes in a row; cloud-edge enhancement lasts minutes: check "
         "calibration, units and time stamps")
    if errors:
        return index
    # Low sun: the nearest determinable index of the same series within LOW_SUN_FILL_S.
    middle = (start + end) / 2.0
    fill = ~usable
    if fill.any() and usable.any():
        key = owner_sorted * 1.0e10 + (middle - middle.min())
        known = np.flatnonzero(usable)
        position = np.searchsorted(key[known], key[fill])
        left = known[np.clip(position - 1, 0, known.size - 1)]
        right = known[np.clip(position, 0, known.size - 1)]
        candidates = np.stack([left, right])
        distance_s = np.abs(key[candidates] - key[fill][None, :])
        best = candidates[np.argmin(distance_s, axis=0), np.arange(candidates.shape[1])]
        near = distance_s.min(axis=0) <= LOW_SUN_FILL_S
        index[np.flatnonzero(fill)[near]] = index[best[near]]
    return index


def cloud_steps(owner, time_unix_s, readings: dict, n_records: int, latitude_deg, longitude_deg,
                elevation_m=None, pressure_hpa=None, time_stamp: str = "interval_end") -> CloudSteps:
    """The CMF step functions of K records from their readings.

    ``owner`` (R,) record of each reading, ``time_unix_s`` (R,) its time stamp;
    ``readings`` maps reading kinds (:data:`READING_KINDS`) to (R,) values, NaN where a
    reading gives another kind (each reading exactly one, each record's series one
    kind). ``latitude_deg``, ``longitude_deg``, ``elevation_m``, ``pressure_hpa`` (K,)
    per record (NaN: not given). Raises ``RecordErrors`` naming each reading at fault
    (index: its position as given; field: its kind, ``time_unix_s``, or ``None`` for the
    reading as a whole), every check run before any is raised.
    """
    owner = np.asarray(owner, dtype=np.int64)
    n = owner.size
    nan_k = np.full(n_records, np.nan)
    values = {kind: np.asarray(readings[kind], dtype=float) for kind in READING_KINDS if kind in readings}
    present = np.stack([~np.isnan(v) for v in values.values()]) if values else np.zeros((0, n), bool)
    errors: list[RecordError] = []
    _errors(np.flatnonzero(present.sum(axis=0) != 1), None,
            "must give exactly one reading: a global irradiance, a cloud cover (fraction or oktas) or a "
            "cloud factor", errors)
    kinds = np.array(list(values), dtype=object)
    reading_kind = np.where(present.any(axis=0), kinds[np.argmax(present, axis=0)] if kinds.size else "", "")
    first_kind = np.full(n_records, "", dtype=object)
    if n:
        records, first = np.unique(owner, return_index=True)  # the first reading of each record
        first_kind[records] = reading_kind[first]
    _errors(np.flatnonzero((reading_kind != first_kind[owner]) & (present.sum(axis=0) == 1)), None,
            "is of another kind than the first reading of its series; a series gives one kind of reading",
            errors)
    if errors:
        raise RecordErrors(sorted(errors, key=lambda e: e.index))
    order, start, end, _ = reading_intervals(owner, time_unix_s, n_records, time_stamp)
    owner_sorted = owner[order]
    cmf = np.full(n, np.nan)
    sorted_kind = reading_kind[order]
    for kind, column in values.items():
        mine = sorted_kind == kind
        if not mine.any():
            continue
        given = column[order][mine]
        if kind == "measured_ghi_w_m2":
            place = (latitude_deg, longitude_deg, nan_k if elevation_m is None else elevation_m,
                     nan_k if pressure_hpa is None else pressure_hpa)
            index = np.full(n, np.nan)
            ghi = np.full(n, np.nan)
            ghi[mine] = given
            sub = np.flatnonzero(mine)
            index[sub] = _irradiance_cmf(ghi[sub], order[sub], start[sub], end[sub], owner_sorted[sub], place,
                                         errors)
            cmf[mine] = index[mine]
            continue
        try:
            cmf[mine] = clouds.resolve_cmf(**{kind: given})
        except RecordErrors as raised:
            where = order[np.flatnonzero(mine)]
            errors.extend(RecordError(int(where[e.index]), e.field, e.reason, kind="reading") for e in raised.errors)
    if errors:
        raise RecordErrors(sorted(errors, key=lambda e: e.index))
    keep = ~np.isnan(cmf)
    return CloudSteps(owner=owner_sorted[keep], start_unix_s=start[keep], end_unix_s=end[keep],
                      cmf=cmf[keep], kind=first_kind)


# -- integration against the dose quadrature ------------------------------------------

@dataclass(frozen=True)
class SeriesWeights:
    """What a series does to the nodes of W windows (``models.dose.Nodes``).

    ``weight_s`` (M,) the product-integration weights replacing ``Nodes.weight_s`` (the
    same as those for windows without a series); ``node_cmf`` (M,) the factor in force
    at each node of a series window, 1 elsewhere (for peak values and final rates);
    ``covered_s`` (W,) seconds of each window covered by readings; ``series`` (W,) whether
    the window's record has a series; ``on_series`` (M,) whether each node belongs to such
    a window. For the answer's uncertainty, each such node's weight splits into
    ``series_part_s`` (Σ c ∫ φ_k over the readings) and ``fallback_part_s`` (the fallback
    factor times the rest), with their cloud source kinds (``series_source``: the series'
    :data:`UNCERTAINTY_SOURCE`; ``fallback_source``) and factors (``series_mean_cmf``: the
    window's time-weighted mean series factor; ``fallback_cmf``), all (M,).
    """

    weight_s: np.ndarray
    node_cmf: np.ndarray
    covered_s: np.ndarray
    series: np.ndarray
    on_series: np.ndarray
    series_part_s: np.ndarray
    fallback_part_s: np.ndarray
    series_source: np.ndarray
    series_mean_cmf: np.ndarray
    fallback_source: np.ndarray
    fallback_cmf: np.ndarray


def _pieces(steps: CloudSteps, window_record, window_start, window_end):
    """Steps cut to the windows they overlap: (window (P,), start, end, cmf), sorted by
    window then time. Windows of one record must not overlap each other."""
    record = np.asarray(window_record, dtype=np.int64)
    w_start = np.asarray(window_start, dtype=float)
    w_end = np.asarray(window_end, dtype=float)
    empty = (np.zeros(0, np.int64), np.zeros(0), np.zeros(0), np.zeros(0))
    if not (record.size and steps.owner.size):
        return empty
    origin = min(float(w_start.min()), float(steps.start_unix_s.min()))
    span = 1.0e10  # record × span + seconds since origin: one sorted key over records
    by_window = np.lexsort((w_start, record))
    end_key = record[by_window] * span + (w_end[by_window] - origin)
    first = np.searchsorted(end_key, steps.owner * span + (steps.start_unix_s - origin), side="right")
    parts = []
    for shift in range(3):  # an interval of at most an hour meets at most a few abutting windows
        position = first + shift
        inside = position < by_window.size
        window = by_window[np.minimum(position, by_window.size - 1)]
        a = np.maximum(steps.start_unix_s, w_start[window])
        b = np.minimum(steps.end_unix_s, w_end[window])
        inside &= (record[window] == steps.owner) & (b > a)
        parts.append((window[inside], a[inside], b[inside], steps.cmf[inside]))
    window, a, b, cmf = (np.concatenate(columns) for columns in zip(*parts))
    order = np.lexsort((a, window))
    return window[order], a[order], b[order], cmf[order]


def _lagrange_coefficients(n: int) -> np.ndarray:
    """C with ℓ_k(x) = Σ_j C[j, k] x^j for the n Gauss–Legendre nodes on [−1, 1]."""
    x, _ = np.polynomial.legendre.leggauss(n)
    return np.linalg.inv(np.vander(x, n, increasing=True))


def series_weights(steps: CloudSteps, window_record, window_start, window_end, node_time, node_window,
                   node_weight_s, fallback_cmf, rule: str, gauss_nodes: int = 8,
                   fallback_source=None, chunk: int = 200_000) -> SeriesWeights:
    """Product-integration weights of dose nodes under the records' CMF step functions.

    ``window_record`` (W,) the record each window belongs to, ``window_start`` and
    ``window_end`` (W,) its limits; ``node_time``, ``node_window``, ``node_weight_s`` (M,)
    the nodes (``models.dose.Nodes``: for ``rule="gauss_legendre"``, ``gauss_nodes`` per
    window in order; for ``rule="trapezoid"``, each window's nodes in time order from its
    start to its end); ``fallback_cmf`` (W,) the factor where the series has no reading
    (NaN: clear sky, 1), ``fallback_source`` (W,) its cloud source kind (``""`` or
    default: ``factor`` where a fallback factor is given, else ``none``). The engine runs
    under the clear sky at the nodes of windows
    whose record has a series; the windows of other records keep their weights (their
    engine run carries their own factor) and a node factor of 1.
    """
    node_window = np.asarray(node_window, dtype=np.int64)
    node_time = np.asarray(node_time, dtype=float)
    base = np.asarray(node_weight_s, dtype=float)
    w_start = np.asarray(window_start, dtype=float)
    w_end = np.asarray(window_end, dtype=float)
    record = np.asarray(window_record, dtype=np.int64)
    n_windows = w_start.size
    given = np.asarray(fallback_cmf, dtype=float)
    fallback = np.where(np.isnan(given), 1.0, given)
    series = steps.has_series[record]
    on_series = series[node_window]
    window, a, b, cmf = _pieces(steps, record, w_start, w_end)
    covered = np.bincount(window, weights=b - a, minlength=n_windows)
    # Σ over pieces of (1, c) × ∫ φ_k: each node's covered basis integral and its series part.
    covered_basis, series_part = _basis_integrals(rule, int(gauss_nodes), np.stack([np.ones(cmf.size), cmf], 1),
                                                  window, a, b, w_start, w_end, node_time, node_window, chunk).T
    f = fallback[node_window]
    fallback_part = np.where(on_series, f * (base - covered_basis), 0.0)
    series_part = np.where(on_series, series_part, 0.0)
    weight = np.where(on_series, series_part + fallback_part, base)
    node_cmf = np.where(on_series, _value_at(node_time, node_window, window, a, b, cmf, fallback, w_start), 1.0)
    inferred = np.where(np.isnan(given), "none", "factor").astype(object)
    source = inferred if fallback_source is None else np.asarray(fallback_source, dtype=object)
    source = np.where(source.astype(str) == "", inferred, source)
    record_source = np.array([UNCERTAINTY_SOURCE.get(kind, "none") for kind in steps.kind], dtype=object)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_cmf = np.bincount(window, weights=cmf * (b - a), minlength=n_windows) / covered
    return SeriesWeights(weight_s=weight, node_cmf=node_cmf, covered_s=covered, series=series,
                         on_series=on_series, series_part_s=series_part, fallback_part_s=fallback_part,
                         series_source=record_source[record][node_window],
                         series_mean_cmf=np.where(covered > 0.0, mean_cmf, 1.0)[node_window],
                         fallback_source=source[node_window], fallback_cmf=fallback[node_window])


def _basis_integrals(rule, gauss_nodes, values, window, a, b, w_start, w_end, node_time, node_window, chunk):
    """(M, V): Σ over pieces p of values[p, v] ∫_p φ_k dt for every node k, φ_k the
    interpolation basis of the rule (Lagrange polynomials of the Gauss–Legendre nodes, or
    the trapezoid's hat functions)."""
    out = np.zeros((node_time.size, values.shape[1]))
    if rule == "gauss_legendre":
        n = gauss_nodes
        coefficients = _lagrange_coefficients(n)
        powers = np.arange(1, n + 1)
        for i in range(0, window.size, chunk):
            part = slice(i, i + chunk)
            w = window[part]
            half = (w_end[w] - w_start[w]) / 2.0
            safe = np.where(half > 0.0, half, 1.0)
            xa = (a[part] - w_start[w]) / safe - 1.0
            xb = (b[part] - w_start[w]) / safe - 1.0
            moments = (xb[:, None] ** powers - xa[:, None] ** powers) / powers * half[:, None]  # ∫ x^j dt
            basis = moments @ coefficients  # (P, n): ∫_p ℓ_k dt
            target = (w[:, None] * n + np.arange(n)).ravel()
            for v in range(values.shape[1]):
                np.add.at(out[:, v], target, (basis * values[part, v, None]).ravel())
    elif rule == "trapezoid":
        for v in range(values.shape[1]):
            out[:, v] = _hat_weights(node_time, node_window, window, a, b, values[:, v], w_start)
    else:
        raise ValueError(f"rule must be 'gauss_legendre' or 'trapezoid', got {rule!r}")
    return out


def _piece_lookup(time, time_window, window, a, w_start):
    """For each time (in window ``time_window``): the last piece of that window starting at
    or before it (index, and whether there is one)."""
    origin = float(min(w_start.min(initial=0.0), a.min(initial=0.0)))
    span = 1.0e10
    piece_key = window * span + (a - origin)
    key = time_window * span + (time - origin)
    p = np.searchsorted(piece_key, key, side="right") - 1
    found = p >= 0
    p = np.clip(p, 0, max(window.size - 1, 0))
    if window.size:
        found &= window[p] == time_window
    else:
        found[:] = False
    return p, found


def _value_at(time, time_window, window, a, b, cmf, fallback, w_start):
    """The step function's value at each time (the fallback outside every piece)."""
    p, found = _piece_lookup(time, time_window, window, a, w_start)
    if window.size:
        return np.where(found & (time <= b[p]), cmf[p], fallback[time_window])
    return fallback[time_window].astype(float)


def _hat_weights(node_time, node_window, window, a, b, excess, w_start):
    """Σ over pieces of excess × ∫ hat_k: the trapezoid's product weights, from the
    cumulative zeroth and first moments of the excess at every node time."""
    t0 = w_start[window]
    mass = excess * (b - a)
    first = excess * ((b - t0) ** 2 - (a - t0) ** 2) / 2.0
    # Running sums per window (pieces are sorted by window then time).
    cum_mass = np.cumsum(mass) - mass
    cum_first = np.cumsum(first) - first
    start_of = np.concatenate([[True], window[1:] != window[:-1]]) if window.size else np.zeros(0, bool)
    base_index = np.maximum.accumulate(np.where(start_of, np.arange(window.size), 0)) if window.size else window
    cum_mass -= cum_mass[base_index] if window.size else 0.0
    cum_first -= cum_first[base_index] if window.size else 0.0

    def moments(time, time_window):
        p, found = _piece_lookup(time, time_window, window, a, w_start)
        if not window.size:
            return np.zeros(time.size), np.zeros(time.size)
        origin = w_start[time_window]
        upto = np.clip(time, a[p], b[p])
        g0 = cum_mass[p] + excess[p] * (upto - a[p])
        g1 = cum_first[p] + excess[p] * ((upto - origin) ** 2 - (a[p] - origin) ** 2) / 2.0
        return np.where(found, g0, 0.0), np.where(found, g1, 0.0)

    g0, g1 = moments(node_time, node_window)
    weight = np.zeros(node_time.size)
    if node_time.size < 2:
        return weight
    same = node_window[1:] == node_window[:-1]
    left = np.flatnonzero(same)
    h = node_time[left + 1] - node_time[left]
    m0 = g0[left + 1] - g0[left]
    m1 = g1[left + 1] - g1[left]
    offset = node_time[left] - w_start[node_window[left]]
    with np.errstate(invalid="ignore", divide="ignore"):
        rising = np.where(h > 0.0, (m1 - offset * m0) / np.where(h > 0.0, h, 1.0), 0.0)  # ∫ excess·u dt
    np.add.at(weight, left, m0 - rising)
    np.add.at(weight, left + 1, rising)
    return weight
