"""``GET /v1/catalogue``: what the service can weight by, reflect from and filter through.

Lists the action spectra, surface types and glazing/film filters the models define (each
with its published source, units and normalisation), the record fields of
``POST /v1/irradiance`` with their enforced ranges (read from the same marshmallow
declarations the validation uses), and the request limits.
"""
from __future__ import annotations

import importlib
from typing import Any

from flask import Blueprint, current_app

from uvdose.models import MODEL_VERSION
from uvdose.service.caching_headers import cacheable
from uvdose.service.cautions import CAUTION
from uvdose.service.column_checks import column_rules
from uvdose.service.engine_gateway import default_spectra
from uvdose.service.irradiance_batch import IrradianceRecordSchema
from uvdose.service.negotiation import JSON_MEDIA_TYPE, produces
from uvdose.service.wire_formats import json_response

blueprint = Blueprint("catalogue", __name__)


def _listing(module_name: str) -> list[dict[str, Any]]:
    module = importlib.import_module(module_name)
    return list(module.catalogue())


def record_fields() -> list[dict[str, Any]]:
    """The irradiance record fields: wire name, kind, requiredness, enforced range, units."""
    schema = IrradianceRecordSchema()
    units = {field.data_key or name: field.metadata.get("units") for name, field in schema.fields.items()}
    described = []
    for rule in column_rules(schema):
        minimum, maximum = rule.minimum, rule.maximum
        if rule.kind == "time":
            minimum, maximum = "1950-01-01T00:00:00Z", "2101-01-01T00:00:00Z"
        entry = {"name": rule.wire, "required": rule.required, "type": rule.kind,
                 "minimum": minimum, "maximum": maximum, "maximum_exclusive": not rule.max_inclusive}
        if units.get(rule.wire):
            entry["description"] = f"units: {units[rule.wire]}"
        described.append(entry)
    return described


def _surface_listing() -> list[dict[str, Any]]:
    module = importlib.import_module("uvdose.models.surfaces")
    if hasattr(module, "catalogue"):
        return list(module.catalogue())
    return [{"name": s.name, "uv_albedo": float(s.uv_albedo), "source": s.source}
            for s in module.SURFACE_TYPES.values()]


@blueprint.get("/v1/catalogue")
@produces(JSON_MEDIA_TYPE)
def catalogue():
    response = json_response({
        "model_version": MODEL_VERSION,
        "caution": CAUTION,
        "default_spectra": default_spectra(),
        "action_spectra": _listing("uvdose.models.action_spectra"),
        "surface_types": _surface_listing(),
        "filters": _listing("uvdose.models.filters"),
        "record_fields": record_fields(),
        "limits": {"max_records": current_app.config["UVDOSE_MAX_RECORDS"],
                   "max_body_bytes": current_app.config["MAX_CONTENT_LENGTH"],
                   "max_full_solve_records": current_app.config["UVDOSE_MAX_FULL_SOLVE_RECORDS"],
                   "max_weather_readings": current_app.config["UVDOSE_MAX_WEATHER_READINGS"],
                   "max_route_points": current_app.config["UVDOSE_MAX_ROUTE_POINTS"],
                   "max_sample_spectra": current_app.config["UVDOSE_MAX_SAMPLE_SPECTRA"],
                   "chunk_sample_spectra": current_app.config["UVDOSE_CHUNK_SAMPLE_SPECTRA"],
                   "max_answer_bytes": current_app.config["UVDOSE_MAX_ANSWER_BYTES"],
                   "max_streamed_answer_bytes": current_app.config["UVDOSE_MAX_STREAMED_ANSWER_BYTES"]},
    })
    # Behind API keys the answer is for key holders only: no shared cache may keep it.
    return cacheable(response, shared=not current_app.extensions["uvdose_auth"].enabled)
