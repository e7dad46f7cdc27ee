"""Typed record errors of models/ become problem entries named as the client wrote them."""
import numpy as np
import pytest

from uvdose.models.record_errors import RecordError, RecordErrors
from uvdose.service.irradiance_batch import IrradianceRecordSchema
from uvdose.service.problems import Problem, by_schema, records_named


def test_records_named_uses_the_schema_wire_names_and_the_record_ids():
    ids = np.array(["north-plot", None, "south-plot"], dtype=object)
    with pytest.raises(Problem) as raised:
        with records_named(by_schema(IrradianceRecordSchema(), ids), 3):
            raise RecordErrors([RecordError(0, "cloud_modification_factor", "must be at most 1.5"),
                                RecordError(1, "latitude_deg", "must be within [-90, 90]"),
                                RecordError(2, None, "cannot be used")])
    problem = raised.value
    assert (problem.status, problem.slug) == (422, "invalid-records")
    assert problem.detail == "3 of 3 record(s) have errors; nothing was computed."
    assert [(e.index, e.id, e.field, e.reason) for e in problem.errors] == [
        (0, "north-plot", "cloud_factor", "must be at most 1.5"),
        (1, None, "lat", "must be within [-90, 90]"),
        (2, "south-plot", "record", "cannot be used")]


def test_an_unnamed_record_error_is_still_the_clients_422(make_app):
    app = make_app()

    @app.get("/v1/test-record-error")
    def _raise():
        raise RecordError(4, "time_unix_s", "must be finite")

    response = app.test_client().get("/v1/test-record-error")
    assert response.status_code == 422 and response.mimetype == "application/problem+json"
    body = response.get_json()
    assert body["type"] == "urn:uvdose:problem:invalid-records"
    assert body["errors"] == [{"index": 4, "id": None, "field": "time_unix_s", "reason": "must be finite"}]
