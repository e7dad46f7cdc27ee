"""Two-stream solver checks: DISORT on identical layer optics, and exact limits.

Reference: DISORT (Stamnes, Tsay, Wiscombe & Jayaweera 1988, *Appl. Opt.* 27:2502)
through the PyPI package nanodisort (Python bindings of the C port cdisort), run with
16 streams on the same layers. The atmosphere is synthetic but built with realistic UV
optical depths, written here from published magnitudes:

- Rayleigh: tau = 1.22 at 300 nm for a 1013 hPa column, wavelength exponent about
  -4.08 (Bodhaine et al. 1999, Table 3, values from memory), 8 km scale height.
- Ozone: 300 DU column with tau = 3.0 at 300 nm falling about a factor e every 6.5 nm
  (shape of the DBM cross sections at 300-330 nm, from memory), a Gaussian layer at
  22 km, 5 km wide.
- Aerosol: Angstrom law, tau(550 nm) = 0.2, exponent 1.3, ssa 0.9, g 0.7,
  Henyey-Greenstein moments (common practice, no source), 1.5 km scale height.

The tolerances (3 % up to 75 degrees, 6 % at 80 degrees) are the accuracy usually
quoted for delta-Eddington fluxes against discrete ordinates in this regime
(Joseph et al. 1976; Toon et al. 1989 report errors of a few percent; from memory).
"""
import numpy as np
import pytest

from uvdose.models import four_stream, two_stream
from uvdose.models.two_stream import surface_irradiance, transfer_components

nanodisort = pytest.importorskip("nanodisort")

from tests.models import disort_reference  # noqa: E402  (after the skip)

N_LAYERS = 20
TOP_KM = 60.0
N_STREAMS = 16


def synthetic_atmosphere(wavelength_nm, aod_550=0.2, ozone_du=300.0):
    """Layer tau, ssa, g and Legendre phase moments (L, W[, nmom]) for a UV atmosphere."""
    edges_km = TOP_KM * (np.linspace(0.0, 1.0, N_LAYERS + 1) ** 1.6)  # finer near ground
    top, bottom = edges_km[1:][::-1], edges_km[:-1][::-1]              # top to bottom

    def exponential_share(scale_km):
        return np.exp(-bottom / scale_km) - np.exp(-top / scale_km)

    rayleigh_share = exponential_share(8.0)
    aerosol_share = exponential_share(1.5)
    z = np.linspace(0.0, TOP_KM, 6001)
    ozone_density = np.exp(-0.5 * ((z - 22.0) / 5.0) ** 2)
    cumulative = np.concatenate([[0.0], np.cumsum(0.5 * (ozone_density[1:] + ozone_density[:-1]))])
    ozone_share = (np.interp(top, z, cumulative) - np.interp(bottom, z, cumulative)) / cumulative[-1]

    tau_rayleigh = 1.22 * (300.0 / wavelength_nm) ** 4.08
    tau_ozone = 3.0 * (ozone_du / 300.0) * np.exp(-(wavelength_nm - 300.0) / 6.5)
    tau_aerosol = aod_550 * (wavelength_nm / 550.0) ** -1.3
    ssa_aerosol, g_aerosol = 0.9, 0.7

    t_r = rayleigh_share[:, None] * tau_rayleigh
    t_o = ozone_share[:, None] * tau_ozone
    t_a = aerosol_share[:, None] * tau_aerosol
    tau = t_r + t_o + t_a
    scattering = t_r + ssa_aerosol * t_a
    ssa = scattering / tau
    g = ssa_aerosol * t_a * g_aerosol / scattering
    moments = np.zeros(tau.shape + (N_STREAMS + 1,))
    orders = np.arange(N_STREAMS + 1)
    moments += (ssa_aerosol * t_a / scattering)[..., None] * g_aerosol ** orders
    moments[..., 0] = 1.0  # exactly: DISORT rejects a rounded normalisation
    moments[..., 2] += 0.1 * (t_r / scattering)
    return tau, ssa, g, moments, (top, bottom)


def disort_fluxes(tau, ssa, moments, mu0, albedo):
    """DISORT direct and diffuse downward flux at the surface, per unit normal beam
    (plane-parallel, ``N_STREAMS`` streams; tests/models/disort_reference.py)."""
    return disort_reference.disort_fluxes(tau, ssa, moments, mu0, albedo, streams=N_STREAMS)


def ours(tau, ssa, g, mu0, albedo):
    """Our solver on one column, plane-parallel beam (as in the DISORT runs)."""
    direct, diffuse = surface_irradiance(tau[None], ssa[None], g[None], np.array([mu0]), albedo)
    return direct[0], diffuse[0]


def erythema_weights(wavelength_nm):
    """CIE S 007/E-1998 (= ISO 17166) erythema action spectrum."""
    wl = np.asarray(wavelength_nm, dtype=float)
    return np.where(wl <= 298, 1.0,
                    np.where(wl <= 328, 10 ** (0.094 * (298 - wl)), 10 ** (0.015 * (140 - wl))))


# Measured deviations of this delta-Eddington solver from 16-stream DISORT on the
# synthetic atmosphere (AOD 0.2), 300-400 nm, as max |global/DISORT - 1|:
#   albedo 0.05: 0 deg 1.2 %, 30 deg 1.2 %, 50 deg 2.5 %; albedo 0.8: 0-30 deg 5.1 %.
# Tolerances sit just above; at low sun this solver misses the 3 %/6 % target (see below).
@pytest.mark.parametrize(
    "zenith_deg, albedo, shortest_nm, tolerance",
    [(0.0, 0.05, 300.0, 0.03), (30.0, 0.05, 300.0, 0.03), (50.0, 0.05, 300.0, 0.03),
     (0.0, 0.8, 300.0, 0.06), (30.0, 0.8, 300.0, 0.06), (30.0, 1.0, 310.0, 0.06)],
)
def test_global_spectral_irradiance_matches_disort(zenith_deg, albedo, shortest_nm, tolerance):
    wavelength_nm = np.arange(290.0, 401.0, 2.0)
    tau, ssa, g, moments, _ = synthetic_atmosphere(wavelength_nm)
    mu0 = np.cos(np.radians(zenith_deg))
    ref_direct, ref_diffuse = disort_fluxes(tau, ssa, moments, mu0, albedo)
    direct, diffuse = ours(tau, ssa, g, mu0, albedo)
    band = wavelength_nm >= shortest_nm
    relative = (direct + diffuse)[band] / (ref_direct + ref_diffuse)[band] - 1.0
    assert np.max(np.abs(relative)) < tolerance, (zenith_deg, np.max(np.abs(relative)))


def _weighted_deviation(zenith_deg, albedo, aod_550=0.2):
    from uvdose.models.spectral_grid import WAVELENGTH_NM, extraterrestrial_spectrum_w_m2_nm

    wavelength_nm = WAVELENGTH_NM.astype(float)
    tau, ssa, g, moments, _ = synthetic_atmosphere(wavelength_nm, aod_550=aod_550)
    mu0 = np.cos(np.radians(zenith_deg))
    ref = np.sum(disort_fluxes(tau, ssa, moments, mu0, albedo), axis=0)
    got = np.sum(ours(tau, ssa, g, mu0, albedo), axis=0)
    etr = extraterrestrial_spectrum_w_m2_nm()
    out = {}
    for name, weight in (("erythema", erythema_weights(wavelength_nm)),
                         ("uvb", (wavelength_nm < 315) * 1.0), ("uva", (wavelength_nm >= 315) * 1.0)):
        out[name] = np.sum(got * etr * weight) / np.sum(ref * etr * weight) - 1.0
    return out


# Measured (erythema / UVB / UVA, AOD 0.2, albedo 0.05): 65 deg +4/+5/+2 %,
# 75 deg +8/+13/+5 %, 80 deg +12/+21/+7 %. These bounds catch regressions; the
# target they miss is held below.
@pytest.mark.parametrize("zenith_deg, bound", [(65.0, 0.07), (75.0, 0.15), (80.0, 0.24)])
def test_low_sun_weighted_irradiance_regression_bound(zenith_deg, bound):
    deviation = _weighted_deviation(zenith_deg, 0.05)
    assert all(0.0 < value < bound for value in deviation.values()), deviation


# At low sun this two-stream overestimates (about +8 % erythemal at 75°, +11 % at 80°):
# the engine therefore solves with models.four_stream, whose tests hold it to the 3 %/6 %
# DISORT target at 75°/80°.


def test_weighted_irradiance_high_sun_within_three_percent():
    for zenith_deg in (0.0, 30.0, 50.0):
        deviation = _weighted_deviation(zenith_deg, 0.05)
        assert all(abs(value) < 0.03 for value in deviation.values()), (zenith_deg, deviation)


# ---- exact limits (both solvers: this two-stream and models.four_stream) ----------------

SOLVERS = pytest.mark.parametrize("solver", [two_stream, four_stream], ids=["two", "four"])

def random_layers(rng, n=4, layers=12, wavelengths=7, ssa=None):
    tau = rng.uniform(0.0, 1.5, (n, layers, wavelengths))
    ssa_values = rng.uniform(0.0, 1.0, tau.shape) if ssa is None else np.full(tau.shape, ssa)
    g = rng.uniform(0.0, 0.85, tau.shape)
    return tau, ssa_values, g


@SOLVERS
def test_no_scattering_is_beer_lambert_with_pseudo_spherical_air_mass(solver):
    rng = np.random.default_rng(7)
    tau, ssa, g = random_layers(rng, ssa=0.0)
    mu0 = np.array([1.0, 0.6, 0.2, 0.03])
    air_mass = (1.0 / mu0)[:, None] * rng.uniform(0.7, 1.0, (4, tau.shape[1]))
    air_mass = np.maximum(air_mass, 1.0)
    direct, diffuse = solver.surface_irradiance(tau, ssa, g, mu0, 0.0, beam_air_mass=air_mass)
    expected = mu0[:, None] * np.exp(-np.einsum("nlw,nl->nw", tau, air_mass))
    np.testing.assert_allclose(direct, expected, rtol=1e-12, atol=0)
    assert np.all(diffuse == 0.0)


@SOLVERS
def test_conservative_scattering_conserves_energy(solver):
    # Reflected to space + absorbed by the surface = incident (mu0), for any albedo.
    rng = np.random.default_rng(11)
    tau, ssa, g = random_layers(rng, ssa=1.0)
    tau[0, 3] = 80.0  # one optically thick layer
    mu0 = np.array([1.0, 0.5, 0.15, 0.02])
    parts = solver.transfer_components(tau, ssa, g, mu0)
    for albedo in (0.0, 0.3, 1.0):
        direct, diffuse = solver.surface_irradiance(tau, ssa, g, mu0, albedo)
        global_flux = direct + diffuse
        escaping = parts.reflected_black_surface + parts.transmittance_up * albedo * global_flux
        np.testing.assert_allclose(escaping + (1 - albedo) * global_flux,
                                   np.broadcast_to(mu0[:, None], global_flux.shape), rtol=1e-6)


@SOLVERS
def test_albedo_zero_and_one(solver):
    rng = np.random.default_rng(3)
    tau, ssa, g = random_layers(rng)
    # Eddington gives a slightly negative reflectance for nearly pure absorbers
    # (gamma2 < 0, see the solver's docstring); keep these layers scattering.
    ssa = 0.5 + 0.5 * ssa
    mu0 = np.array([0.9, 0.5, 0.3, 0.1])
    parts = solver.transfer_components(tau, ssa, g, mu0)
    direct0, diffuse0 = solver.surface_irradiance(tau, ssa, g, mu0, 0.0)
    np.testing.assert_allclose(diffuse0, parts.diffuse_down_black_surface, rtol=1e-12)
    direct1, diffuse1 = solver.surface_irradiance(tau, ssa, g, mu0, 1.0)
    np.testing.assert_array_equal(direct1, direct0)  # the beam ignores the ground
    assert np.all((parts.spherical_albedo > 0) & (parts.spherical_albedo < 1))
    np.testing.assert_allclose(direct1 + diffuse1,
                               (direct0 + diffuse0) / (1 - parts.spherical_albedo), rtol=1e-12)
    assert np.all(diffuse1 > diffuse0)


@SOLVERS
def test_sun_below_horizon_gives_exact_zeros(solver):
    rng = np.random.default_rng(5)
    tau, ssa, g = random_layers(rng)
    mu0 = np.array([-0.5, 0.0, 0.4, -1e-9])
    direct, diffuse = solver.surface_irradiance(tau, ssa, g, mu0, 0.3)
    for row in (0, 1, 3):
        assert np.all(direct[row] == 0.0) and np.all(diffuse[row] == 0.0)
    assert np.all(direct[2] > 0) and np.all(diffuse[2] > 0)


@SOLVERS
def test_optically_thick_layers_stay_finite(solver):
    tau = np.full((2, 3, 2), 5000.0)
    ssa = np.array([0.5, 1.0])[None, None, :] * np.ones(tau.shape)
    g = np.full(tau.shape, 0.8)
    direct, diffuse = solver.surface_irradiance(tau, ssa, g, np.array([1.0, 0.2]), 0.9)
    assert np.all(np.isfinite(direct)) and np.all(np.isfinite(diffuse))
    assert np.all(direct == 0.0)
    assert np.all(diffuse[:, 0] < 1e-300)  # absorbing: nothing gets through
    # conservative: diffusion through scaled tau ~5400 lets ~1/(1 + gamma1 tau) through
    assert np.all((diffuse[:, 1] > 1e-4) & (diffuse[:, 1] < 1e-2))


def test_beam_rate_at_the_eigenvalue_is_smooth():
    # One layer, ssa 0.5, g 0: choose mu0 so that 1/mu0 equals the eigenvalue k of the
    # delta-scaled layer, where the particular solution is singular.
    tau, w, g = 1.0, 0.5, 0.0
    k = np.sqrt(3 * (1 - w) * (1 - w * g))
    singular_mu0 = 1.0 / k
    mu0 = singular_mu0 * np.array([1 - 1e-3, 1 - 1e-7, 1.0, 1 + 1e-7, 1 + 1e-3])
    shape = (5, 1, 1)
    direct, diffuse = surface_irradiance(np.full(shape, tau), np.full(shape, w),
                                         np.full(shape, g), mu0, 0.2)
    global_flux = (direct + diffuse)[:, 0] / mu0
    assert np.all(np.isfinite(global_flux))
    assert np.all(np.abs(np.diff(global_flux)) < 2e-3 * global_flux[2])


@SOLVERS
def test_bad_shapes_and_values_are_rejected(solver):
    tau = np.ones((2, 3, 4))
    with pytest.raises(ValueError, match="mu0"):
        solver.surface_irradiance(tau, tau * 0.5, tau * 0.1, np.ones(3), 0.1)
    with pytest.raises(ValueError, match="ssa"):
        solver.surface_irradiance(tau, tau * 1.5, tau * 0.1, np.ones(2), 0.1)
    with pytest.raises(ValueError, match="albedo"):
        solver.surface_irradiance(tau, tau * 0.5, tau * 0.1, np.ones(2), 1.2)


# ---- the production optics --------------------------------------------------------

def production_layers(aod_550):
    """The engine's own 27 layers (models.optics) and DISORT phase moments for them:
    Rayleigh (moment 2 = 0.1) plus Henyey-Greenstein aerosol, split by the layer g."""
    return disort_reference.engine_layers(300.0, 1013.25, aod_550, streams=N_STREAMS)


# Measured, AOD 0.1, albedo 0.05, erythema / UVB / UVA: 0 deg +0.6/+0.6/+0.7 %,
# 30 deg +1.0/+0.9/+0.7 %, 50 deg +1.9/+2.1/+0.8 %, 65 deg +4.1/+5.3/+1.7 %,
# 75 deg +7.6/+11.8/+3.8 %, 80 deg +10.8/+19.3/+6.1 %.
@pytest.mark.parametrize("zenith_deg, bound", [(0.0, 0.03), (30.0, 0.03), (50.0, 0.03),
                                               (65.0, 0.06), (75.0, 0.13), (80.0, 0.22)])
def test_production_optics_against_disort(zenith_deg, bound):
    from uvdose.models import action_spectra
    from uvdose.models.spectral_grid import WAVELENGTH_NM, extraterrestrial_spectrum_w_m2_nm

    tau, ssa, g, moments = production_layers(0.1)
    mu0 = np.cos(np.radians(zenith_deg))
    reference = np.sum(disort_fluxes(tau, ssa, moments, mu0, 0.05), axis=0)
    got = np.sum(ours(tau, ssa, g, mu0, 0.05), axis=0)
    weights = action_spectra.weight_matrix(["erythema", "uvb", "uva"], WAVELENGTH_NM)
    etr = extraterrestrial_spectrum_w_m2_nm()
    deviation = (got * etr) @ weights / ((reference * etr) @ weights) - 1.0
    assert np.all(np.abs(deviation) < bound), deviation
