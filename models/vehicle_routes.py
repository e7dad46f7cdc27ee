"""Vehicle (driver) routes: interpolation along timestamped positions, heading, and the dose on
a receiver facing the driver's side window.

A route is an ordered list of points (time, latitude, longitude), each optionally
marked ``stop`` (parked, engine off, from this point to the next) or ``gap`` (no
tracking from this point to the next). The segment after a marked point is left out
of the in-cab dose and its duration reported (parked time: the driver is assumed out
of the cab; outdoor exposure then belongs in a time-window request).

Between consecutive points the vehicle moves linearly in latitude and longitude
(longitude difference taken the short way across the antimeridian) at constant speed:
an adequate local approximation for the short legs of tracking data (a leg of 10 km
at 50° latitude departs from the great circle by metres). The heading of each leg is
its initial great-circle bearing,

    θ = atan2(sin Δλ cos φ2, cos φ1 sin φ2 − sin φ1 cos φ2 cos Δλ)

(standard spherical trigonometry, e.g. Snyder 1987, *Map Projections — A Working
Manual*, USGS PP 1395, eq. 5-4b). A leg without movement keeps the previous leg's
heading (or the next one's at the start of a route).

The receiver is vertical (tilt 90°) and faces out of the driver's side window:
azimuth = heading − 90° for a driver on the left (right-hand traffic), heading + 90°
for a driver on the right (left-hand traffic). The cab roof shades the direct beam
whenever the sun is higher than ``roof_cutoff_elevation_deg`` (default 50°, common
practice, no source: the top of a side window sits about a hand above eye level). In
the isotropic receiver model the sky and ground terms do not depend on the receiver's
azimuth, and a vertical receiver facing away from the sun gets no beam, so the shaded
samples are evaluated with the receiver turned away from the sun: exact within that
model, and it keeps the engine's interface. The cab's frame and roof also hide part
of the sky: ``sky_view_factor`` (default 0.5, common practice, no source).

Doses integrate over the driving intervals with the trapezoid nodes of
``models.dose`` (edges exact, interior nodes on multiples of the step).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np

from uvdose.models import dose
from uvdose.models.record_errors import RecordError, RecordErrors, check_records
from uvdose.models.solar_geometry import solar_position

DEFAULT_ROUTE_STEP_S = 300.0
"""Default integration step along routes (5 min)."""
DEFAULT_ROOF_CUTOFF_ELEVATION_DEG = 50.0
DEFAULT_CAB_SKY_VIEW_FACTOR = 0.5
DRIVER_SIDE_OFFSET_DEG = {"left": -90.0, "right": 90.0}
"""Receiver azimuth = heading + offset; left = right-hand traffic, right = left-hand."""


@dataclass(frozen=True)
class RoutePoints:
    """All points of R routes, concatenated in route order; arrays (P,)."""

    route: np.ndarray
    time_unix_s: np.ndarray
    latitude_deg: np.ndarray
    longitude_deg: np.ndarray
    stop: np.ndarray
    gap: np.ndarray

    @property
    def n_routes(self) -> int:
        return int(self.route.max()) + 1 if self.route.size else 0


def points_from_lists(routes: Sequence[Mapping[str, Sequence]]) -> RoutePoints:
    """Concatenate per-route dicts of lists (``time_unix_s``, ``latitude_deg``,
    ``longitude_deg``, optional ``stop``, ``gap``) into :class:`RoutePoints`."""
    counts = [len(r["time_unix_s"]) for r in routes]

    def cat(key, default):
        parts = [np.asarray(r.get(key, [default] * c), dtype=type(default)) for r, c in zip(routes, counts)]
        return np.concatenate(parts) if parts else np.zeros(0, type(default))

    return RoutePoints(np.repeat(np.arange(len(routes)), counts), cat("time_unix_s", 0.0),
                       cat("latitude_deg", 0.0), cat("longitude_deg", 0.0),
                       cat("stop", False), cat("gap", False))


def initial_bearing_deg(lat1_deg, lon1_deg, lat2_deg, lon2_deg) -> np.ndarray:
    """Initial great-circle bearing from point 1 to point 2, degrees clockwise from
    north in [0, 360) (Snyder 1987, eq. 5-4b)."""
    p1, p2 = np.radians(lat1_deg), np.radians(lat2_deg)
    dl = np.radians(np.asarray(lon2_deg, dtype=float) - lon1_deg)
    y = np.sin(dl) * np.cos(p2)
    x = np.cos(p1) * np.sin(p2) - np.sin(p1) * np.cos(p2) * np.cos(dl)
    return np.degrees(np.arctan2(y, x)) % 360.0


def _validate(points: RoutePoints) -> None:
    """Raise ``RecordErrors`` (records = routes) naming every route with fewer than two
    points, and every point with an unusable position or time, by route and point."""
    counts = np.bincount(points.route, minlength=points.n_routes)
    check_records(counts < 2, None, "needs at least two points", kind="route")
    same_route = points.route[1:] == points.route[:-1]
    backwards = np.concatenate([[False], same_route & (np.diff(points.time_unix_s) <= 0)])
    point = np.arange(points.route.size) - np.searchsorted(points.route, points.route)
    errors = []
    for name, values, low, high in (("time_unix_s", points.time_unix_s, -6.2e10, 2.5e11),
                                    ("latitude_deg", points.latitude_deg, -90, 90),
                                    ("longitude_deg", points.longitude_deg, -180, 180)):
        bad = ~np.isfinite(values) | (values < low) | (values > high)
        errors += [RecordError(points.route[i], name, f"must be a number in [{low:g}, {high:g}]",
                               point=point[i], value=values[i], kind="route")
                   for i in np.flatnonzero(bad).tolist()]
    errors += [RecordError(points.route[i], "time_unix_s", "must be later than the previous point's",
                           point=point[i], kind="route") for i in np.flatnonzero(backwards).tolist()]
    if errors:
        raise RecordErrors(sorted(errors, key=lambda e: (e.index, e.point)))


def _legs(points: RoutePoints) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(first point of each leg, its longitude change wrapped to ±180°, its heading) of
    valid routes; a leg runs from point i to i+1 of the same route. Raises ``RecordErrors``
    for bad points and routes (:func:`_validate`) and for routes whose heading is unknown."""
    _validate(points)
    lat, lon = points.latitude_deg, points.longitude_deg
    starts_leg = np.append(points.route[1:] == points.route[:-1], False)
    leg = np.flatnonzero(starts_leg)
    dlon = (lon[leg + 1] - lon[leg] + 180.0) % 360.0 - 180.0
    moving = (dlon != 0.0) | (lat[leg + 1] != lat[leg])
    heading = initial_bearing_deg(lat[leg], lon[leg], lat[leg + 1], lon[leg] + dlon)
    return leg, dlon, _carry_headings(heading, moving, points.route[leg], points.n_routes)


def check_routes(points: RoutePoints) -> None:
    """Raise ``RecordErrors`` for every fault :func:`route_doses` would find in ``points``
    (bad points, routes of fewer than two points, unknown headings), without evaluating
    anything: lets a caller validate every route before computing any."""
    _legs(points)


def route_sample_bound(points: RoutePoints, step_s: float = DEFAULT_ROUTE_STEP_S) -> np.ndarray:
    """(R,) an upper bound of the samples :func:`route_doses` (or :func:`parked_doses`)
    evaluates for each route at ``step_s``: its span over the step, plus two per leg (a
    run of legs, or a parked leg, has both edges as nodes). Valid points assumed."""
    step = dose.check_step(step_s)
    first = np.full(points.n_routes, np.inf)
    last = np.full(points.n_routes, -np.inf)
    np.minimum.at(first, points.route, points.time_unix_s)
    np.maximum.at(last, points.route, points.time_unix_s)
    counts = np.bincount(points.route, minlength=points.n_routes)
    span = np.where(counts > 0, last - first, 0.0)
    return np.ceil(span / step).astype(np.int64) + 2 * counts


@dataclass
class RouteDoses:
    """Per-route results, arrays (R,): doses {name: (R,)} on the driver-side receiver,
    their relative 1-sigma components {name: {component: (R,)}} (``models.dose``),
    driving, parked and gap durations (s), and the number of evaluated samples."""

    dose_j_m2: dict[str, np.ndarray]
    final_rate_w_m2: dict[str, np.ndarray]
    peak_uv_index: np.ndarray
    relative_sigma: dict[str, dict[str, np.ndarray]]
    driving_s: np.ndarray
    parked_s: np.ndarray
    gap_s: np.ndarray
    samples: int


def route_doses(points: RoutePoints, evaluate: dose.Evaluator,
                per_route: Mapping[str, np.ndarray] | None = None,
                driver_side: str = "left", step_s: float = DEFAULT_ROUTE_STEP_S,
                roof_cutoff_elevation_deg: float = DEFAULT_ROOF_CUTOFF_ELEVATION_DEG,
                sky_view_factor: float = DEFAULT_CAB_SKY_VIEW_FACTOR,
                spectra: Sequence[str] | None = None) -> RouteDoses:
    """Doses on the driver's side-window receiver for R routes at once.

    ``per_route``: Conditions columns (R,) that hold for a whole route (ozone,
    cloud modification factor, albedo…). The glazing is the evaluator's business
    (``dose.engine_evaluator(..., transmittance=...)``). Raises ``RecordErrors``
    (``models.record_errors``; records = routes, with the point where one is at fault)
    for bad points and routes, ValueError for bad options.
    """
    if driver_side not in DRIVER_SIDE_OFFSET_DEG:
        raise ValueError(f"driver_side must be 'left' or 'right', got {driver_side!r}")
    if not 0.0 <= roof_cutoff_elevation_deg <= 90.0:
        raise ValueError("roof_cutoff_elevation_deg must be in [0, 90]")
    if not 0.0 <= sky_view_factor <= 1.0:
        raise ValueError("sky_view_factor must be in [0, 1]")
    n_routes = points.n_routes
    t, lat, lon = points.time_unix_s, points.latitude_deg, points.longitude_deg
    leg, dlon, heading = _legs(points)
    leg_route = points.route[leg]
    leg_s = t[leg + 1] - t[leg]
    parked = points.stop[leg]
    lost = points.gap[leg] & ~parked
    driving = ~parked & ~lost

    # Driving runs: maximal chains of consecutive driving legs of one route.
    run_start = driving & ~np.concatenate([[False], driving[:-1] & (leg_route[1:] == leg_route[:-1])])
    run_id = np.cumsum(run_start) - 1
    run_legs_first = np.flatnonzero(run_start)
    last_driving = np.zeros(run_legs_first.size, np.int64)
    np.maximum.at(last_driving, run_id[driving], np.flatnonzero(driving))
    run_route = leg_route[run_legs_first]
    nodes = dose.trapezoid_nodes(t[leg[run_legs_first]], t[leg[last_driving] + 1], step_s)

    # Leg of each node: the last driving leg of its run starting at or before it.
    node_run = nodes.window
    first_leg = run_legs_first[node_run]
    span = last_driving[node_run] - first_leg
    leg_times = t[leg]
    # Legs of a run are contiguous and time-ordered: a global searchsorted on a key that
    # keeps runs apart finds each node's leg without a loop over routes.
    key_scale = (t.max() - t.min() + 1.0) if t.size else 1.0
    leg_key = leg_route * key_scale + (leg_times - t.min())
    node_key = run_route[node_run] * key_scale + (nodes.time_unix_s - t.min())
    found = np.searchsorted(leg_key, node_key, side="right") - 1
    offset = np.clip(found - first_leg, 0, span)
    node_leg = first_leg + offset
    fraction = np.clip((nodes.time_unix_s - leg_times[node_leg]) / leg_s[node_leg], 0.0, 1.0)
    i0 = leg[node_leg]
    node_lat = lat[i0] + fraction * (lat[i0 + 1] - lat[i0])
    node_lon = (lon[i0] + fraction * dlon[node_leg] + 180.0) % 360.0 - 180.0
    receiver_az = (heading[node_leg] + DRIVER_SIDE_OFFSET_DEG[driver_side]) % 360.0

    sun = solar_position(nodes.time_unix_s, node_lat, node_lon)
    roof_shade = (90.0 - sun.zenith_deg) > roof_cutoff_elevation_deg
    receiver_az = np.where(roof_shade, (sun.azimuth_deg + 180.0) % 360.0, receiver_az)

    per_run = {k: np.asarray(v)[run_route] for k, v in (per_route or {}).items()}
    per_node = {"latitude_deg": node_lat, "longitude_deg": node_lon,
                "tilt_deg": np.full(node_lat.size, 90.0), "receiver_azimuth_deg": receiver_az,
                "sky_view_factor": np.full(node_lat.size, float(sky_view_factor))}
    out = dose.integrate(nodes, per_run, run_route.size, evaluate, per_node=per_node, spectra=spectra)

    def by_route(values):
        return np.bincount(run_route, weights=values, minlength=n_routes)

    final = {}
    last_run = np.full(n_routes, -1)
    np.maximum.at(last_run, run_route, np.arange(run_route.size))
    for name, rate in out["final_rate_w_m2"].items():
        final[name] = np.where(last_run >= 0, rate[np.maximum(last_run, 0)], 0.0)
    peak = np.zeros(n_routes)
    np.maximum.at(peak, run_route, out["peak_uv_index"])
    return RouteDoses(
        dose_j_m2={k: by_route(v) for k, v in out["dose_j_m2"].items()},
        final_rate_w_m2=final, peak_uv_index=peak,
        relative_sigma=dose.dose_relative_sigma(out["result"], run_route[out["owner"]], out["weight_s"],
                                                list(out["dose_j_m2"]), n_routes),
        driving_s=np.bincount(leg_route, weights=leg_s * driving, minlength=n_routes),
        parked_s=np.bincount(leg_route, weights=leg_s * parked, minlength=n_routes),
        gap_s=np.bincount(leg_route, weights=leg_s * lost, minlength=n_routes),
        samples=out["samples"])


def _carry_headings(heading, moving, leg_route, n_routes):
    """Give legs without movement the heading of the previous moving leg of the same
    route, or of the next one at the start of a route."""
    index = np.arange(heading.size)
    route_start = np.concatenate([[True], leg_route[1:] != leg_route[:-1]])
    # Forward fill within routes: the latest moving leg index at or before each leg.
    last_moving = np.where(moving, index, -1)
    last_moving = np.maximum.accumulate(last_moving)
    first_of_route = np.maximum.accumulate(np.where(route_start, index, 0))
    forward_ok = last_moving >= first_of_route
    # Backward fill: the next moving leg index at or after each leg.
    next_moving = np.where(moving, index, heading.size)
    next_moving = np.minimum.accumulate(next_moving[::-1])[::-1]
    route_end = np.concatenate([leg_route[1:] != leg_route[:-1], [True]])
    last_of_route = np.minimum.accumulate(np.where(route_end, index, heading.size)[::-1])[::-1]
    backward_ok = next_moving <= last_of_route
    still = ~forward_ok & ~backward_ok
    if still.any():
        routes = np.unique(leg_route[still])
        check_records(np.isin(np.arange(n_routes), routes), None,
                      "has all its points at one position, so the heading (and the driver-side "
                      "window) is unknown", kind="route")
    source = np.where(forward_ok, last_moving, np.minimum(next_moving, heading.size - 1))
    return heading[source]


def parked_doses(points: RoutePoints, evaluate: dose.Evaluator,
                 per_route: Mapping[str, np.ndarray] | None = None,
                 step_s: float = DEFAULT_ROUTE_STEP_S,
                 spectra: Sequence[str] = ()) -> dict[str, np.ndarray]:
    """Doses of the parked legs, which :func:`route_doses` leaves out: per route (R,), the
    dose on a horizontal receiver under the open sky (no cab; the evaluator should carry no
    glazing) at each parked leg's first fix, from that fix to the next.

    An upper estimate of what a person standing at the stop receives: vertical body sites
    get a fraction of the horizontal dose (the isotropic receiver model of
    :mod:`models.receivers` gives it for any posture), and shade at the stop is not known.
    Integrated like a time window (:func:`models.dose.window_doses`, trapezoid on the leg's
    edges and every multiple of ``step_s``); routes without parked legs get 0.
    """
    _validate(points)
    n_routes = points.n_routes
    t = points.time_unix_s
    starts_leg = np.append(points.route[1:] == points.route[:-1], False)
    leg = np.flatnonzero(starts_leg & points.stop)
    if leg.size == 0:
        return {name: np.zeros(n_routes) for name in spectra}
    leg_route = points.route[leg]
    per_leg = {k: np.asarray(v)[leg_route] for k, v in (per_route or {}).items()}
    per_leg.update(latitude_deg=points.latitude_deg[leg], longitude_deg=points.longitude_deg[leg])
    out = dose.window_doses(per_leg, t[leg], t[leg + 1], evaluate, step_s=step_s, spectra=spectra or None)
    return {name: np.bincount(leg_route, weights=values, minlength=n_routes)
            for name, values in out["dose_j_m2"].items()}
