"""The cautions the service answers with, every text in one place (see README, "Cautions").

UV exposure can hurt people: each response that carries a modelled figure carries the
caution that fits it, in every format it is written in:

* every answer, whatever its status or media type, carries the header
  :data:`CAUTION_HEADER` (one ``after_request`` hook, :func:`init_app`, so endpoints
  added later carry it too);
* JSON answers with computed figures carry ``caution`` (the endpoint's text) and, where
  particular figures need their own word, ``figure_cautions`` (figure name -> text);
* CSV answers carry the same texts in their last column, ``caution``, on every row (a
  column, not a comment line, so that every CSV reader takes the file as it is and a row
  copied out of it keeps its caution);
* SVG pictures draw the caution as text on the picture.

Endpoints import these; none words a caution of its own.
"""
from __future__ import annotations

from typing import Iterable, Mapping

from flask import Flask, Response

CAUTION_HEADER = "Uvdose-Caution"
"""Response header on every answer (RFC 9110 field-value: plain ASCII text)."""

HEADER_TEXT = (
    "Modelled UV estimates for planning: not a measurement, not medical, occupational-health "
    "or agronomic advice. Defer to local regulations and licensed practice."
)

CSV_CAUTION_COLUMN = "caution"
"""The last column of every CSV answer."""

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
"""Time-window doses and the exposure figures drawn from them (``POST /v1/doses/windows``)."""

FIELD_CAUTION = (
    "Modelled estimate for planning only; not a measurement. Crop response to UV depends on "
    "species, cultivar, growth stage, acclimation and the other stresses of the season: for "
    "decisions about crops, defer to agronomic advice. For people working in the field, this "
    "is not medical or occupational-health advice; follow local regulations."
)
"""Field days and seasons (``POST /v1/doses/fields`` and the season picture)."""

ROUTE_CAUTION = (
    DOSE_CAUTION + " Route doses count only the time driven: parked legs (the driver assumed "
    "out of the cab, often outdoors) and untracked gaps are not in dose_j_m2; their durations "
    "are parked_s and gap_s, and parked_dose_j_m2, when asked for, estimates the open-sky dose "
    "of the parked time."
)
"""In-cab route doses (``POST /v1/doses/routes``)."""

OZONE_CAUTION = (
    "Total ozone columns here are climatological or operator-supplied estimates for "
    "planning, not measurements. The embedded climatology predates the Antarctic ozone "
    "hole and overstates polar spring columns, which understates UV there. Not medical "
    "or occupational-health advice; follow local regulations and licensed practice."
)
"""Total-ozone lookups (``POST /v1/ozone``)."""

UV_DAY_CAUTION = (
    CAUTION + " The curve is the UV Index on a horizontal surface under the clouds given (clear "
    "sky if none); it is not a forecast."
)
"""The day's UV Index picture."""

# -- cautions of particular figures ---------------------------------------------------

ICNIRP_LIMIT_FRACTION_CAUTION = (
    "Fraction of the ICNIRP (2004) exposure limit, 30 J m-2 of S(lambda)-weighted UV per "
    "8-hour period, for unprotected skin and eyes. It is not a measure of safety: staying "
    "under the limit does not make an exposure safe for every person, and a dose at or above "
    "it is a reason for protection, not a diagnosis. The S(lambda) table used here was "
    "transcribed from memory and agrees with an analytic approximation of the guideline's "
    "table only within 35 %; treat the fraction as uncertain by at least that much. Local "
    "occupational rules take precedence."
)

TIME_TO_LIMIT_CAUTION = (
    "Seconds until the ICNIRP (2004) limit would be reached if the irradiance stayed at the "
    "window's (or route's) final rate, for unprotected skin and eyes. It is not a safe "
    "exposure time: the rate changes with the sun and the clouds, sensitivity differs from "
    "person to person, and the weighting table is uncertain by up to 35 % (see "
    "icnirp_limit_fraction). null means the final rate is zero."
)

LIMIT_PERIOD_CAUTION = (
    "limit_period_exceeded is true where the window (or the route from its first to its last "
    "fix) lasts longer than the 8 hours the ICNIRP limit refers to: its limit fraction and time "
    "to the limit then compare more than one 8-hour period with a single period's limit. Split "
    "such windows into working days to compare each day with the limit."
)

MED_CAUTION = (
    "Fractions of one minimal erythemal dose (MED) for skin types I-VI, taking one MED as "
    "200, 250, 350, 450, 600 and 1000 J m-2 erythemally weighted: planning figures of common "
    "practice (after Fitzpatrick's skin-type scale), from no single source. Individual MEDs "
    "vary several-fold within each type; a fraction below 1 does not mean that no sunburn "
    "will occur. Not medical advice."
)

PREVITAMIN_D3_CAUTION = (
    "Previtamin-D3-weighted figures use the action spectrum of CIE 174:2006, after MacLaughlin, "
    "Anderson & Holick (1982), Science 216:1001-1003, in an approximate table written from "
    "memory (not the standard's own values). They are indicative only: not a measure of "
    "vitamin D status or production, and not a recommendation for sun exposure."
)

PARKED_TIME_CAUTION = (
    "parked_time_excluded is true where the route has parked legs: their time (parked_s) is "
    "not in dose_j_m2, although drivers are often outdoors then."
)

PARKED_DOSE_CAUTION = (
    "parked_dose_j_m2 is the dose on a horizontal surface under the open sky (no cab, no "
    "glazing) at the parked positions during the parked legs, with the route's conditions: "
    "an upper estimate for a person standing outdoors (vertical body sites typically receive "
    "a fraction of it) and no account of shade at the stop."
)

FIGURE_CAUTIONS: dict[str, str] = {
    "icnirp_limit_fraction": ICNIRP_LIMIT_FRACTION_CAUTION,
    "time_to_icnirp_limit_s": TIME_TO_LIMIT_CAUTION,
    "limit_period_exceeded": LIMIT_PERIOD_CAUTION,
    "med_fraction": MED_CAUTION,
    "previtamin_d3": PREVITAMIN_D3_CAUTION,
    "parked_time_excluded": PARKED_TIME_CAUTION,
    "parked_dose_j_m2": PARKED_DOSE_CAUTION,
}
"""Figure (result member, or spectrum name) -> the caution that goes with it."""


def figure_cautions(figures: Iterable[str]) -> dict[str, str]:
    """The ``figure_cautions`` member for an answer holding ``figures`` (result member names
    and spectrum names; names without a caution of their own are left out), in the order of
    :data:`FIGURE_CAUTIONS`."""
    present = set(figures)
    return {name: text for name, text in FIGURE_CAUTIONS.items() if name in present}


def csv_caution(caution: str, figures: Mapping[str, str] | None = None) -> str:
    """The text of a CSV answer's ``caution`` column: the endpoint's caution, then each
    figure caution that applies."""
    return " ".join([caution, *(figures or {}).values()])


def with_caution_column(columns: Mapping[str, list], caution: str) -> dict[str, list]:
    """CSV columns with the ``caution`` column added last (the same text on every row)."""
    out = dict(columns)
    n = len(next(iter(columns.values()))) if columns else 0
    out[CSV_CAUTION_COLUMN] = [caution] * n
    return out


def _add_header(response: Response) -> Response:
    response.headers[CAUTION_HEADER] = HEADER_TEXT
    return response


def init_app(app: Flask) -> None:
    """Put :data:`CAUTION_HEADER` on every answer the app gives (errors included)."""
    app.after_request(_add_header)
