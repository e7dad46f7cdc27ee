"""Structured request logging: one JSON line per request, tagged with a request id.

Every request gets a request id. A client (or a proxy in front of us) may send one in
the ``X-Request-ID`` header; it is kept when it is 1–128 characters from
``[A-Za-z0-9._:-]``, otherwise a fresh one is made (the rejected value is never
logged: it could carry anything). The id is echoed back in the ``X-Request-ID``
response header and is available to the rest of the app as :func:`current_request_id`.

What a request line holds, and only that (no personal data: no coordinates, no record
ids, no query strings, no client address, no API keys, no ``Authorization`` header):

=================  ==============================================================
``ts``             time the line was written, ISO 8601 UTC, milliseconds
``level``          ``info``; ``warning`` for 4xx; ``error`` for 5xx
``event``          ``"request"``
``request_id``     the id described above
``request_id_from`` ``client``, ``generated`` or ``replaced`` (client value refused)
``method``         HTTP method
``route``          the matched URL rule (``/v1/irradiance``), ``null`` when no rule
                   matched — the raw path is not logged
``status``         response status code
``duration_ms``    wall time inside the app
``request_bytes``  declared request body size
``response_bytes`` response body size when known, before any content coding
``records``        batch size, when the route sets ``flask.g.uvdose_record_count``
``auth``           outcome recorded by :mod:`service.auth` (``off``, ``open``,
                   ``ok``, ``missing``, ``invalid``)
``pid``            worker process id
=================  ==============================================================

Settings (parsed with the others by :mod:`service.config`): ``UVDOSE_REQUEST_LOG``
(``on``/``off``, default ``on``) and ``UVDOSE_LOG_LEVEL`` (``debug`` … ``critical``,
default ``info``); any other value stops the app at start with a message naming it.
:class:`JsonLogFormatter` is also what ``deploy/gunicorn.conf.py`` uses for the
server's own log, so everything the container prints is JSON lines.
"""
from __future__ import annotations

import json
import logging
import os
import re
import sys
import time
import traceback
import uuid
from datetime import datetime, timezone

from flask import Flask, g, has_request_context, request
from flask.logging import default_handler as flask_default_handler

REQUEST_ID_HEADER = "X-Request-ID"
REQUEST_ID_MAX_LENGTH = 128
_REQUEST_ID_PATTERN = re.compile(r"[A-Za-z0-9._:\-]{1,%d}" % REQUEST_ID_MAX_LENGTH)

REQUEST_LOGGER_NAME = "uvdose.request"
_HANDLER_MARK = "_uvdose_json_handler"


class JsonLogFormatter(logging.Formatter):
    """Format a log record as one JSON object on one line.

    Fixed fields: ``ts``, ``level``, ``logger``, and ``message`` (omitted when a
    structured record carries ``event`` instead). Structured fields come only from the
    ``uvdose_fields`` dict passed as ``extra``; arbitrary ``extra`` attributes are not
    copied, so nothing reaches the log by accident. Exceptions add ``exception``.
    """

    def format(self, record: logging.LogRecord) -> str:
        line: dict[str, object] = {
            "ts": datetime.fromtimestamp(record.created, tz=timezone.utc).isoformat(
                timespec="milliseconds"
            ).replace("+00:00", "Z"),
            "level": record.levelname.lower(),
            "logger": record.name,
        }
        fields = getattr(record, "uvdose_fields", None)
        if isinstance(fields, dict):
            line.update(fields)
        else:
            line["message"] = record.getMessage()
            if has_request_context() and "request_id" in g:
                line["request_id"] = g.request_id
        if record.exc_info:
            line["exception"] = "".join(traceback.format_exception(*record.exc_info)).rstrip()
        return json.dumps(line, separators=(",", ":"), default=str)


class ServerLogRedaction(logging.Filter):
    """Strip client addresses and query strings from gunicorn's own messages.

    gunicorn logs a refused request as ``Invalid request from ip=<address>: <error>``
    and a failed one as ``Error handling request <method> <uri>``; the address is
    personal data and a query string may carry coordinates. The message is rendered,
    then ``ip=<address>`` and every ``?<query>`` are replaced by ``<redacted>``.
    """

    _ADDRESS = re.compile(r"\bip=\S*?(?=: |[,\s]|$)")
    _QUERY = re.compile(r"\?[^\s'\"]*")

    def filter(self, record: logging.LogRecord) -> bool:
        message = record.getMessage()
        redacted = self._QUERY.sub("?<redacted>", self._ADDRESS.sub("ip=<redacted>", message))
        if redacted != message:
            record.msg, record.args = redacted, None
        return True


def current_request_id() -> str | None:
    """The id of the request being served, or None outside a request."""
    if has_request_context():
        return g.get("request_id")
    return None


def accepted_request_id(value: str | None) -> str | None:
    """``value`` if it is acceptable as a request id, else None."""
    if value is not None and _REQUEST_ID_PATTERN.fullmatch(value):
        return value
    return None


class _StandardStreamHandler(logging.StreamHandler):
    """Writes to ``sys.stdout`` or ``sys.stderr`` as they are at each emit, not at set-up."""

    def __init__(self, stream_name: str):
        self._stream_name = stream_name
        super().__init__()

    @property
    def stream(self):
        return getattr(sys, self._stream_name)

    @stream.setter
    def stream(self, _value):
        pass


def json_handler(stream_name: str = "stderr") -> logging.Handler:
    """A handler writing :class:`JsonLogFormatter` lines to ``sys.stdout``/``sys.stderr``."""
    handler = _StandardStreamHandler(stream_name)
    handler.setFormatter(JsonLogFormatter())
    setattr(handler, _HANDLER_MARK, True)
    return handler


def configure_logger(logger: logging.Logger, level: str, stream_name: str) -> logging.Logger:
    """Give ``logger`` one JSON handler on stdout/stderr (idempotent) and the given level."""
    logger.setLevel(level)
    if not any(getattr(h, _HANDLER_MARK, False) for h in logger.handlers):
        logger.addHandler(json_handler(stream_name))
    logger.propagate = False
    return logger


def init_app(app: Flask) -> None:
    """Install request-id handling and the per-request JSON log line on ``app``."""
    enabled = app.config["UVDOSE_REQUEST_LOG"]
    level = app.config["UVDOSE_LOG_LEVEL"]
    logger = configure_logger(logging.getLogger(REQUEST_LOGGER_NAME), level, "stdout")
    # The app's other messages (unhandled exceptions and the like) go to the root
    # logger. Under gunicorn, deploy/gunicorn.conf.py gives it a JSON handler; when
    # nothing has configured logging (embedded run), do the same here.
    app.logger.removeHandler(flask_default_handler)
    root = logging.getLogger()
    if not root.handlers:
        root.setLevel(level)
        root.addHandler(json_handler("stderr"))

    @app.before_request
    def _start_request() -> None:
        g.request_started = time.perf_counter()
        offered = request.headers.get(REQUEST_ID_HEADER)
        accepted = accepted_request_id(offered)
        if accepted is not None:
            g.request_id, g.request_id_from = accepted, "client"
        else:
            g.request_id = uuid.uuid4().hex
            g.request_id_from = "generated" if offered is None else "replaced"

    @app.after_request
    def _finish_request(response):
        request_id = g.get("request_id")
        if request_id is None:  # a before_request hook ahead of ours answered
            request_id = g.request_id = uuid.uuid4().hex
            g.request_id_from = "generated"
        response.headers[REQUEST_ID_HEADER] = request_id
        if enabled:
            _log_request(logger, response)
        return response


def _log_request(logger: logging.Logger, response) -> None:
    started = g.get("request_started")
    status = response.status_code
    fields = {
        "event": "request",
        "request_id": g.request_id,
        "request_id_from": g.get("request_id_from"),
        "method": request.method,
        "route": request.url_rule.rule if request.url_rule is not None else None,
        "status": status,
        "duration_ms": None if started is None else round((time.perf_counter() - started) * 1e3, 3),
        "request_bytes": request.content_length,
        "response_bytes": _response_bytes(response),
        "records": g.get("uvdose_record_count"),
        "auth": g.get("uvdose_auth"),
        "pid": os.getpid(),
    }
    level = logging.ERROR if status >= 500 else logging.WARNING if status >= 400 else logging.INFO
    logger.log(level, "request", extra={"uvdose_fields": fields})


def _response_bytes(response) -> int | None:
    if response.content_length is not None:
        return response.content_length
    return None if response.is_streamed else response.calculate_content_length()
