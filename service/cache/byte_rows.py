"""Vectorised helpers on byte matrices (one row of bytes per cell): digests, row checks,
distinct rows, and the split into one ``bytes`` object per row.

Keys and values of the cache are built as ``(M, width)`` uint8 matrices, so that M cells
cost a few numpy calls rather than M Python-level ones.
"""
from __future__ import annotations

import hashlib

import numpy as np

_ROW_END = b";"  # keeps numpy's fixed-width bytes from trimming trailing NUL bytes


def digest(text: str | bytes, size: int = 8) -> bytes:
    """BLAKE2b digest of ``text`` (UTF-8 if a string), ``size`` bytes."""
    data = text.encode("utf-8") if isinstance(text, str) else text
    return hashlib.blake2b(data, digest_size=size).digest()


def row_checks(rows: np.ndarray) -> np.ndarray:
    """A 64-bit check of each byte row (FNV-1a over 8-byte lanes with an xor-shift),
    vectorised over rows."""
    padded = rows
    if rows.shape[1] % 8:
        padded = np.zeros((rows.shape[0], rows.shape[1] + 8 - rows.shape[1] % 8), dtype=np.uint8)
        padded[:, : rows.shape[1]] = rows
    lanes = np.ascontiguousarray(padded).view(np.uint64)
    check = np.full(rows.shape[0], 0xCBF29CE484222325, dtype=np.uint64)
    prime = np.uint64(0x100000001B3)
    with np.errstate(over="ignore"):
        for lane in lanes.T:
            check = (check ^ lane) * prime
            check ^= check >> np.uint64(29)
    return check


def distinct_rows(matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(first row of each distinct row, index of each row's distinct row) of a byte matrix.

    Sorting 64-bit row checks is faster than sorting the rows themselves; the result is
    verified byte for byte, and a collision falls back to sorting the rows."""
    _, first, inverse = np.unique(row_checks(matrix), return_index=True, return_inverse=True)
    inverse = inverse.reshape(-1)
    if np.array_equal(matrix[first][inverse], matrix):
        return first, inverse
    rows = matrix.view(f"V{matrix.shape[1]}").reshape(-1)
    _, first, inverse = np.unique(rows, return_index=True, return_inverse=True)
    return first, inverse.reshape(-1)


def split_rows(matrix: np.ndarray) -> list[bytes]:
    """One ``bytes`` object per row of a uint8 matrix, without a Python-level loop over rows."""
    # A fixed-width view (a trailing marker keeps numpy from trimming trailing NUL bytes),
    # then strip the marker.
    marked = np.empty((matrix.shape[0], matrix.shape[1] + 1), dtype=np.uint8)
    marked[:, :-1] = matrix
    marked[:, -1] = _ROW_END[0]
    rows = marked.view(f"S{marked.shape[1]}").reshape(-1).tolist()
    return [row[:-1] for row in rows]
