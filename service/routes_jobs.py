"""``/v1/jobs``: batches of any size, run in parts on Dask (:mod:`service.jobs`).

* ``POST /v1/jobs/<irradiance|ozone|windows|fields|routes>``: the body the
  operation's synchronous endpoint takes (JSON, or CSV with the options in the query
  string), or a Parquet file of records (options in the query string); checked whole by the
  endpoint's own reader before it is accepted (the same 422 problem), then 202 with the
  job's status document and its URL in ``Location``.
* ``GET /v1/jobs/<id>``: state, records done of all, parts written, an estimate of the
  seconds left, when it finished and when it expires.
* ``GET /v1/jobs/<id>/results`` (once succeeded) and ``GET /v1/jobs/<id>/results/<part>``
  (as soon as that part is written): the rows as NDJSON, CSV or Parquet (``format`` in the
  query, else the ``Accept`` header), the whole result streamed part by part.
* ``DELETE /v1/jobs/<id>``: cancel it.
"""
from __future__ import annotations

import tempfile
from typing import Any

from flask import Blueprint, Response, request, send_file

from uvdose.service import cautions, job_results, jobs
from uvdose.service.answer_streams import streamed
from uvdose.service.job_operations import OPERATIONS
from uvdose.service.negotiation import JSON_MEDIA_TYPE, chosen_media_type, produces
from uvdose.service.problems import FieldError, Problem
from uvdose.service.request_body import read_body
from uvdose.service.wire_formats import json_response

ROUTE = "/v1/jobs"

blueprint = Blueprint("jobs", __name__)


def _not_found(job_id: str) -> Problem:
    return Problem(404, "job-not-found", "No such job",
                   f"There is no job {job_id!r}: it was never submitted here, or it has expired "
                   "(finished jobs are kept for UVDOSE_JOB_TTL_S seconds).")


def _status_or_404(document: dict[str, Any] | None, job_id: str) -> dict[str, Any]:
    if document is None:
        raise _not_found(job_id)
    document["links"] = {"self": f"{ROUTE}/{job_id}", "results": f"{ROUTE}/{job_id}/results",
                         "part": f"{ROUTE}/{job_id}/results/{{part}}"}
    return document


@produces(JSON_MEDIA_TYPE)
def submit_job() -> Response:
    operation = OPERATIONS[request.path.rsplit("/", 1)[1]]
    document = jobs.current().submit(operation, read_body(request), request.mimetype, request.args)
    response = json_response(_status_or_404(document, document["id"]), status=202)
    response.headers["Location"] = f"{ROUTE}/{document['id']}"
    return response


for _name in OPERATIONS:  # one literal path per operation, as the contract lists them
    blueprint.add_url_rule(f"{ROUTE}/{_name}", f"submit_{_name}_job", submit_job, methods=["POST"])


@blueprint.get(f"{ROUTE}/<job_id>")
@produces(JSON_MEDIA_TYPE)
def job_status(job_id: str) -> Response:
    return json_response(_status_or_404(jobs.current().status(job_id), job_id))


@blueprint.delete(f"{ROUTE}/<job_id>")
@produces(JSON_MEDIA_TYPE)
def cancel_job(job_id: str) -> Response:
    return json_response(_status_or_404(jobs.current().cancel(job_id), job_id))


def _results_media_type() -> str:
    wanted = request.args.get("format")
    if wanted is None:
        return chosen_media_type()
    if wanted not in job_results.FORMATS:
        raise Problem(422, "invalid-options", "The request options are invalid", "Nothing was sent.",
                      [FieldError(field="format", reason=f"must be one of {', '.join(job_results.FORMATS)}")])
    return job_results.FORMATS[wanted]


def _not_ready(detail: str) -> Problem:
    return Problem(409, "job-not-ready", "The job's results are not ready", detail)


def _rows_response(job_id: str, parts: list[int], name: str) -> Response:
    media_type = _results_media_type()
    job = jobs.current()
    pieces = (job.part_rows(job_id, part) for part in parts)
    envelope = job.envelope(job_id) or {}
    caution = cautions.csv_caution(envelope.get("caution", cautions.CAUTION), envelope.get("figure_cautions"))
    if media_type == job_results.PARQUET_MEDIA_TYPE:
        # Parquet's footer comes last: the file is made whole (on disk), then sent.
        spooled = tempfile.TemporaryFile()
        job_results.write_parquet(pieces, spooled, caution)
        spooled.seek(0)
        return send_file(spooled, mimetype=media_type, download_name=f"{name}.parquet", as_attachment=True)
    if media_type == job_results.CSV_MEDIA_TYPE:
        response, extension = streamed(job_results.csv_parts(pieces, caution), media_type), "csv"
    else:
        response, extension = streamed(job_results.ndjson_parts(pieces), media_type), "ndjson"
    response.headers["Content-Disposition"] = f'attachment; filename="{name}.{extension}"'
    return response


_RESULT_TYPES = (job_results.NDJSON_MEDIA_TYPE, job_results.CSV_MEDIA_TYPE, job_results.PARQUET_MEDIA_TYPE)


@blueprint.get(f"{ROUTE}/<job_id>/results")
@produces(*_RESULT_TYPES)
def job_results_whole(job_id: str) -> Response:
    document = _status_or_404(jobs.current().status(job_id), job_id)
    if document["state"] != "succeeded":
        raise _not_ready(f"The job is {document['state']}; its whole result is ready once it has succeeded "
                         "(parts already written download one by one).")
    return _rows_response(job_id, list(range(document["parts"])), f"job-{job_id}")


@blueprint.get(f"{ROUTE}/<job_id>/results/<int:part>")
@produces(*_RESULT_TYPES)
def job_results_part(job_id: str, part: int) -> Response:
    document = _status_or_404(jobs.current().status(job_id), job_id)
    if not 0 <= part < document["parts"]:
        raise Problem(404, "job-not-found", "No such part",
                      f"Job {job_id} has parts 0 to {document['parts'] - 1}.")
    if part not in document["parts_done"]:
        raise _not_ready(f"Part {part} of the job is not written yet (the job is {document['state']}).")
    return _rows_response(job_id, [part], f"job-{job_id}-part-{part}")
