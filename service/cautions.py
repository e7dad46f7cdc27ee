"""The cautions the service answers with, every text in one place (see README, "Cautions").

UV exposure can hurt people: each response that carries a modelled figure carries the
caution that fits it. Endpoints import these; none words a caution of its own.
"""
from __future__ import annotations

CAUTION = (
    "Estimates for planning, computed from a model atmosphere: not a measurement, and not "
    "medical or occupational-health advice. Real exposure depends on shade, posture, "
    "reflections, clothing and local weather. Defer to local regulations and licensed practice."
)
"""Instantaneous irradiance and the catalogue (``POST /v1/irradiance``, ``GET /v1/catalogue``)."""

DOSE_CAUTION = (
    "Modelled estimate for planning only; not a measurement and not medical or "
    "occupational-health advice. Individual sensitivity varies widely. Follow local "
    "regulations and licensed professional practice for sun protection and "
    "occupational UV exposure."
)
"""Doses and the exposure figures drawn from them (``POST /v1/doses/*``)."""

OZONE_CAUTION = (
    "Total ozone columns here are climatological or operator-supplied estimates for "
    "planning, not measurements. The embedded climatology predates the Antarctic ozone "
    "hole and overstates polar spring columns, which understates UV there. Not medical "
    "or occupational-health advice; follow local regulations and licensed practice."
)
"""Total-ozone lookups (``POST /v1/ozone``)."""
