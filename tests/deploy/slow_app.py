"""The uvdose app plus one test-only route that holds a request open.

Used by test_gunicorn_lifecycle.py to have a request in flight when SIGTERM arrives.
``POST /v1/test-hold?seconds=S`` touches the file named by ``UVDOSE_TEST_HOLD_MARKER``
when it starts, sleeps S seconds and answers with a body of known size.
``POST /v1/test-parts?seconds=S`` works like the engine gateway does: S seconds in parts
of 50 ms, checking the request deadline between parts (service/request_deadline.py).
"""
import os
import time
from pathlib import Path

from flask import jsonify, request

from uvdose.service import request_deadline
from uvdose.service.app import create_app as create_service_app

HOLD_BODY_ITEMS = 5000


def create_app():
    app = create_service_app()

    @app.post("/v1/test-hold")
    def test_hold():
        Path(os.environ["UVDOSE_TEST_HOLD_MARKER"]).touch()
        time.sleep(float(request.args.get("seconds", "1")))
        return jsonify({"held": list(range(HOLD_BODY_ITEMS))})

    @app.post("/v1/test-parts")
    def test_parts():
        marker = os.environ.get("UVDOSE_TEST_HOLD_MARKER")
        if marker:
            Path(marker).touch()
        ends = time.monotonic() + float(request.args.get("seconds", "1"))
        while time.monotonic() < ends:
            request_deadline.check()
            time.sleep(0.05)
        return jsonify({"held": list(range(HOLD_BODY_ITEMS))})

    return app
