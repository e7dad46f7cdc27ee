"""Compressed answers on request: ``Accept-Encoding: gzip`` or ``zstd`` (RFC 9110 §8.4,
§12.5.3; gzip RFC 1952, zstd RFC 8878).

After a view has answered, a body of at least ``UVDOSE_COMPRESS_MIN_BYTES`` is coded with
the coding the client accepts with the highest quality (zstd on a tie, as it is the
faster of the two here); ``Vary: Accept-Encoding`` goes on every answer that size or
larger, coded or not, so caches keep the codings apart. A streamed answer (unknown size)
is coded chunk by chunk, each chunk flushed so a line-by-line reader sees it at once.
Answers that are coded already, carry ``Cache-Control: no-transform``, or have no body
(204, 304) are left alone, except that a 304 gets the tag of the coded representation
the client holds (see :mod:`service.caching_headers`).
"""
from __future__ import annotations

import zlib
from typing import Iterable, Iterator

import zstandard
from flask import Flask, Request, Response, request

from uvdose.service.caching_headers import CODING_SUFFIXES

CODINGS = ("zstd", "gzip")
"""Content codings offered, in the server's order of preference for equal quality."""

# Levels measured on 10 000-record POST /v1/irradiance answers (records layout 4.45 MB,
# columns 2.11 MB; one core of the shared 2-core box): gzip level 1 shrinks them 4.0x /
# 2.5x in 156 / 91 ms, level 6 4.6x / 2.7x in 437 / 498 ms; zstd level 1 5.3x / 2.9x in
# 57 / 14 ms, level 3 4.4x / 2.6x in 170 / 89 ms. Level 1 of each: nearly the best
# ratio at a fraction of the time, which the request would otherwise wait for.
GZIP_LEVEL = 1
ZSTD_LEVEL = 1


def preferred_coding(req: Request) -> str | None:
    """The coding of :data:`CODINGS` the request accepts with the highest quality (None: identity)."""
    best, best_quality = None, 0.0
    for coding in CODINGS:
        quality = req.accept_encodings[coding]  # werkzeug applies "*" and q=0
        if quality > best_quality:
            best, best_quality = coding, quality
    return best


def _gzip_stream() -> tuple:
    coder = zlib.compressobj(GZIP_LEVEL, zlib.DEFLATED, 16 + zlib.MAX_WBITS)
    return (lambda chunk: coder.compress(chunk) + coder.flush(zlib.Z_SYNC_FLUSH)), coder.flush


def _zstd_stream() -> tuple:
    coder = zstandard.ZstdCompressor(level=ZSTD_LEVEL).compressobj()
    return (lambda chunk: coder.compress(chunk) + coder.flush(zstandard.COMPRESSOBJ_FLUSH_BLOCK)), coder.flush


def encode(body: bytes, coding: str) -> bytes:
    """``body`` in ``coding`` (``gzip`` or ``zstd``)."""
    if coding == "gzip":
        coder = zlib.compressobj(GZIP_LEVEL, zlib.DEFLATED, 16 + zlib.MAX_WBITS)
        return coder.compress(body) + coder.flush()
    return zstandard.ZstdCompressor(level=ZSTD_LEVEL).compress(body)


def encode_stream(chunks: Iterable[bytes | str], coding: str) -> Iterator[bytes]:
    """The chunks of a streamed body, coded and flushed one by one."""
    step, finish = _gzip_stream() if coding == "gzip" else _zstd_stream()
    for chunk in chunks:
        data = chunk.encode("utf-8") if isinstance(chunk, str) else chunk
        if data:
            yield step(data)
    yield finish()


def _add_vary(response: Response) -> None:
    response.vary.add("Accept-Encoding")


def _tag_coding(response: Response, coding: str) -> None:
    tag, weak = response.get_etag()
    if tag and not tag.endswith(CODING_SUFFIXES):
        response.set_etag(f"{tag}-{coding}", weak=weak)


def compress(response: Response, min_bytes: int) -> Response:
    """Code ``response`` for the current request when it asks for it (see the module doc)."""
    if response.status_code == 304:
        size = getattr(response, "uvdose_body_bytes", None)
        coding = preferred_coding(request)
        if size is not None and size >= min_bytes:
            _add_vary(response)
            if coding:
                _tag_coding(response, coding)
        return response
    if (response.status_code < 200 or response.status_code == 204 or "Content-Encoding" in response.headers
            or "no-transform" in response.headers.get("Cache-Control", "")):
        return response
    if response.is_streamed:
        _add_vary(response)
        coding = preferred_coding(request)
        if coding:
            response.response = encode_stream(response.response, coding)
            response.headers.pop("Content-Length", None)
            response.headers["Content-Encoding"] = coding
            _tag_coding(response, coding)
        return response
    body = response.get_data()
    if len(body) < min_bytes:
        return response
    _add_vary(response)
    coding = preferred_coding(request)
    if coding:
        response.set_data(encode(body, coding))
        response.headers["Content-Encoding"] = coding
        _tag_coding(response, coding)
    return response


def init_app(app: Flask) -> None:
    """Compress the app's answers on request (registered last: it sees the final body)."""
    min_bytes = app.config["UVDOSE_COMPRESS_MIN_BYTES"]

    @app.after_request
    def _compress(response: Response) -> Response:
        return compress(response, min_bytes)
