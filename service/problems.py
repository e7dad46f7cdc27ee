"""Error responses as RFC 9457 problem details (``application/problem+json``).

Every error the service returns, from a bad record to an unknown URL or an unexpected
exception, goes through :func:`problem_response`. The typed per-record errors the models
raise (``models.record_errors``) become problem entries here, in :func:`records_named`:
the caller, which knows the records' wire names and ids, says how to name each. Problem types are URNs of our own
(``urn:uvdose:problem:<slug>``); plain HTTP errors use ``about:blank`` as RFC 9457 §4.2.1
recommends, with the HTTP reason phrase as title.
"""
from __future__ import annotations

import json
import logging
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterator, Sequence

import yaml
from flask import Flask, Response
from werkzeug.exceptions import HTTPException

from uvdose.models.clear_sky import FullSolveLimitExceeded
from uvdose.models.record_errors import RecordError, RecordErrors

PROBLEM_MEDIA_TYPE = "application/problem+json"
TYPE_PREFIX = "urn:uvdose:problem:"

log = logging.getLogger(__name__)


@dataclass
class FieldError:
    """One thing wrong with one field of one record (or of the request envelope).

    ``index`` is the 0-based record position and ``id`` the record's own id, both
    ``None`` for request-wide fields such as ``spectra``.
    """

    field: str
    reason: str
    index: int | None = None
    id: str | None = None

    def as_dict(self) -> dict[str, Any]:
        return {"index": self.index, "id": self.id, "field": self.field, "reason": self.reason}


@dataclass(frozen=True)
class ProblemType:
    """One problem ``type`` the service answers with, as the docs page explains it."""

    slug: str
    status: int
    title: str
    meaning: str
    remedy: str

    @property
    def uri(self) -> str:
        return TYPE_PREFIX + self.slug if self.slug != "about:blank" else "about:blank"


def _problem_types() -> tuple[ProblemType, ...]:
    entries = yaml.safe_load((Path(__file__).parent / "problem_types.yaml").read_text(encoding="utf-8"))
    return tuple(ProblemType(**entry) for entry in entries)


PROBLEM_TYPES: tuple[ProblemType, ...] = _problem_types()
"""Every problem ``type`` the service answers with, from ``service/problem_types.yaml``
(``tests/service/test_docs.py`` holds the code and openapi.yaml to that list)."""


@dataclass
class Problem(Exception):
    """Raise anywhere in a request to answer with a problem document."""

    status: int
    slug: str
    title: str
    detail: str | None = None
    errors: list[FieldError] = field(default_factory=list)
    extensions: dict[str, Any] = field(default_factory=dict)
    error_count: int | None = None
    """How many errors were found, when ``errors`` lists only some of them."""
    headers: dict[str, str] = field(default_factory=dict)  # sent with the answer (say Retry-After)

    def __str__(self) -> str:
        return f"{self.status} {self.title}: {self.detail or ''}"


class FieldErrors(list):
    """Field errors as found, where describing every one would cost unbounded work: the
    listed :class:`FieldError` entries, and ``unlisted`` more counted but not described, of
    the records at ``unlisted_indices``."""

    def __init__(self, listed: Sequence[FieldError] = (), unlisted: int = 0,
                 unlisted_indices: Sequence[int] = ()) -> None:
        super().__init__(listed)
        self.unlisted = unlisted
        self.unlisted_indices = unlisted_indices


def unlisted_errors(errors: Sequence[FieldError]) -> int:
    """How many errors ``errors`` counts beyond those it lists (0 for a plain list)."""
    return getattr(errors, "unlisted", 0)


def invalid_records(errors: Sequence[FieldError], n: int, what: str = "record",
                    error_count: int | None = None) -> Problem:
    """The 422 problem for ``errors`` found in ``n`` records (``what`` names them in the detail);
    ``invalid-options`` when no error names a record. ``error_count``: how many errors were
    found, when ``errors`` lists only some (else the count a :class:`FieldErrors` carries)."""
    if error_count is None and unlisted_errors(errors):
        error_count = len(errors) + unlisted_errors(errors)
    indices = {error.index for error in errors if error.index is not None}
    bad_count = len(indices.union(getattr(errors, "unlisted_indices", ())))
    if not bad_count:  # only request-wide errors: options, or column names in the column layout
        return Problem(422, "invalid-options", "The request options are invalid", "Nothing was computed.",
                       list(errors), error_count=error_count)
    return Problem(422, "invalid-records", "The batch has invalid records",
                   f"{bad_count} of {n} {what}(s) have errors; nothing was computed.", list(errors),
                   error_count=error_count)


NameRecordError = Callable[[RecordError], FieldError]
"""Turns a models ``RecordError`` (model field names, array positions) into the problem
entry the client reads (wire field path, record index and id)."""


def record_field_errors(error: RecordError | RecordErrors, name: NameRecordError) -> list[FieldError]:
    """The problem entries for a models record error, one per record and field."""
    return [name(entry) for entry in (error.errors if isinstance(error, RecordErrors) else [error])]


@contextmanager
def records_named(name: NameRecordError, n: int, what: str = "record") -> Iterator[None]:
    """Run models code whose ``RecordError``/``RecordErrors`` become the 422 problem for
    ``n`` records (``what`` names them in the detail), each entry named by ``name``."""
    try:
        yield
    except (RecordError, RecordErrors) as error:
        raise invalid_records(record_field_errors(error, name), n, what) from None


def by_schema(schema: Any, ids: Sequence[Any] | None = None) -> NameRecordError:
    """Name record errors by a record schema's wire names: the model's field is the schema
    attribute (the engine's column name), its ``data_key`` the wire name; ``ids`` (object
    array, None where a record gave none) supply the record ids."""
    wire = {name: declared.data_key or name for name, declared in schema.fields.items()}

    def name(error: RecordError) -> FieldError:
        record_id = ids[error.index] if ids is not None else None
        return FieldError(field=wire.get(error.field, error.field) if error.field else "record",
                          reason=error.reason, index=error.index,
                          id=record_id if isinstance(record_id, str) else None)

    return name


def _model_names(error: RecordError) -> FieldError:
    return FieldError(field=error.field or "record", reason=error.reason, index=error.index)


def problem_body(
    status: int,
    title: str,
    detail: str | None = None,
    type_uri: str = "about:blank",
    **extensions: Any,
) -> dict[str, Any]:
    """The problem document as a dict (RFC 9457 §3.1 members, then our extensions)."""
    body: dict[str, Any] = {"type": type_uri, "title": title, "status": status}
    if detail:
        body["detail"] = detail
    body.update(extensions)
    return body


def problem_response(
    status: int,
    title: str,
    detail: str | None = None,
    type_uri: str = "about:blank",
    headers: dict[str, str] | None = None,
    **extensions: Any,
) -> Response:
    """A Flask response carrying a problem document."""
    body = problem_body(status, title, detail, type_uri, **extensions)
    response = Response(json.dumps(body), status=status, mimetype=PROBLEM_MEDIA_TYPE)
    for name, value in (headers or {}).items():
        response.headers[name] = value
    return response


def response_for(problem: Problem, max_errors: int | None = None) -> Response:
    """Render a raised :class:`Problem`; at most ``max_errors`` field errors are listed."""
    extensions = dict(problem.extensions)
    if problem.errors:
        listed = problem.errors if max_errors is None else problem.errors[:max_errors]
        extensions["error_count"] = max(len(problem.errors), problem.error_count or 0)
        extensions["errors"] = [error.as_dict() for error in listed]
    return problem_response(
        problem.status, problem.title, problem.detail, TYPE_PREFIX + problem.slug,
        headers=problem.headers, **extensions
    )


def _http_exception(error: HTTPException) -> Response:
    status = error.code or 500
    headers = {}
    allowed = getattr(error, "valid_methods", None)
    if status == 405 and allowed:
        headers["Allow"] = ", ".join(sorted(allowed))
    detail = error.description if status != 500 else None
    return problem_response(status, error.name, detail, headers=headers)


def init_app(app: Flask) -> None:
    """Answer every error with a problem document."""

    @app.errorhandler(Problem)
    def _problem(problem: Problem) -> Response:
        return response_for(problem, app.config.get("UVDOSE_MAX_ERRORS_LISTED"))

    @app.errorhandler(FullSolveLimitExceeded)
    def _full_solve(error: FullSolveLimitExceeded) -> Response:
        problem = Problem(413, "too-many-full-solve-records", "Too many records for the full solve",
                          f"{error.requested} records (or dose samples) fall outside the precomputed "
                          f"table and need the full radiative-transfer solve; at most {error.limit} "
                          "are allowed per request. Split the batch.",
                          extensions={"max_full_solve_records": error.limit})
        return response_for(problem)

    @app.errorhandler(RecordError)
    @app.errorhandler(RecordErrors)
    def _records(error: RecordError | RecordErrors) -> Response:
        # A models record error no route named (routes wrap their models calls in
        # records_named): still the client's 422, with the models' own field names.
        errors = record_field_errors(error, _model_names)
        n = max(e.index for e in errors) + 1
        return response_for(invalid_records(errors, n), app.config.get("UVDOSE_MAX_ERRORS_LISTED"))

    @app.errorhandler(HTTPException)
    def _http(error: HTTPException) -> Response:
        return _http_exception(error)

    @app.errorhandler(Exception)
    def _unexpected(error: Exception) -> Response:
        if not app.config.get("UVDOSE_HANDLE_ERRORS_AS_PROBLEMS", True):
            raise error
        log.exception("unexpected error while serving a request")
        return problem_response(
            500,
            "Internal Server Error",
            "The service failed while handling this request; the failure has been logged.",
        )
