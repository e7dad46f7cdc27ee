"""Solar position, Earth–Sun distance, sunrise and sunset, and surface pressure from elevation.

Arrays in, arrays out: one entry per record, shape ``(N,)``. Scalars broadcast.
Sunrise, transit and sunset (``sunrise_transit_sunset``) are per place and date, (F, D).

Solar position follows the NREL Solar Position Algorithm (SPA):
    Reda, I. and Andreas, A. (2004). Solar position algorithm for solar radiation
    applications. Solar Energy 76(5), 577–589. doi:10.1016/j.solener.2003.12.003
(revised as NREL/TP-560-34302, 2008), with the steps and VSOP87/nutation term tables of
``pvlib.spa``. Pandas is kept off this path: the engine calls it for every batch. Two
rearrangements, both exact to rounding (tested against ``pvlib.spa``): the time-only
part of the algorithm runs once per distinct time in the batch, and its periodic-term
sums are matrix products over blocks of times rather than Python loops over terms
(about 10× faster for a single instant; see tests/benchmarks/bench_solar_geometry.py).

Time scale. ``time_unix_s`` is POSIX time (UTC, no leap seconds) and is taken as
UT1; |UT1 − UTC| < 0.9 s, which moves the hour angle by at most 0.004°.
ΔT = TT − UT1 defaults to the polynomial estimate for the record's year and month
(Espenak & Meeus, *Five Millennium Canon of Solar Eclipses*, NASA/TP-2006-214141,
as implemented by ``pvlib.spa.calculate_deltat``). SPA uses ΔT only for the Sun's
ephemeris position, which moves about 1.1e-5° per second of time, so an error of
several seconds in ΔT is immaterial here.

Refraction. The zenith angle returned is the apparent (refraction-corrected)
topocentric zenith using SPA's refraction formula (eq. 42 of Reda & Andreas, after
Bennett), scaled by the record's pressure and temperature. As in SPA, refraction
is applied only while the Sun's upper limb is above the horizon (true elevation
≥ −(0.26667° + 0.5667°)); below that the geometric zenith is returned. The true
(airless, refraction-free) topocentric zenith is returned beside it: it is the direction
of the solar beam at the top of the atmosphere, which the radiative transfer uses
(``models.atmosphere``, "Which zenith angle"), while the apparent one is where an
observer, a tilted receiver or a roof sees the Sun.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from pvlib import spa

from uvdose.models.record_errors import check_records

__all__ = [
    "SolarPosition",
    "solar_position",
    "sunrise_transit_sunset",
    "pressure_from_elevation_hpa",
    "surface_pressure_hpa",
    "STANDARD_SEA_LEVEL_PRESSURE_HPA",
    "HORIZON_REFRACTION_DEG",
    "SUNRISE_ELEVATION_DEG",
    "CIVIL_TWILIGHT_ZENITH_DEG",
]

HORIZON_REFRACTION_DEG = 0.5667
"""Refraction at the horizon in SPA (Reda & Andreas 2004, eq. 42 and the text after it):
the apparent sun is on the horizon when its geometric elevation is −0.5667°."""
SUNRISE_ELEVATION_DEG = -0.8333
"""Geometric solar elevation at sunrise and sunset: the upper limb on the horizon with
standard refraction (Reda & Andreas 2004, Appendix A.2)."""
CIVIL_TWILIGHT_ZENITH_DEG = 96.0
"""True solar zenith at the end of civil twilight (the Sun's centre 6° below the
horizon; the almanac definition, e.g. the Explanatory Supplement to the Astronomical
Almanac). The clear-sky model lights the sky up to it: beyond it the UV left is under
1e-4 of its high-sun value (measured, tests/models/test_low_sun.py)."""
SECONDS_PER_DAY = 86400.0

# U.S. Standard Atmosphere, 1976 (NOAA/NASA/USAF, NOAA-S/T 76-1562), Table 4 and
# section 1.3: sea-level values, gas constant, molar mass and the first two layers.
STANDARD_SEA_LEVEL_PRESSURE_HPA = 1013.25
_SEA_LEVEL_TEMPERATURE_K = 288.15
_G0_M_S2 = 9.80665
_MOLAR_MASS_KG_MOL = 0.0289644
_GAS_CONSTANT_J_MOL_K = 8.31432
_EARTH_RADIUS_FOR_GEOPOTENTIAL_M = 6356766.0
_TROPOPAUSE_GEOPOTENTIAL_M = 11000.0
_TROPOSPHERE_LAPSE_K_M = 0.0065

_TIMES_PER_BLOCK = 1024

# SPA's stated validity, years −2000 to 6000, as POSIX seconds (to within a year) (Reda & Andreas 2004).
_SPA_TIME_RANGE_UNIX_S = (-1.2527e11, 1.2713e11)

ELEVATION_RANGE_M = (-1000.0, 20000.0)
"""Elevations accepted by :func:`pressure_from_elevation_hpa` (metres above mean
sea level): the two lowest layers of the 1976 standard atmosphere plus a margin
below sea level for depressions such as the Dead Sea shore (−430 m)."""


@dataclass(frozen=True)
class SolarPosition:
    """Topocentric solar position for N records.

    zenith_deg: apparent (refraction-corrected) zenith angle, degrees, (N,).
    true_zenith_deg: true (airless, not refraction-corrected) topocentric zenith angle,
        degrees, (N,): 90° minus SPA's topocentric elevation without atmosphere (e0).
    azimuth_deg: azimuth clockwise from geographic north, 0–360°, (N,).
    earth_sun_distance_au: Earth–Sun distance, astronomical units, (N,);
        the SPA heliocentric radius vector R (Reda & Andreas 2004, eq. 8–9,
        from the VSOP87 periodic terms).
    """

    zenith_deg: np.ndarray
    true_zenith_deg: np.ndarray
    azimuth_deg: np.ndarray
    earth_sun_distance_au: np.ndarray

    @property
    def cos_zenith(self) -> np.ndarray:
        """Cosine of the apparent zenith angle (negative with the Sun below the horizon)."""
        return np.cos(np.radians(self.zenith_deg))


def _checked(field: str, values, low: float, high: float) -> np.ndarray:
    array = np.asarray(values, dtype=float)
    check_records(~np.isfinite(array) | (array < low) | (array > high), field,
                  f"must be a finite number in [{low:g}, {high:g}]", np.atleast_1d(array))
    return array


def _year_and_month(time_unix_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Calendar year and month (UTC) of POSIX times, without pandas."""
    seconds = np.floor(time_unix_s).astype("int64").astype("datetime64[s]")
    months_since_1970 = seconds.astype("datetime64[M]").astype("int64")
    year = 1970 + months_since_1970 // 12
    month = months_since_1970 % 12 + 1
    return year.astype(float), month.astype(float)


def _periodic_series(tables: tuple[np.ndarray, ...], jme: np.ndarray) -> np.ndarray:
    """Σ_k jme^k Σ_i A_i cos(B_i + C_i·jme) / 1e8 (Reda & Andreas 2004, eqs. 9–11) with
    the VSOP87 term tables shipped by pvlib.spa, as one matrix product per power
    instead of a Python loop over terms."""
    total = np.zeros(jme.shape)
    for power, table in enumerate(tables):
        series = table[:, 0] @ np.cos(table[:, 1:2] + table[:, 2:3] * jme[None, :])
        total += series * jme ** power
    return total / 1e8


def _nutation_deg(jce: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Nutation in longitude Δψ and obliquity Δε, degrees (Reda & Andreas 2004,
    eqs. 15–22, Table A4.3 as shipped by pvlib.spa); x is (5, N): X0…X4 in degrees."""
    arg = np.radians(spa.NUTATION_YTERM_ARRAY @ x)
    abcd = spa.NUTATION_ABCD_ARRAY
    sin_arg, cos_arg = np.sin(arg), np.cos(arg)
    delta_psi = (abcd[:, 0] @ sin_arg + jce * (abcd[:, 1] @ sin_arg)) / 36_000_000.0
    delta_epsilon = (abcd[:, 2] @ cos_arg + jce * (abcd[:, 3] @ cos_arg)) / 36_000_000.0
    return delta_psi, delta_epsilon


def _geocentric_sun(t: np.ndarray, delta_t: np.ndarray):
    """Apparent sidereal time, geocentric right ascension and declination (degrees)
    and heliocentric radius (AU): Reda & Andreas (2004) steps 3.1–3.9 via pvlib.spa,
    with the periodic-term sums evaluated as matrix products."""
    jd = spa.julian_day(t)
    jde = spa.julian_ephemeris_day(jd, delta_t)
    jc = spa.julian_century(jd)
    jce = spa.julian_ephemeris_century(jde)
    jme = spa.julian_ephemeris_millennium(jce)
    radius_au = _periodic_series((spa.R0, spa.R1, spa.R2, spa.R3, spa.R4), jme)
    heliocentric_longitude = np.degrees(
        _periodic_series((spa.L0, spa.L1, spa.L2, spa.L3, spa.L4, spa.L5), jme)) % 360.0
    heliocentric_latitude = np.degrees(_periodic_series((spa.B0, spa.B1), jme))
    theta = spa.geocentric_longitude(heliocentric_longitude)
    beta = spa.geocentric_latitude(heliocentric_latitude)
    x = np.vstack([spa.mean_elongation(jce), spa.mean_anomaly_sun(jce),
                   spa.mean_anomaly_moon(jce), spa.moon_argument_latitude(jce),
                   spa.moon_ascending_longitude(jce)])
    delta_psi, delta_epsilon = _nutation_deg(jce, x)
    epsilon = spa.true_ecliptic_obliquity(spa.mean_ecliptic_obliquity(jme), delta_epsilon)
    lamd = spa.apparent_sun_longitude(theta, delta_psi, spa.aberration_correction(radius_au))
    sidereal = spa.apparent_sidereal_time(spa.mean_sidereal_time(jd, jc), delta_psi, epsilon)
    alpha = spa.geocentric_sun_right_ascension(lamd, epsilon, beta)
    delta = spa.geocentric_sun_declination(lamd, epsilon, beta)
    return sidereal, alpha, delta, radius_au


def solar_position(
    time_unix_s,
    latitude_deg,
    longitude_deg,
    elevation_m=0.0,
    pressure_hpa=1013.25,
    temperature_c=12.0,
    delta_t_s=None,
) -> SolarPosition:
    """Apparent and true solar zenith, azimuth and Earth–Sun distance by the NREL SPA.

    Parameters (arrays broadcast to a common shape (N,); scalars allowed):
        time_unix_s: POSIX seconds, UTC.
        latitude_deg: geodetic latitude, −90…90, north positive.
        longitude_deg: longitude, −180…180, east positive.
        elevation_m: observer height above mean sea level, metres (parallax).
        pressure_hpa: local air pressure for refraction, hPa (> 0, ≤ 1200).
        temperature_c: local air temperature for refraction, °C (−90…60).
        delta_t_s: ΔT = TT − UT1 in seconds; ``None`` → the Espenak & Meeus
            polynomial for each record's year and month (see the module notes).

    Method: Reda & Andreas (2004), Solar Energy 76, 577–589, via ``pvlib.spa``.
    Stated SPA uncertainty ±0.0003° for years −2000…6000.

    Raises ``RecordErrors`` naming every record and field with non-finite or out-of-range
    input.
    """
    time_unix_s = _checked("time_unix_s", time_unix_s, *_SPA_TIME_RANGE_UNIX_S)
    latitude_deg = _checked("latitude_deg", latitude_deg, -90.0, 90.0)
    longitude_deg = _checked("longitude_deg", longitude_deg, -180.0, 180.0)
    elevation_m = _checked("elevation_m", elevation_m, -1000.0, 1.0e5)
    pressure_hpa = _checked("pressure_hpa", pressure_hpa, 0.0, 1200.0)
    temperature_c = _checked("temperature_c", temperature_c, -90.0, 60.0)

    arrays = np.broadcast_arrays(time_unix_s, latitude_deg, longitude_deg,
                                 elevation_m, pressure_hpa, temperature_c)
    t, lat, lon, elev, pres, temp = (np.ascontiguousarray(np.atleast_1d(a), dtype=float)
                                     for a in arrays)
    # Everything up to the geocentric right ascension depends on time alone, and
    # batches often share times (a field grid at one instant, hourly steps), so the
    # periodic-term sums run once per distinct (time, ΔT) pair. Exact, not approximate.
    if delta_t_s is None or np.ndim(delta_t_s) == 0:
        unique_t, inverse = np.unique(t, return_inverse=True)
        if delta_t_s is None:
            unique_delta_t = spa.calculate_deltat(*_year_and_month(unique_t))
        else:
            unique_delta_t = np.full(unique_t.shape,
                                     float(_checked("delta_t_s", delta_t_s, -1.0e4, 1.0e4)))
    else:
        delta_t = np.broadcast_to(_checked("delta_t_s", delta_t_s, -1.0e4, 1.0e4), t.shape)
        keys, inverse = np.unique(np.column_stack([t, delta_t]), axis=0, return_inverse=True)
        unique_t, unique_delta_t = keys[:, 0], keys[:, 1]
    inverse = inverse.reshape(-1)
    # Blocks keep the (terms × times) work arrays in cache; measured in
    # tests/benchmarks/bench_solar_geometry.py (about 1000 times per block is best here).
    blocks = [_geocentric_sun(unique_t[start:start + _TIMES_PER_BLOCK],
                              unique_delta_t[start:start + _TIMES_PER_BLOCK])
              for start in range(0, unique_t.size, _TIMES_PER_BLOCK)]
    sidereal, alpha, delta, radius_au = (
        np.concatenate(quantity)[inverse] for quantity in zip(*blocks))

    hour_angle = spa.local_hour_angle(sidereal, lon, alpha)
    xi = spa.equatorial_horizontal_parallax(radius_au)
    u = spa.uterm(lat)
    x = spa.xterm(u, lat, elev)
    y = spa.yterm(u, lat, elev)
    delta_alpha = spa.parallax_sun_right_ascension(x, xi, hour_angle, delta)
    delta_prime = spa.topocentric_sun_declination(delta, x, y, xi, delta_alpha, hour_angle)
    hour_angle_prime = spa.topocentric_local_hour_angle(hour_angle, delta_alpha)
    e0 = spa.topocentric_elevation_angle_without_atmosphere(lat, delta_prime, hour_angle_prime)
    refraction = spa.atmospheric_refraction_correction(pres, temp, e0, HORIZON_REFRACTION_DEG)
    zenith = spa.topocentric_zenith_angle(spa.topocentric_elevation_angle(e0, refraction))
    gamma = spa.topocentric_astronomers_azimuth(hour_angle_prime, delta_prime, lat)
    azimuth = spa.topocentric_azimuth_angle(gamma)
    return SolarPosition(zenith_deg=np.asarray(zenith, dtype=float),
                         true_zenith_deg=np.asarray(90.0 - e0, dtype=float),
                         azimuth_deg=np.asarray(azimuth, dtype=float),
                         earth_sun_distance_au=np.asarray(radius_au, dtype=float))


def _wrap(values: np.ndarray, limit: float) -> np.ndarray:
    # Day-to-day ephemeris differences that straddle 0/360° (Reda & Andreas A.2, step A.2.8).
    return np.where(np.abs(values) > limit, values % 1.0, values)


def sunrise_transit_sunset(day_unix_s, latitude_deg, longitude_deg, delta_t_s: float = 69.0,
                           elevation_deg: float = SUNRISE_ELEVATION_DEG):
    """Sunrise, transit and sunset (Unix s, UTC) for each place and date.

    The sunrise/transit/sunset algorithm of SPA [1]_, Appendix A.2, vectorised over
    places × dates (the per-date ephemeris is computed once per date).

    Parameters
    ----------
    day_unix_s : array (D,)
        UTC midnights, POSIX seconds.
    latitude_deg, longitude_deg : arrays (F,)
        Places, degrees (north and east positive).
    delta_t_s : float
        ΔT = TT − UT1, seconds; 69 s by default (immaterial here: it moves the sun by
        about 0.0008°).
    elevation_deg : float
        Geometric solar elevation that counts as rising and setting; the almanac
        convention :data:`SUNRISE_ELEVATION_DEG` (−0.8333°) by default.

    Returns
    -------
    tuple of numpy.ndarray, each (F, D)
        ``(sunrise, transit, sunset, sun_state)``: ``sun_state`` is 0 for an ordinary
        day, +1 when the sun stays up all day (midnight sun; sunrise and sunset are then
        transit ∓ 12 h) and −1 when it never rises (polar night; both equal the transit).

    References
    ----------
    .. [1] Reda, I. and Andreas, A. (2004). Solar position algorithm for solar radiation
       applications. Solar Energy 76(5), 577–589. doi:10.1016/j.solener.2003.12.003
    """
    days = np.atleast_1d(np.asarray(day_unix_s, dtype=float))
    if np.any(days % SECONDS_PER_DAY != 0.0):
        raise ValueError("day_unix_s must be UTC midnights")
    lat = np.atleast_1d(np.asarray(latitude_deg, dtype=float))[:, None]
    lon = np.atleast_1d(np.asarray(longitude_deg, dtype=float))[:, None]
    tt0 = days - delta_t_s
    nu = spa.solar_position(days, 0, 0, 0, 0, 0, delta_t_s, 0, 1, sst=True)[0]
    (alpha0, delta0), (alpha_m, delta_m), (alpha_p, delta_p) = (
        spa.solar_position(t, 0, 0, 0, 0, 0, delta_t_s, 0, 1, sst=True)[1:3]
        for t in (tt0, tt0 - SECONDS_PER_DAY, tt0 + SECONDS_PER_DAY))
    m0 = ((alpha0 - lon - nu) / 360.0) % 1.0
    sin_h0 = np.sin(np.radians(elevation_deg))
    cos_h0 = ((sin_h0 - np.sin(np.radians(lat)) * np.sin(np.radians(delta0)))
              / (np.cos(np.radians(lat)) * np.cos(np.radians(delta0))))
    state = np.where(cos_h0 < -1.0, 1, np.where(cos_h0 > 1.0, -1, 0))
    h0 = np.degrees(np.arccos(np.clip(cos_h0, -1.0, 1.0))) % 180.0
    a, ap = _wrap(alpha0 - alpha_m, 2.0), _wrap(delta0 - delta_m, 2.0)
    b, bp = _wrap(alpha_p - alpha0, 2.0), _wrap(delta_p - delta0, 2.0)
    c, cp = b - a, bp - ap

    def local(m):
        nu_i = nu + 360.985647 * m
        n = m + delta_t_s / SECONDS_PER_DAY
        alpha_i = alpha0 + n * (a + b + c * n) / 2.0
        delta_i = delta0 + n * (ap + bp + cp * n) / 2.0
        hour = (nu_i + lon - alpha_i) % 360.0
        hour = np.where(hour >= 180.0, hour - 360.0, hour)
        elev = np.degrees(np.arcsin(np.sin(np.radians(lat)) * np.sin(np.radians(delta_i))
                                    + np.cos(np.radians(lat)) * np.cos(np.radians(delta_i))
                                    * np.cos(np.radians(hour))))
        return hour, elev, delta_i

    hour_t, _, _ = local(m0)
    transit = days + (m0 - hour_t / 360.0) * SECONDS_PER_DAY
    # Rising and setting fractions of the day, unwrapped (not taken modulo 1) so that a
    # sunrise before 00:00 UTC or a sunset after 24:00 UTC stays on the right side of the
    # transit; A.2 reduces them modulo 1 and re-adds the day, which is equivalent.
    events = []
    for sign in (-1.0, 1.0):
        m = m0 + sign * h0 / 360.0
        hour, elev, dec = local(m)
        with np.errstate(divide="ignore", invalid="ignore"):
            correction = (elev - elevation_deg) / (
                360.0 * np.cos(np.radians(dec)) * np.cos(np.radians(lat)) * np.sin(np.radians(hour)))
        events.append(days + (m + np.where(state == 0, correction, 0.0)) * SECONDS_PER_DAY)
    sunrise, sunset = events
    half_day = SECONDS_PER_DAY / 2.0
    sunrise = np.where(state == 1, transit - half_day, np.where(state == -1, transit, sunrise))
    sunset = np.where(state == 1, transit + half_day, np.where(state == -1, transit, sunset))
    return sunrise, transit, sunset, state


def pressure_from_elevation_hpa(elevation_m) -> np.ndarray:
    """Standard-atmosphere surface pressure (hPa) at a height above mean sea level (m).

    U.S. Standard Atmosphere, 1976 (NOAA/NASA/USAF, NOAA-S/T 76-1562), identical to
    the ICAO standard atmosphere below 32 km. The geometric height is converted to
    geopotential height H = r0·z/(r0 + z) with r0 = 6 356 766 m (eq. 18), then the
    hydrostatic barometric formula (eqs. 33a/33b) is applied in the troposphere
    (lapse −6.5 K/km from 288.15 K, 1013.25 hPa) and in the isothermal layer
    11–20 km (216.65 K). Heights outside ``ELEVATION_RANGE_M`` raise ``RecordErrors``.
    """
    low, high = ELEVATION_RANGE_M
    z = _checked("elevation_m", elevation_m, low, high)
    h = _EARTH_RADIUS_FOR_GEOPOTENTIAL_M * z / (_EARTH_RADIUS_FOR_GEOPOTENTIAL_M + z)
    exponent = _G0_M_S2 * _MOLAR_MASS_KG_MOL / (_GAS_CONSTANT_J_MOL_K * _TROPOSPHERE_LAPSE_K_M)
    tropo_h = np.minimum(h, _TROPOPAUSE_GEOPOTENTIAL_M)
    pressure = STANDARD_SEA_LEVEL_PRESSURE_HPA * (
        1.0 - _TROPOSPHERE_LAPSE_K_M * tropo_h / _SEA_LEVEL_TEMPERATURE_K) ** exponent
    tropopause_temperature_k = (_SEA_LEVEL_TEMPERATURE_K
                                - _TROPOSPHERE_LAPSE_K_M * _TROPOPAUSE_GEOPOTENTIAL_M)
    above = np.maximum(h - _TROPOPAUSE_GEOPOTENTIAL_M, 0.0)
    pressure = pressure * np.exp(-_G0_M_S2 * _MOLAR_MASS_KG_MOL * above
                                 / (_GAS_CONSTANT_J_MOL_K * tropopause_temperature_k))
    return np.asarray(pressure, dtype=float)


def surface_pressure_hpa(elevation_m, pressure_hpa) -> np.ndarray:
    """Surface pressure (hPa) per record: the given value, or where it is NaN ("not given")
    the standard-atmosphere value at ``elevation_m`` (:func:`pressure_from_elevation_hpa`)."""
    given = np.asarray(pressure_hpa, dtype=float)
    return np.where(np.isnan(given), pressure_from_elevation_hpa(elevation_m), given)
