"""Where a request ends, as the buffering worker's event loop finds it (RFC 9112 §6, §7.1)."""
from __future__ import annotations

import pytest

from uvdose.service.buffering_worker import RequestFraming

HEAD = b"POST /v1/irradiance HTTP/1.1\r\nHost: u\r\n"


def _scan_in_pieces(data: bytes, piece: int, max_body: int = 1000) -> tuple[str, RequestFraming, int]:
    framing, buffer = RequestFraming(max_header_bytes=8192, max_body_bytes=max_body), bytearray()
    verdict = "more"
    for start in range(0, len(data), piece):
        buffer += data[start:start + piece]
        verdict = framing.scan(buffer)
        if verdict != "more":
            return verdict, framing, start + piece
    return verdict, framing, len(data)


@pytest.mark.parametrize("piece", [1, 7, 4096])
def test_a_length_framed_request_ends_where_its_length_says(piece):
    request = HEAD + b"Content-Length: 11\r\n\r\nhello world"
    verdict, framing, _ = _scan_in_pieces(request + b"GET /next HTTP/1.1\r\n", piece)
    assert verdict == "complete" and framing.end == len(request)


@pytest.mark.parametrize("piece", [1, 5, 4096])
def test_a_chunked_request_ends_after_its_last_chunk_and_trailers(piece):
    body = b"5;name=value\r\nhello\r\n6\r\n world\r\n0\r\nChecksum: x\r\n\r\n"
    request = HEAD + b"Transfer-Encoding: chunked\r\n\r\n" + body
    verdict, framing, _ = _scan_in_pieces(request + b"GET /next", piece)
    assert verdict == "complete" and framing.end == len(request) and framing.body_bytes == 11


def test_a_request_without_a_body_ends_with_its_headers():
    request = b"GET /livez HTTP/1.1\r\nHost: u\r\n\r\n"
    assert _scan_in_pieces(request, 4096)[0] == "complete"


def test_an_over_limit_length_is_known_before_the_body():
    verdict, framing, read = _scan_in_pieces(HEAD + b"Content-Length: 5000\r\n\r\n" + b"x" * 5000, 64)
    assert verdict == "too-large" and (framing.body_bytes, framing.body_bytes_exact) == (5000, True)
    assert read < 200  # decided on the headers


def test_over_limit_chunks_are_known_at_the_chunk_that_passes_it():
    chunks = b"".join(b"190\r\n" + b"x" * 400 + b"\r\n" for _ in range(5))  # 5 x 400 bytes
    verdict, framing, read = _scan_in_pieces(HEAD + b"Transfer-Encoding: chunked\r\n\r\n" + chunks, 64)
    assert verdict == "too-large" and framing.body_bytes == 1200 and not framing.body_bytes_exact
    assert read < 1200


def test_expect_100_continue_is_seen_with_the_headers():
    verdict, framing, _ = _scan_in_pieces(HEAD + b"Expect: 100-Continue\r\nContent-Length: 10\r\n\r\n", 4096)
    assert verdict == "more" and framing.headers_complete and framing.expects_continue


@pytest.mark.parametrize("headers", [
    b"Content-Length: 5\r\nContent-Length: 6\r\n",  # two lengths
    b"Content-Length: -1\r\n",
    b"Transfer-Encoding: gzip\r\n",  # chunked must be the last coding
    b"Transfer-Encoding: chunked\r\nContent-Length: 5\r\n",
    b"no colon here\r\n",
])
def test_framing_this_scan_does_not_judge_goes_to_gunicorn(headers):
    assert _scan_in_pieces(HEAD + headers + b"\r\n", 4096)[0] == "handover"


def test_a_bad_chunk_size_goes_to_gunicorn():
    assert _scan_in_pieces(HEAD + b"Transfer-Encoding: chunked\r\n\r\nzz\r\n", 4096)[0] == "handover"


def test_headers_past_the_limit_go_to_gunicorn():
    assert _scan_in_pieces(HEAD + b"X-Filler: 1\r\n" * 1000, 4096)[0] == "handover"
