"""What a record may hold: the field types of every request schema and the fields they share.

A record schema is declared once in marshmallow (fields, wire names, ranges, messages);
that declaration is the single source of truth, read both by marshmallow and by the
vectorised column checks (:mod:`service.column_checks`). Fields that several schemas
carry (a place, an ozone column, a cloud factor, a record id) are declared here once, as
instances, and placed in each schema that needs them: marshmallow copies declared fields
per schema instance, so one declaration serves every schema without being re-stated.

Wire names (``lat``, ``cloud_factor``) are marshmallow ``data_key``s; attribute names are
the engine's column names (``latitude_deg``, ``cloud_modification_factor``), so validated
columns go to :func:`models.engine.Conditions.from_columns` unchanged.
"""
from __future__ import annotations

import re
from datetime import datetime, timezone
from typing import Any, Callable, Iterable, Mapping

from marshmallow import Schema, ValidationError, fields, validate, validates_schema

from uvdose.service.time_text import parse_iso_date, parse_offset_datetime


def between(minimum: float, maximum: float) -> validate.Range:
    """An inclusive range whose message states it (``must be between -90 and 90``)."""
    return validate.Range(min=minimum, max=maximum, error=f"must be between {minimum} and {maximum}")


# ---------------------------------------------------------------------------------------
# Field types (each has a column check in service.column_checks)


class StrictNumber(fields.Float):
    """A JSON number: strings and booleans are refused, as are NaN and infinities."""

    default_error_messages = {
        "invalid": "must be a number",
        "special": "must be a finite number",
        "too_large": "must be a finite number",
        "required": "is required",
        "null": "must not be null",
    }

    def __init__(self, **kwargs: Any) -> None:
        kwargs.setdefault("allow_none", not kwargs.get("required", False))
        super().__init__(allow_nan=False, **kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.make_error("invalid")
        try:
            return super()._deserialize(float(value), attr, data, **kwargs)
        except OverflowError:
            raise self.make_error("too_large") from None


class WholeNumber(StrictNumber):
    """A JSON integer (``3``, not ``3.0``, ``"3"`` or ``true``), loaded as a float."""

    default_error_messages = {"invalid": "must be a whole number"}

    def _deserialize(self, value, attr, data, **kwargs):
        if type(value) is not int:
            raise self.make_error("invalid")
        return super()._deserialize(value, attr, data, **kwargs)


class _InstantText(fields.Field):
    """Text read as Unix seconds by :meth:`parse`; ``null`` allowed when the field is optional."""

    def __init__(self, **kwargs: Any) -> None:
        kwargs.setdefault("allow_none", not kwargs.get("required", False))
        super().__init__(**kwargs)

    @staticmethod
    def parse(text: str) -> float:
        raise NotImplementedError

    def _deserialize(self, value, attr, data, **kwargs) -> float:
        if not isinstance(value, str):
            raise self.make_error("invalid")
        try:
            return self.parse(value)
        except ValueError as error:
            raise self.make_error("no_offset" if str(error) == "no UTC offset" else "invalid") from None


class OffsetDateTime(_InstantText):
    """An ISO 8601 date-time with offset, loaded as Unix seconds (see
    :func:`service.time_text.parse_offset_datetime`)."""

    default_error_messages = {
        "invalid": "must be an ISO 8601 date-time string",
        "no_offset": "must carry a UTC offset, e.g. 2026-05-20T12:00:00+02:00 or ...Z",
        "required": "is required",
        "null": "must not be null",
    }
    parse = staticmethod(parse_offset_datetime)


class IsoDate(_InstantText):
    """An ISO 8601 calendar date ``YYYY-MM-DD``, loaded as the Unix seconds of its 00:00 UTC
    (see :func:`service.time_text.parse_iso_date`)."""

    default_error_messages = {"invalid": "must be an ISO 8601 date YYYY-MM-DD", "required": "is required",
                              "null": "must not be null"}
    parse = staticmethod(parse_iso_date)


class Text(fields.String):
    """A JSON string; ``null`` allowed when the field is optional."""

    default_error_messages = {"invalid": "must be a string", "required": "is required",
                              "null": "must not be null"}

    def __init__(self, **kwargs: Any) -> None:
        kwargs.setdefault("allow_none", not kwargs.get("required", False))
        super().__init__(**kwargs)


class StrictBoolean(fields.Boolean):
    """``true`` or ``false`` only (no 1, "yes" or "on")."""

    default_error_messages = {"invalid": "must be true or false", "null": "must not be null"}

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, bool):
            raise self.make_error("invalid")
        return value


class OneOfRegistry(validate.Validator):
    """Value must be a key of a registry looked up at call time (e.g. surface types)."""

    def __init__(self, registry: Callable[[], Iterable[str]], what: str) -> None:
        self.registry = registry
        self.what = what

    @property
    def choices(self) -> frozenset[str]:
        return frozenset(self.registry())

    def __call__(self, value: str) -> str:
        choices = self.choices
        if value not in choices:
            raise ValidationError(f"unknown {self.what} {value!r}; known: {', '.join(sorted(choices))}")
        return value


class NoControlCharacters(validate.Validator):
    """Text without control characters (Unicode category Cc: U+0000-U+001F, U+007F-U+009F):
    an id is echoed into JSON, CSV and logs, where NUL, CR or ESC would do harm."""

    pattern = re.compile("[\x00-\x1f\x7f-\x9f]")

    def __call__(self, value: str) -> str:
        found = self.pattern.search(value)
        if found:
            raise ValidationError(f"must not hold control characters (U+{ord(found.group()):04X} at "
                                  f"position {found.start()})")
        return value


# ---------------------------------------------------------------------------------------
# Schema bases


class RecordSchema(Schema):
    """Base for record schemas: unknown fields are errors that name the field.

    ``exclusive_fields`` are pairs of fields (attribute names) a record may give one of,
    not both; ``one_of_fields`` pairs of which a record must give exactly one. The column
    checks read both, and the schema words their errors.
    """

    error_messages = {"unknown": "is not a field of this record", "type": "must be an object"}

    exclusive_fields: tuple[tuple[str, str], ...] = ()
    one_of_fields: tuple[tuple[str, str], ...] = ()

    def wire_name(self, attribute: str) -> str:
        return self.fields[attribute].data_key or attribute

    @validates_schema
    def _pairs(self, data: Mapping[str, Any], **kwargs: Any) -> None:
        for first, second in self.exclusive_fields:
            if data.get(first) is not None and data.get(second) is not None:
                raise ValidationError(f"give {self.wire_name(first)} or {self.wire_name(second)}, not both",
                                      self.wire_name(second))
        for first, second in self.one_of_fields:
            has_first = data.get(first) is not None
            if has_first == (data.get(second) is not None):
                raise ValidationError(f"give {self.wire_name(first)} or {self.wire_name(second)}, exactly one",
                                      self.wire_name(first if has_first else second))


class OptionsSchema(Schema):
    """Base for request-wide options (everything in the body besides the records)."""

    error_messages = {"unknown": "is not a field of this request", "type": "must be an object"}


# ---------------------------------------------------------------------------------------
# Shared field declarations


EARLIEST_TIME = datetime(1950, 1, 1, tzinfo=timezone.utc)
TIME_BEFORE = datetime(2101, 1, 1, tzinfo=timezone.utc)
TIME_SPAN_MESSAGE = "from 1950-01-01T00:00:00Z up to, not including, 2101-01-01T00:00:00Z"


def time_span(error: str = "must be " + TIME_SPAN_MESSAGE) -> validate.Range:
    """The instants the service accepts (Unix seconds, from :data:`EARLIEST_TIME` up to,
    not including, :data:`TIME_BEFORE`), for times and dates alike."""
    return validate.Range(min=EARLIEST_TIME.timestamp(), max=TIME_BEFORE.timestamp(), max_inclusive=False,
                          error=error)


def offset_time(data_key: str = "time", *, required: bool = True, **kwargs: Any) -> OffsetDateTime:
    """A date-time field over :func:`time_span` (``start``/``end`` of windows, ``time`` elsewhere)."""
    kwargs.setdefault("validate", time_span())
    return OffsetDateTime(data_key=data_key, required=required, metadata={"units": "ISO 8601 with offset"},
                          **kwargs)


def _spectrum_names() -> Iterable[str]:
    from uvdose.models.action_spectra import ACTION_SPECTRA

    return ACTION_SPECTRA.keys()


def _distinct_names(names: list[str]) -> None:
    if len(set(names)) != len(names):
        raise ValidationError("names a spectrum twice")


def _surface_type_names() -> Iterable[str]:
    from uvdose.models.surfaces import SURFACE_TYPES

    return SURFACE_TYPES.keys()


MAX_ID_CHARACTERS = 200
"""Longest record (or route) id accepted, in characters."""
RECORD_ID = Text(validate=[validate.Length(max=MAX_ID_CHARACTERS, error="must be at most {max} characters"),
                           NoControlCharacters()],
                 metadata={"description": "client's own label, echoed back"})
LATITUDE = StrictNumber(data_key="lat", required=True, validate=between(-90, 90),
                        metadata={"units": "degree north"})
LONGITUDE = StrictNumber(data_key="lon", required=True, validate=between(-180, 180),
                         metadata={"units": "degree east"})
ELEVATION = StrictNumber(validate=between(-500, 9000), metadata={"units": "m"})
PRESSURE = StrictNumber(validate=between(300, 1100), metadata={"units": "hPa"})
OZONE_COLUMN = StrictNumber(validate=between(50, 700), metadata={"units": "DU"})
AOD_550 = StrictNumber(validate=between(0, 5), metadata={"units": "1"})
ANGSTROM_EXPONENT = StrictNumber(validate=between(-0.5, 3), metadata={"units": "1"})
SINGLE_SCATTERING_ALBEDO = StrictNumber(validate=between(0, 1), metadata={"units": "1"})
ASYMMETRY_FACTOR = StrictNumber(validate=between(0, 0.95), metadata={"units": "1"})
SURFACE_ALBEDO = StrictNumber(validate=between(0, 1), metadata={"units": "1"})
SURFACE_TYPE = Text(validate=[validate.Length(max=64, error="must be at most {max} characters"),
                              OneOfRegistry(_surface_type_names, "surface type")],
                    metadata={"units": "name"})
CLOUD_FACTOR = StrictNumber(data_key="cloud_factor", validate=between(0, 1.5), metadata={"units": "1"})
CLOUD_COVER = StrictNumber(data_key="cloud_cover", validate=between(0, 1), metadata={"units": "1"})
CLOUD_OKTAS = StrictNumber(data_key="cloud_oktas", validate=between(0, 8), metadata={"units": "okta"})


class ConditionsRecordSchema(RecordSchema):
    """Where and when, and the atmosphere and ground there: the fields every batch endpoint shares.

    Ranges are what the service accepts, wide enough for any real place on Earth's
    surface (and cloud enhancement up to 1.5, seen under broken cloud); they are not
    claims about model accuracy at the extremes.
    """

    id = RECORD_ID
    time_unix_s = offset_time()
    latitude_deg = LATITUDE
    longitude_deg = LONGITUDE
    elevation_m = ELEVATION
    pressure_hpa = PRESSURE
    ozone_du = OZONE_COLUMN
    aod_550 = AOD_550
    angstrom_exponent = ANGSTROM_EXPONENT
    single_scattering_albedo = SINGLE_SCATTERING_ALBEDO
    asymmetry_factor = ASYMMETRY_FACTOR
    surface_albedo = SURFACE_ALBEDO
    surface_type = SURFACE_TYPE
    cloud_modification_factor = CLOUD_FACTOR

    exclusive_fields = (("surface_albedo", "surface_type"),)


SPECTRA_OPTION = fields.List(
    fields.String(validate=OneOfRegistry(_spectrum_names, "action spectrum"),
                  error_messages={"invalid": "must be a string"}),
    validate=[validate.Length(min=1, max=8, error="must name between {min} and {max} spectra"), _distinct_names],
    error_messages={"invalid": "must be an array of spectrum names"})
"""The request-wide ``spectra`` option: action-spectrum names, 1 to 8, each once."""


def _climatology_names() -> Iterable[str]:
    from uvdose.models.ozone_climatology import CLIMATOLOGY_NAMES

    return CLIMATOLOGY_NAMES


OZONE_CLIMATOLOGY_OPTION = Text(validate=OneOfRegistry(_climatology_names, "ozone climatology"))
"""The request-wide ``ozone_climatology`` option: which embedded climatology supplies the
column of records that give none and no operator grid covers (default ``observed``)."""
