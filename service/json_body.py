"""JSON request bodies, read strictly: the one place every endpoint's JSON is decoded.

RFC 8259 leaves several things to the parser (§4 duplicate member names, §9 nesting depth
and number size, §8.2 unpaired surrogates); a lenient reading of any of them lets a small
body cost gigabytes or reach code that cannot handle it. :func:`parse_json_body` refuses
them all before anything else reads the body, each as a ``malformed-body`` 400 problem
whose detail names the line and column:

* invalid UTF-8 (RFC 8259 §8.1);
* nesting deeper than :data:`MAX_JSON_DEPTH` arrays and objects;
* a number literal longer than :data:`MAX_NUMBER_CHARACTERS` characters (an IEEE 754
  double needs at most 17 significant digits, its shortest text at most 24 characters);
* a ``\\u`` escape of a UTF-16 surrogate that is not one half of a pair (RFC 8259 §8.2);
* ``NaN``, ``Infinity`` or anything else outside strings that is not JSON;
* an object that names a member twice.

Depth, number length and stray characters are found by one vectorised pass over the
bytes (:func:`_structure`), before the parser sees them; the standard library's parser
then reads the body with an ``object_pairs_hook`` that counts member names. Measured with
``tests/benchmarks/bench_json_body.py`` (a 16.5 MB routes body, 190 000 points, shared
2-core box, best of 5): orjson 0.090 s; ``json`` 0.138 s (1.5x); ``json`` with the
duplicate check 0.194 s (2.2x); the pre-pass alone 0.163 s (1.8x); the whole strict reading
0.375 s (4.2x orjson). orjson cannot
report duplicate names, and orjson 3.8 crashes the process on objects nested 100 000
deep, so it is kept for writing answers only.
"""
from __future__ import annotations

import json
from typing import Any

import numpy as np

from uvdose.service.problems import Problem

MAX_JSON_DEPTH = 32
"""Arrays and objects nested in one another at most this deep (the deepest request the
contract describes, a GeoJSON route's coordinates, is 5 deep)."""
MAX_NUMBER_CHARACTERS = 40
"""Longest number literal accepted, in characters."""

_QUOTE, _BACKSLASH = ord('"'), ord("\\")
_STRAY, _PLAIN, _NUMBER, _OPENING, _CLOSING = range(5)
_KIND = np.full(256, _STRAY, dtype=np.uint8)
"""What each byte is outside strings; _STRAY for what may not stand there at all."""
_KIND[list(b' \t\n\r,:"truefalsn')] = _PLAIN
_KIND[list(b"0123456789+-.eE")] = _NUMBER
_KIND[list(b"[{")] = _OPENING
_KIND[list(b"]}")] = _CLOSING
_SURROGATE_SECOND = np.zeros(256, dtype=bool)
_SURROGATE_SECOND[list(b"89abcdefABCDEF")] = True


class _Refused(ValueError):
    """A reason to refuse the body, and the byte offset it concerns (None: not known)."""

    def __init__(self, reason: str, offset: int | None = None) -> None:
        super().__init__(reason)
        self.reason, self.offset = reason, offset


def parse_json_body(data: bytes) -> Any:
    """The JSON value of a request body, read strictly (see the module docstring).

    Raises :class:`service.problems.Problem` (400 ``malformed-body``) naming the line and
    column of the first fault found.
    """
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as error:
        raise _malformed(data, f"is not UTF-8 ({error.reason})", error.start) from None
    try:
        codes = np.frombuffer(data, dtype=np.uint8)
        _structure(codes)
        _surrogates(data, codes)
        return json.loads(text, object_pairs_hook=_members, parse_constant=_constant)
    except _Refused as refused:
        offset = refused.offset if refused.offset is not None else _duplicate_offset(text)
        raise _malformed(data, refused.reason, offset) from None
    except json.JSONDecodeError as error:
        raise Problem(400, "malformed-body", "The request body cannot be read",
                      f"The body is not valid JSON: {error.msg} at line {error.lineno} column {error.colno}.") \
            from None


def _malformed(data: bytes, reason: str, offset: int | None) -> Problem:
    where = ""
    if offset is not None:
        line = data.count(b"\n", 0, offset) + 1
        column = offset - (data.rfind(b"\n", 0, offset) + 1) + 1
        where = f" at line {line} column {column}"
    return Problem(400, "malformed-body", "The request body cannot be read",
                   f"The body is not valid JSON for this service{where}: it {reason}.")


def _string_interiors(codes: np.ndarray) -> np.ndarray:
    """Mask of the bytes inside strings (the opening quote included, the closing one not)."""
    quotes = np.flatnonzero(codes == _QUOTE)
    backslashes = np.flatnonzero(codes == _BACKSLASH)
    if backslashes.size and quotes.size:
        # A quote is escaped when an odd number of backslashes runs up to it.
        run_starts = backslashes[np.r_[True, np.diff(backslashes) != 1]]
        preceded = quotes[(quotes > 0) & (codes[np.maximum(quotes - 1, 0)] == _BACKSLASH)]
        run_lengths = preceded - run_starts[np.searchsorted(run_starts, preceded - 1, side="right") - 1]
        escaped = preceded[run_lengths % 2 == 1]
        quotes = np.setdiff1d(quotes, escaped, assume_unique=True)
    toggles = np.zeros(codes.size, dtype=np.uint8)
    toggles[quotes] = 1
    return np.bitwise_xor.accumulate(toggles).astype(bool)


def _structure(codes: np.ndarray) -> None:
    """Refuse excess depth, over-long numbers and stray bytes outside strings."""
    if not codes.size:
        return
    kind = _KIND[codes]
    kind[_string_interiors(codes)] = _PLAIN
    stray = np.flatnonzero(kind == _STRAY)
    if stray.size:
        raise _Refused(f"holds {chr(codes[stray[0]])!r} outside a string (NaN and Infinity are not JSON)",
                       int(stray[0]))
    brackets = np.flatnonzero(kind >= _OPENING)
    depth = np.cumsum(np.where(kind[brackets] == _OPENING, 1, -1))
    too_deep = np.flatnonzero(depth > MAX_JSON_DEPTH)
    if too_deep.size:
        raise _Refused(f"nests arrays and objects more than {MAX_JSON_DEPTH} deep", int(brackets[too_deep[0]]))
    edges = np.diff(np.r_[False, kind == _NUMBER, False].view(np.int8))
    starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    long = np.flatnonzero(ends - starts > MAX_NUMBER_CHARACTERS)
    if long.size:
        raise _Refused(f"has a number longer than {MAX_NUMBER_CHARACTERS} characters", int(starts[long[0]]))


def _surrogates(data: bytes, codes: np.ndarray) -> None:
    """Refuse a ``\\u`` escape of a surrogate that is not half of a high-low pair."""
    # Candidates, found vectorised: a backslash, u, then d8-df (the hex digits of a surrogate).
    u = np.flatnonzero(codes[1:-4] == ord("u")) + 1
    u = u[(codes[u - 1] == _BACKSLASH) & ((codes[u + 1] | 0x20) == ord("d")) & _SURROGATE_SECOND[codes[u + 2]]]
    pending_high = None  # offset of a high-surrogate escape awaiting its low half
    for at in u.tolist():
        run = at - 1
        while run > 0 and data[run - 1] == _BACKSLASH:
            run -= 1
        if (at - run) % 2 == 0:  # the backslash is itself escaped: plain text
            continue
        escape_start, high = at - 1, (data[at + 2] | 0x20) in b"89ab"
        if pending_high is not None:
            if high or escape_start != pending_high + 6:
                raise _Refused("has an unpaired UTF-16 surrogate escape", pending_high)
            pending_high = None
        elif high:
            pending_high = escape_start
        else:
            raise _Refused("has an unpaired UTF-16 surrogate escape", escape_start)
    if pending_high is not None:
        raise _Refused("has an unpaired UTF-16 surrogate escape", pending_high)


def _members(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    members = dict(pairs)
    if len(members) != len(pairs):
        seen: set[str] = set()
        twice = next(name for name, _ in pairs if name in seen or seen.add(name))
        raise _Refused(f"names the member {twice!r} twice in one object")
    return members


def _constant(name: str) -> None:
    raise _Refused(f"holds {name}, which is not JSON")


def _duplicate_offset(text: str) -> int | None:
    """The byte offset of the first object naming a member twice (the slow path, run only
    once a duplicate is known): the pure-Python scanner, which knows where each object starts."""
    from json import decoder, scanner

    found: list[int] = []

    def parse_object(s_and_end, strict, scan_once, object_hook, object_pairs_hook, memo=None, _w=decoder.WHITESPACE.match):
        s, end = s_and_end
        pairs, after = decoder.JSONObject(s_and_end, strict, scan_once, None, list, memo, _w)
        if not found and len({name for name, _ in pairs}) != len(pairs):
            found.append(end - 1)
        return dict(pairs), after

    python_decoder = json.JSONDecoder()
    python_decoder.parse_object = parse_object
    python_decoder.scan_once = scanner.py_make_scanner(python_decoder)
    try:
        python_decoder.decode(text)
    except ValueError:
        return None
    return len(text[:found[0]].encode("utf-8")) if found else None
