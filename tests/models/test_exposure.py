"""Exposure figures: SED, MED fractions, ICNIRP limit."""
import numpy as np

from uvdose.models import exposure


def test_sed_definition():
    # CIE S 007/E-1998: 1 SED = 100 J m⁻² erythemally weighted.
    np.testing.assert_allclose(exposure.standard_erythemal_doses([0.0, 250.0]), [0.0, 2.5])


def test_med_fractions_use_planning_figures():
    # Planning MEDs 200/250/350/450/600/1000 J m⁻² (from memory, common practice).
    f = exposure.med_fractions([500.0])
    np.testing.assert_allclose([f[k][0] for k in ("I", "II", "III", "IV", "V", "VI")],
                               [2.5, 2.0, 500 / 350, 500 / 450, 500 / 600, 0.5])


def test_icnirp_fraction_and_time_to_limit():
    # ICNIRP (2004): 30 J m⁻² effective per 8 h. At 1 mW m⁻² effective, the limit takes
    # 30 000 s; with 15 J m⁻² already received, 15 000 s remain.
    np.testing.assert_allclose(exposure.icnirp_limit_fraction([15.0, 30.0]), [0.5, 1.0])
    t = exposure.time_to_icnirp_limit_s([0.0, 15.0, 40.0, 10.0], [1e-3, 1e-3, 1e-3, 0.0])
    np.testing.assert_allclose(t[:3], [30000.0, 15000.0, 0.0])
    assert np.isinf(t[3])


def test_exposure_figures_follow_available_doses():
    out = exposure.exposure_figures({"erythema": np.array([100.0])})
    assert set(out) == {"standard_erythemal_doses", "med_fraction"}
    out = exposure.exposure_figures({"actinic_icnirp": np.array([3.0])},
                                    {"actinic_icnirp": np.array([0.001])})
    np.testing.assert_allclose(out["time_to_icnirp_limit_s"], [27000.0])
    assert "not medical" in exposure.CAUTION
