"""UV Index, its exposure categories, and the Madronich (2007) clear-sky closed form.

Sources:
    WHO, WMO, UNEP, ICNIRP (2002). Global Solar UV Index: A Practical Guide.
    World Health Organization, Geneva (ISBN 92 4 159007 6): UVI = k_er ∫ E(λ) s_er(λ) dλ
    with k_er = 40 m² W⁻¹ and the CIE erythema spectrum s_er; exposure categories
    low 0–2, moderate 3–5, high 6–7, very high 8–10, extreme 11+.
    Madronich S. (2007). Analytic formula for the clear-sky UV Index.
    Photochemistry and Photobiology 83:1537–1538.
"""

from __future__ import annotations

import numpy as np

from uvdose.models.record_errors import check_records

__all__ = [
    "UVI_PER_W_M2",
    "EXPOSURE_CATEGORIES",
    "uv_index",
    "reported_uv_index",
    "exposure_category",
    "madronich_uv_index",
]

UVI_PER_W_M2 = 40.0
"""k_er of the WHO/WMO guide (2002), m² W⁻¹: one UVI unit is 25 mW m⁻² erythemal."""

EXPOSURE_CATEGORIES: tuple[tuple[str, int, int | None], ...] = (
    ("low", 0, 2),
    ("moderate", 3, 5),
    ("high", 6, 7),
    ("very_high", 8, 10),
    ("extreme", 11, None),
)
"""(name, lowest whole UVI, highest whole UVI or None) from the WHO guide (2002)."""


def _finite_non_negative(field: str, values) -> np.ndarray:
    array = np.asarray(values, dtype=float)
    check_records(~np.isfinite(array) | (array < 0.0), field, "must be finite and >= 0",
                  np.atleast_1d(array))
    return array


def uv_index(erythemal_w_m2) -> np.ndarray:
    """UV Index from erythemally weighted irradiance (W m⁻², CIE S 007 spectrum).

    UVI = 40 m² W⁻¹ × E_ery (WHO/WMO 2002). Continuous (not rounded); see
    :func:`reported_uv_index` for the whole-number value the guide reports.
    Raises ``RecordErrors`` naming every record with negative or non-finite input.
    """
    return UVI_PER_W_M2 * _finite_non_negative("erythemal_w_m2", erythemal_w_m2)


def reported_uv_index(uvi) -> np.ndarray:
    """The UV Index as the guide reports it: a whole number, rounded half up
    (2.4 → 2, 2.5 → 3). The guide reports whole numbers; half-up for exact halves is
    common practice, not stated there."""
    return np.floor(_finite_non_negative("uv_index", uvi) + 0.5)


def exposure_category(uvi) -> np.ndarray:
    """WHO (2002) exposure category of each UV Index value, as an object array of
    "low", "moderate", "high", "very_high" or "extreme".

    The category is that of the reported (whole-number, half-up) UVI, so 2.4 is "low"
    and 2.5 and 2.6 are "moderate"; 10.4 is "very_high", 10.5 "extreme".
    """
    whole = reported_uv_index(uvi)
    names = np.array([name for name, _, _ in EXPOSURE_CATEGORIES], dtype=object)
    upper_edges = np.array([high for _, _, high in EXPOSURE_CATEGORIES[:-1]], dtype=float)
    return names[np.searchsorted(upper_edges, whole, side="left")]


def madronich_uv_index(mu0, ozone_du) -> np.ndarray:
    """Clear-sky UV Index at sea level by Madronich (2007): 12.5 μ0^2.42 (Ω/300 DU)^−1.23.

    mu0: cosine of the solar zenith angle (≤ 0 gives 0, the Sun is down).
    ozone_du: total ozone column, Dobson units (> 0).
    An approximation for unpolluted, cloud-free, snow-free sea-level sites; the paper
    reports agreement with full radiative transfer of roughly ±10 % for the usual
    ranges of sun and ozone (from memory).
    """
    mu = np.asarray(mu0, dtype=float)
    ozone = np.asarray(ozone_du, dtype=float)
    if not np.all(np.isfinite(mu)):
        raise ValueError("mu0 must be finite")
    check_records(~np.isfinite(ozone) | (ozone <= 0.0), "ozone_du", "must be finite and > 0",
                  np.atleast_1d(ozone))
    sunlit = np.clip(mu, 0.0, None)
    return 12.5 * sunlit ** 2.42 * (ozone / 300.0) ** -1.23
