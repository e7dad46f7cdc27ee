"""Request bodies read whole and counted while they are read, whatever their framing.

Every endpoint that takes a body reads it through :func:`read_body`: with
``Content-Length`` (a declared length over ``UVDOSE_MAX_BODY_BYTES`` is refused before a
byte is read; a body that ends before its declared length is a 400), with
``Transfer-Encoding: chunked`` (counted as it arrives: the limit is hit after at most
one read past it, never by silently cutting the body), and coded with
``Content-Encoding: gzip`` (RFC 1952) or ``zstd`` (RFC 8878), whose decoded size is
counted against the same limit while decoding, so a small body that would expand to
gigabytes is a 413 after at most the limit plus one piece of output. Nothing is
computed for a body that is refused. Any other content coding is a 415 naming the ones
taken (RFC 9110 §15.5.16, with ``Accept-Encoding``).

The WSGI input is read directly rather than through Werkzeug's ``get_data``: for a
stream without ``Content-Length`` Werkzeug's limited stream stops at the limit and
gives what it has, which the readers would take for the whole body.
"""
from __future__ import annotations

import io
import socket
import zlib

import zstandard
from flask import Request, current_app

from uvdose.service.problems import Problem

BODY_LIMIT_KEY = "MAX_CONTENT_LENGTH"  # filled from UVDOSE_MAX_BODY_BYTES (service/config.py)
READ_PIECE_BYTES = 1024 * 1024
"""Largest single read from the WSGI input (and largest decoded piece): the most a
refused body is read or decoded past the limit."""
CONTENT_CODINGS = ("gzip", "zstd")
_CACHE_KEY = "uvdose.request_body"


def body_too_large(received: int, limit: int, *, known: bool, decoded: bool = False) -> Problem:
    """The 413 for a body of ``received`` bytes (``known`` False: at least that many) against
    ``limit``; ``decoded`` says the count is of the body after its content coding."""
    amount = f"{received}" if known else f"more than {received - 1}"
    what = "decoded body" if decoded else "body"
    return Problem(413, "body-too-large", "The request body is too large",
                   f"The {what} has {amount} bytes; at most {limit} bytes are accepted "
                   "(UVDOSE_MAX_BODY_BYTES). Nothing was computed. Split the batch.",
                   extensions={"body_bytes": received, "body_bytes_exact": known, "max_body_bytes": limit})


def incomplete_body(detail: str) -> Problem:
    return Problem(400, "incomplete-body", "The request body is incomplete",
                   f"{detail} Nothing was computed; send the whole body again.")


def read_body(request: Request) -> bytes:
    """The request's body, decoded from its ``Content-Encoding``, at most the configured
    limit in bytes both on the wire and decoded; :class:`Problem` 413, 400 or 415 otherwise.
    Read once per request (later calls give the same bytes)."""
    environ = request.environ
    if _CACHE_KEY in environ:
        return environ[_CACHE_KEY]
    limit = current_app.config[BODY_LIMIT_KEY]
    coding = _content_coding(request.headers.get("Content-Encoding"))
    declared = request.content_length
    if declared is not None and declared > limit:
        raise body_too_large(declared, limit, known=True)
    if declared is None and not environ.get("wsgi.input_terminated"):
        wire = b""  # no length and a server that does not end the stream: no body (RFC 9112 §6.3)
    else:
        wire = _read_counted(environ["wsgi.input"], declared, limit)
    body = _decoded(wire, coding, limit)
    environ[_CACHE_KEY] = body
    return body


def _content_coding(header: str | None) -> str | None:
    """The one content coding of the body (``None`` for none or ``identity``)."""
    codings = [part.strip().lower() for part in (header or "").split(",") if part.strip()]
    codings = [coding for coding in codings if coding != "identity"]
    if not codings:
        return None
    if len(codings) == 1 and codings[0] in (*CONTENT_CODINGS, "x-gzip"):
        return "gzip" if codings[0] == "x-gzip" else codings[0]
    raise Problem(415, "unsupported-content-encoding", "Unsupported Content-Encoding",
                  f"The body is coded as {header!r}; send it uncoded or in one of "
                  f"{', '.join(CONTENT_CODINGS)}.",
                  headers={"Accept-Encoding": ", ".join(CONTENT_CODINGS)})


def _read_counted(stream, declared: int | None, limit: int) -> bytes:
    """All of ``stream``: ``declared`` bytes, or (chunked) until it ends, at most ``limit``."""
    wanted = limit + 1 if declared is None else declared
    received = bytearray()
    while len(received) < wanted:
        try:
            piece = stream.read(min(READ_PIECE_BYTES, wanted - len(received)))
        except (socket.timeout, TimeoutError):
            raise incomplete_body(f"The body stopped arriving after {len(received)} bytes.") from None
        except Exception as error:  # the server's reader: a cut connection or a broken chunk
            raise incomplete_body(f"The body could not be read whole after {len(received)} bytes "
                                  f"({type(error).__name__}: {error}).") from None
        if not piece:
            break
        received += piece
    if declared is None and len(received) > limit:
        raise body_too_large(len(received), limit, known=False)
    if declared is not None and len(received) < declared:
        raise incomplete_body(f"The body ended after {len(received)} of the {declared} bytes its "
                              "Content-Length announced.")
    return bytes(received)


def _decoded(wire: bytes, coding: str | None, limit: int) -> bytes:
    if coding is None:
        return wire
    try:
        body = _gunzip(wire, limit) if coding == "gzip" else _unzstd(wire, limit)
    except (zlib.error, zstandard.ZstdError) as error:
        raise Problem(400, "malformed-body", "The request body cannot be read",
                      f"The body is not valid {coding}: {error}") from None
    return body


def _gunzip(wire: bytes, limit: int) -> bytes:
    """Every gzip member of ``wire`` (RFC 1952 §2.2 allows several), at most ``limit`` bytes."""
    out = bytearray()
    pending = wire
    while pending:
        decoder = zlib.decompressobj(wbits=16 + zlib.MAX_WBITS)
        while pending:
            out += decoder.decompress(pending, limit + 1 - len(out))
            if len(out) > limit:
                raise body_too_large(len(out), limit, known=False, decoded=True)
            pending = decoder.unconsumed_tail
        if not decoder.eof:
            raise incomplete_body(f"The gzip body ends inside its stream ({len(wire)} bytes sent).")
        pending = decoder.unused_data
    return bytes(out)


def _unzstd(wire: bytes, limit: int) -> bytes:
    """Every zstd frame of ``wire``, at most ``limit`` bytes: decoded through a bounded
    reader (a frame may expand by a factor of thousands), then checked to end whole (the
    reader gives a cut frame's output without a word)."""
    reader = zstandard.ZstdDecompressor().stream_reader(io.BytesIO(wire), read_across_frames=True)
    out = bytearray()
    while True:
        piece = reader.read(min(READ_PIECE_BYTES, limit + 1 - len(out)))
        if not piece:
            break
        out += piece
        if len(out) > limit:
            raise body_too_large(len(out), limit, known=False, decoded=True)
    pending = wire
    while pending:  # output is known to be within the limit now
        decoder = zstandard.ZstdDecompressor().decompressobj()
        decoder.decompress(pending)
        if not decoder.eof:
            raise incomplete_body(f"The zstd body ends inside a frame ({len(wire)} bytes sent).")
        pending = decoder.unused_data
    return bytes(out)
