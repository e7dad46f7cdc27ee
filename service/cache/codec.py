"""The binary form of cached transfer results, and the check that proves a value intact.

A value is one entry's results: a 16-byte header (8 bytes of layout digest; an 8-byte
check over the entry's key and the payload, so a value is used only for its own entry and
only as it was written), then the payload: the numeric columns as raw little-endian
bytes of their own type, spectral columns (``models.engine.is_spectral_column``) as float32 (7
significant digits, far finer than the cache's own rounding of the state), and string
columns as fixed-width UTF-8.
Which column sits where is the value's :class:`Layout`, stored once per layout.
"""
from __future__ import annotations

import json
from dataclasses import dataclass
from functools import cached_property
from typing import Mapping

import numpy as np

from uvdose.models.engine import is_spectral_column
from uvdose.service.cache.byte_rows import digest, row_checks, split_rows

Columns = dict[str, np.ndarray]

HEADER_BYTES = 16


@dataclass(frozen=True)
class Layout:
    """How one value's bytes map to result columns: (name, kind, stored dtype, width)."""

    fields: tuple[tuple[str, str, str, int], ...]

    @cached_property
    def value_bytes(self) -> int:
        return HEADER_BYTES + sum(width for _, _, _, width in self.fields)

    def to_json(self) -> bytes:
        return json.dumps(self.fields, separators=(",", ":")).encode()

    @classmethod
    def from_json(cls, data: bytes) -> "Layout":
        return cls(tuple(tuple(f) for f in json.loads(data)))

    @cached_property
    def digest(self) -> bytes:
        return digest(self.to_json())


def layout_digest_of(value: bytes) -> bytes:
    """The layout digest a stored value starts with."""
    return value[:8]


def _value_checks(key_rows: np.ndarray, payload: np.ndarray) -> np.ndarray:
    return row_checks(np.hstack([key_rows, payload]))


def encode(results: Mapping[str, np.ndarray], key_rows: np.ndarray) -> tuple[Layout, list[bytes]]:
    """Serialise M entries of transfer output (their key rows given) to M values sharing one layout."""
    fields: list[tuple[str, str, str, int]] = []
    blocks: list[np.ndarray] = []
    count = len(key_rows)
    for name in sorted(results):
        column = np.asarray(results[name])
        if column.shape[:1] != (count,):
            raise ValueError(f"engine column {name!r} has shape {column.shape}, expected ({count}, ...)")
        if column.dtype.kind in "OUS":
            kind = "object" if column.dtype.kind == "O" else "str"
            uniques, inverse = np.unique(column.astype(str), return_inverse=True)
            encoded = [u.encode("utf-8") for u in uniques]
            width = max([len(e) for e in encoded] + [1])
            width = -(-width // 8) * 8  # a few widths, so a few layouts
            fixed = np.array(encoded, dtype=f"S{width}")[inverse.reshape(-1)]
            blocks.append(fixed.view(np.uint8).reshape(count, width))
            fields.append((name, kind, f"S{width}", width))
            continue
        stored = np.dtype(np.float32) if is_spectral_column(name) else column.dtype
        data = np.ascontiguousarray(column.reshape(count, -1).astype(stored.newbyteorder("<")))
        fields.append((name, column.dtype.str, stored.newbyteorder("<").str + f"x{data.shape[1]}",
                       data.nbytes // max(count, 1)))
        blocks.append(data.view(np.uint8).reshape(count, -1))
    layout = Layout(tuple(fields))
    payload = np.hstack(blocks) if blocks else np.zeros((count, 0), dtype=np.uint8)
    header = np.empty((count, HEADER_BYTES), dtype=np.uint8)
    header[:, :8] = np.frombuffer(layout.digest, dtype=np.uint8)
    header[:, 8:] = _value_checks(key_rows, payload).astype("<u8").view(np.uint8).reshape(count, 8)
    matrix = np.ascontiguousarray(np.hstack([header, payload]))
    return layout, split_rows(matrix)


def decode(layout: Layout, values: list[bytes], key_rows: np.ndarray) -> tuple[np.ndarray, Columns]:
    """Inverse of :func:`encode` for values of ``layout`` read for ``key_rows``.

    Returns the mask of values whose check holds and the columns of those values."""
    matrix = np.frombuffer(b"".join(values), dtype=np.uint8).reshape(len(values), layout.value_bytes)
    stored_checks = np.ascontiguousarray(matrix[:, 8:HEADER_BYTES]).view("<u8").reshape(-1)
    sound = stored_checks == _value_checks(key_rows, matrix[:, HEADER_BYTES:])
    matrix = matrix[sound]
    count = len(matrix)
    offset = HEADER_BYTES
    columns: Columns = {}
    for name, kind, stored, width in layout.fields:
        block = np.ascontiguousarray(matrix[:, offset : offset + width])
        offset += width
        if kind in ("object", "str"):
            text = np.char.decode(block.view(stored).reshape(count), "utf-8")
            columns[name] = text.astype(object) if kind == "object" else text
        else:
            dtype_str, per_row = stored.split("x")
            data = block.view(np.dtype(dtype_str)).reshape(count, int(per_row)).astype(np.dtype(kind))
            columns[name] = data.reshape(count) if int(per_row) == 1 else data
    return sound, columns
