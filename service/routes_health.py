"""Liveness and readiness: ``GET /livez`` and ``GET /readyz``.

``/livez`` answers as long as the process serves HTTP. ``/readyz`` answers 200 when the
engine can compute (its modules import and its precomputed tables load) and the contract
can be served (``/openapi.yaml``, ``/docs``), 503 when either fails. The cache is
reported but never makes the service unready: without it the engine still computes
every record, only slower.
"""
from __future__ import annotations

from flask import Blueprint, jsonify

from uvdose.models import MODEL_VERSION
from uvdose.service import engine_gateway
from uvdose.service.contract import contract_check
from uvdose.service.negotiation import JSON_MEDIA_TYPE, produces

blueprint = Blueprint("health", __name__)


@blueprint.get("/livez")
@produces(JSON_MEDIA_TYPE)
def livez():
    return jsonify({"status": "alive"})


@blueprint.get("/readyz")
@produces(JSON_MEDIA_TYPE)
def readyz():
    engine = engine_gateway.engine_check()
    cache = engine_gateway.cache_check()
    contract = contract_check()
    ready = engine["ok"] and contract["ok"]
    status = "ready" if ready and cache["answers"] is not False else ("degraded" if ready else "unready")
    body = {"status": status, "model_version": MODEL_VERSION,
            "checks": {"engine": engine, "cache": cache, "contract": contract}}
    return jsonify(body), (200 if ready else 503)
