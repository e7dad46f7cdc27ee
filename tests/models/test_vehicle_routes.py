"""Vehicle routes: bearings, interpolation, driver side, stops and gaps, roof shading."""
import numpy as np
import pytest

from uvdose.models import receivers, vehicle_routes
from uvdose.models.record_errors import RecordErrors
from uvdose.models.solar_geometry import solar_position

T0 = 1781870400.0  # 2026-06-21 12:00 UTC


def constant(columns):
    return {"effective_w_m2.erythema": np.full(len(columns["time_unix_s"]), 0.1)}


def recording(store):
    def evaluate(columns):
        store.append({k: np.array(v) for k, v in columns.items()})
        return constant(columns)
    return evaluate


def _wrapped(angle_deg):
    return (np.asarray(angle_deg) + 180.0) % 360.0 - 180.0


def test_initial_bearing_cardinal_and_known_value():
    # Spherical trigonometry facts: due north 0°, due east along the equator 90°,
    # due south 180°; (0°,0°)→(1°,1°) is 44.9956° (computed from Snyder eq. 5-4b by hand,
    # and agrees with the planar 45° to within the meridian convergence).
    b = vehicle_routes.initial_bearing_deg([0, 0, 10, 0], [0, 0, 5, 0], [1, 0, 9, 1], [0, 1, 5, 1])
    np.testing.assert_allclose(b, [0.0, 90.0, 180.0, 44.9956], atol=1e-3)


def test_constant_rate_dose_over_driving_time_excludes_stops_and_gaps():
    pts = vehicle_routes.points_from_lists([
        {"time_unix_s": [T0, T0 + 600, T0 + 1200, T0 + 1800, T0 + 2400],
         "latitude_deg": [45.0, 45.01, 45.02, 45.03, 45.04],
         "longitude_deg": [7.0] * 5,
         "stop": [False, True, False, False, False],
         "gap": [False, False, False, True, False]},
    ])
    out = vehicle_routes.route_doses(pts, constant)
    # Driving legs 0 and 2: 1200 s at 0.1 W m⁻² → 120 J m⁻² (closed form).
    np.testing.assert_allclose(out.dose_j_m2["erythema"], [120.0])
    np.testing.assert_allclose([out.driving_s[0], out.parked_s[0], out.gap_s[0]], [1200.0, 600.0, 600.0])


def test_interpolation_and_driver_side_heading():
    seen = []
    pts = vehicle_routes.points_from_lists([
        {"time_unix_s": [T0, T0 + 3600], "latitude_deg": [45.0, 45.5], "longitude_deg": [7.0, 7.0]},
        {"time_unix_s": [T0, T0 + 3600], "latitude_deg": [0.0, 0.0], "longitude_deg": [179.9, -179.9]},
    ])
    vehicle_routes.route_doses(pts, recording(seen), step_s=1800, roof_cutoff_elevation_deg=90.0)
    cols = seen[0]
    first = np.flatnonzero(cols["time_unix_s"] == T0 + 1800)
    # Midpoint in time is the midpoint in space; the antimeridian is crossed the short way.
    np.testing.assert_allclose(cols["latitude_deg"][first], [45.25, 0.0])
    np.testing.assert_allclose(np.abs(cols["longitude_deg"][first]), [7.0, 180.0])
    # Heading north with the driver on the left: the window faces west (270°);
    # heading east: faces north (0°).
    np.testing.assert_allclose(_wrapped(cols["receiver_azimuth_deg"][first] - [270.0, 0.0]), 0.0,
                               atol=1e-6)
    np.testing.assert_allclose(cols["tilt_deg"], 90.0)
    seen.clear()
    vehicle_routes.route_doses(pts, recording(seen), driver_side="right", roof_cutoff_elevation_deg=90.0)
    np.testing.assert_allclose(seen[0]["receiver_azimuth_deg"][0], 90.0, atol=1e-6)


def test_stationary_leg_keeps_previous_heading_and_still_route_is_rejected():
    seen = []
    pts = vehicle_routes.points_from_lists([{"time_unix_s": [T0, T0 + 600, T0 + 1200],
                                     "latitude_deg": [10.0, 10.0, 10.0],
                                     "longitude_deg": [20.0, 20.1, 20.1]}])
    vehicle_routes.route_doses(pts, recording(seen), roof_cutoff_elevation_deg=90.0)
    # Heading east, driver on the left: the window faces north.
    np.testing.assert_allclose(_wrapped(seen[0]["receiver_azimuth_deg"]), 0.0, atol=0.1)
    still = vehicle_routes.points_from_lists([{"time_unix_s": [T0, T0 + 60], "latitude_deg": [1.0, 1.0],
                                       "longitude_deg": [2.0, 2.0]}])
    with pytest.raises(RecordErrors, match="route 0: has all its points at one position") as raised:
        vehicle_routes.route_doses(still, constant)
    assert [(e.index, e.point, e.field) for e in raised.value.errors] == [(0, None, None)]


def _split_sky(columns):
    # A stand-in sky: direct and diffuse horizontal grow with μ0 (shape only), put
    # through the real receiver model, so beam and sky terms can be told apart.
    sun = solar_position(columns["time_unix_s"], columns["latitude_deg"], columns["longitude_deg"])
    mu0 = np.clip(np.cos(np.radians(sun.zenith_deg)), 0.0, None)[:, None]
    rx = receivers.receiver_spectral_irradiance(
        0.2 * mu0, 0.1 * mu0, sun.zenith_deg, sun.azimuth_deg, columns["tilt_deg"],
        columns["receiver_azimuth_deg"], columns["sky_view_factor"], np.zeros(mu0.shape[0]))
    return {"effective_w_m2.erythema": rx[:, 0]}


def test_roof_shades_the_beam_above_the_cutoff():
    # Noon in June at 45 N: the sun is ~68° high, above the 50° default cutoff; the
    # shaded receiver gets only its sky term, 0.1 μ0 · (1 + cos 90°)/2 · sky view 0.5.
    pts = vehicle_routes.points_from_lists([{"time_unix_s": [T0 - 1800, T0 + 1800],
                                     "latitude_deg": [45.0, 44.8], "longitude_deg": [0.0, 0.0]}])
    shaded = vehicle_routes.route_doses(pts, _split_sky).dose_j_m2["erythema"][0]
    open_sky = vehicle_routes.route_doses(pts, _split_sky, roof_cutoff_elevation_deg=90.0).dose_j_m2["erythema"][0]
    t = np.linspace(T0 - 1800, T0 + 1800, 361)
    mu0 = np.cos(np.radians(solar_position(t, np.linspace(45, 44.8, 361), 0.0).zenith_deg))
    sky_only = np.trapezoid(0.1 * mu0 * 0.5 * 0.5, t)
    assert shaded == pytest.approx(sky_only, rel=2e-3)
    assert open_sky > 1.1 * shaded  # heading south, driver on the left faces east: beam adds


@pytest.mark.parametrize("route,message,named", [
    ({"time_unix_s": [T0], "latitude_deg": [1.0], "longitude_deg": [1.0]}, "needs at least two points",
     [(1, None, None)]),
    ({"time_unix_s": [T0, T0], "latitude_deg": [1.0, 1.1], "longitude_deg": [1.0, 1.0]},
     r"point 1: time_unix_s must be later", [(1, 1, "time_unix_s")]),
    ({"time_unix_s": [T0, T0 + 9], "latitude_deg": [1.0, 91.0], "longitude_deg": [1.0, 1.0]},
     r"point 1: latitude_deg=91", [(1, 1, "latitude_deg")]),
    ({"time_unix_s": [T0, T0 + 9, T0 + 5], "latitude_deg": [-91.0, 1.0, 1.0], "longitude_deg": [1.0, 1.0, 181.0]},
     r"point 0: latitude_deg=-91", [(1, 0, "latitude_deg"), (1, 2, "longitude_deg"), (1, 2, "time_unix_s")]),
])
def test_bad_routes_name_route_and_point(route, message, named):
    ok = {"time_unix_s": [T0, T0 + 60], "latitude_deg": [0.0, 0.1], "longitude_deg": [0.0, 0.0]}
    with pytest.raises(RecordErrors, match=rf"route 1.*{message}") as raised:
        vehicle_routes.route_doses(vehicle_routes.points_from_lists([ok, route]), constant)
    assert [(e.index, e.point, e.field) for e in raised.value.errors] == named  # route, point order
