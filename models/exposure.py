"""Exposure figures from doses: SED, fractions of a MED, the ICNIRP daily limit.

Doses are time-integrated effective irradiances in J m⁻². These figures are planning
estimates from modelled irradiance, not measurements and not medical or
occupational-health advice; see :data:`CAUTION`.
"""
from __future__ import annotations

import numpy as np

STANDARD_ERYTHEMAL_DOSE_J_M2 = 100.0
"""1 SED = 100 J m⁻² of erythemally weighted UV (CIE S 007/E-1998 = ISO 17166:1999;
CIE 125:1997 "Standard erythema dose, a review")."""

MINIMAL_ERYTHEMAL_DOSE_J_M2: dict[str, float] = {
    "I": 200.0, "II": 250.0, "III": 350.0, "IV": 450.0, "V": 600.0, "VI": 1000.0,
}
"""Planning figures for one MED by Fitzpatrick skin type, erythemally weighted J m⁻².
From memory / common practice (no single source): individual MEDs vary widely
within each type."""

ICNIRP_DAILY_LIMIT_J_M2 = 30.0
"""ICNIRP (2004) "Guidelines on limits of exposure to ultraviolet radiation of
wavelengths between 180 nm and 400 nm", Health Phys. 87(2):171–186: 30 J m⁻²
effective (actinic S(λ)-weighted) per 8-hour working day, skin and eye."""

ICNIRP_REFERENCE_DAY_S = 8.0 * 3600.0
"""The guideline's exposure period (8 h)."""

CAUTION = (
    "Modelled estimate for planning only; not a measurement and not medical or "
    "occupational-health advice. Individual sensitivity varies widely. Follow local "
    "regulations and licensed professional practice for sun protection and "
    "occupational UV exposure."
)


def standard_erythemal_doses(erythemal_dose_j_m2) -> np.ndarray:
    """Erythemal dose expressed in SED (1 SED = 100 J m⁻²)."""
    return np.asarray(erythemal_dose_j_m2, dtype=float) / STANDARD_ERYTHEMAL_DOSE_J_M2


def med_fractions(erythemal_dose_j_m2) -> dict[str, np.ndarray]:
    """Fraction of one MED per skin type I–VI (planning figures, see the constant)."""
    dose = np.asarray(erythemal_dose_j_m2, dtype=float)
    return {skin: dose / med for skin, med in MINIMAL_ERYTHEMAL_DOSE_J_M2.items()}


def icnirp_limit_fraction(actinic_dose_j_m2) -> np.ndarray:
    """Fraction of the ICNIRP 30 J m⁻² daily limit reached by an actinic-weighted dose."""
    return np.asarray(actinic_dose_j_m2, dtype=float) / ICNIRP_DAILY_LIMIT_J_M2


def time_to_icnirp_limit_s(actinic_dose_j_m2, actinic_rate_w_m2) -> np.ndarray:
    """Seconds until the ICNIRP daily limit is reached at a constant actinic rate.

    0 when the limit is already reached; ``inf`` when the rate is zero (sun down or
    fully shielded).
    """
    dose = np.asarray(actinic_dose_j_m2, dtype=float)
    rate = np.asarray(actinic_rate_w_m2, dtype=float)
    remaining = np.clip(ICNIRP_DAILY_LIMIT_J_M2 - dose, 0.0, None)
    with np.errstate(divide="ignore", invalid="ignore"):
        seconds = np.where(rate > 0.0, remaining / np.where(rate > 0.0, rate, 1.0), np.inf)
    return np.where(remaining == 0.0, 0.0, seconds)


def exposure_figures(doses_j_m2: dict[str, np.ndarray],
                     final_rates_w_m2: dict[str, np.ndarray] | None = None) -> dict[str, object]:
    """The exposure figures the doses allow: SED and MED fractions when an erythemal
    dose is present, ICNIRP fraction (and time to the limit when a current rate is
    given) when an actinic dose is present. Values are arrays shaped like the doses."""
    out: dict[str, object] = {}
    if "erythema" in doses_j_m2:
        out["standard_erythemal_doses"] = standard_erythemal_doses(doses_j_m2["erythema"])
        out["med_fraction"] = med_fractions(doses_j_m2["erythema"])
    if "actinic_icnirp" in doses_j_m2:
        out["icnirp_limit_fraction"] = icnirp_limit_fraction(doses_j_m2["actinic_icnirp"])
        if final_rates_w_m2 and "actinic_icnirp" in final_rates_w_m2:
            out["time_to_icnirp_limit_s"] = time_to_icnirp_limit_s(
                doses_j_m2["actinic_icnirp"], final_rates_w_m2["actinic_icnirp"])
    return out
