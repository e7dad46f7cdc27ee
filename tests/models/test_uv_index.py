"""UV Index, exposure categories and the Madronich (2007) formula."""

import numpy as np
import pytest

from uvdose.models.uv_index import exposure_category, madronich_uv_index, reported_uv_index, uv_index


def test_one_uv_index_unit_is_25_mw_m2_erythemal():
    # WHO/WMO Global Solar UV Index: A Practical Guide (2002): k_er = 40 m2/W,
    # so UVI 1 corresponds to 25 mW m-2 of erythemally weighted irradiance.
    np.testing.assert_allclose(uv_index([0.025, 0.25, 0.0]), [1.0, 10.0, 0.0], rtol=1e-12)
    # Worked conversion published by SMHI's unit page: 75 mW m-2 CIE-weighted = UVI 3.
    assert uv_index(0.075)[()] == pytest.approx(3.0)


@pytest.mark.parametrize("uvi, category", [
    # WHO (2002) bands 0-2, 3-5, 6-7, 8-10, 11+ on the whole-number UVI (half-up rounding).
    (0.0, "low"), (2.0, "low"), (2.4, "low"), (2.5, "moderate"), (2.6, "moderate"),
    (5.49, "moderate"), (5.5, "high"), (7.4, "high"), (7.6, "very_high"),
    (10.4, "very_high"), (10.5, "extreme"), (16.0, "extreme"),
])
def test_exposure_category_boundaries(uvi, category):
    assert exposure_category(np.array([uvi]))[0] == category


def test_exposure_category_is_an_object_array_per_record():
    result = exposure_category(np.array([1.0, 4.0, 6.5, 9.0, 12.0]))
    assert result.dtype == object
    assert result.tolist() == ["low", "moderate", "high", "very_high", "extreme"]


def test_reported_uv_index_rounds_half_up():
    np.testing.assert_array_equal(reported_uv_index([2.4, 2.5, 3.5, 0.49]), [2.0, 3.0, 4.0, 0.0])


def test_bad_erythemal_irradiance_names_the_record():
    with pytest.raises(ValueError, match=r"record 2: erythemal_w_m2=-0.1"):
        uv_index([0.1, 0.2, -0.1])
    with pytest.raises(ValueError, match=r"record 0: uv_index=nan"):
        exposure_category([np.nan])


def test_madronich_formula_values():
    # Madronich (2007), Photochem. Photobiol. 83:1537: UVI = 12.5 at an overhead Sun
    # and 300 DU by construction; zero with the Sun below the horizon.
    np.testing.assert_allclose(madronich_uv_index([1.0, 0.0, -0.2], 300.0), [12.5, 0.0, 0.0])
    # 60° zenith: 12.5 × 0.5^2.42 = 2.336.
    assert madronich_uv_index(0.5, 300.0)[()] == pytest.approx(2.336, abs=0.001)


def test_madronich_radiation_amplification_factor():
    # The exponent 1.23 is the formula's radiation amplification factor; WMO ozone
    # assessments give about 1.1-1.3 for erythema (from memory).
    base = madronich_uv_index(0.8, 300.0)
    depleted = madronich_uv_index(0.8, 297.0)
    raf = np.log(depleted / base) / -np.log(297.0 / 300.0)
    assert raf == pytest.approx(1.23, rel=1e-9)
    assert 1.1 <= raf <= 1.3


def test_madronich_rejects_nonpositive_ozone():
    with pytest.raises(ValueError, match="ozone_du"):
        madronich_uv_index([0.5, 0.5], [300.0, 0.0])

