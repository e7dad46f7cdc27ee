"""Cache keys of records, built from their step indices (:mod:`.physics_keys`).

An entry key is ``prefix`` + ``s:`` + a 10-byte digest of the namespace (model version,
transfer description, keying description, column names) + each column's step index as
little-endian bytes, in column-name order. The value layouts (:mod:`.codec`) live under
``prefix`` + ``l:`` + the layout digest.
"""
from __future__ import annotations

from typing import Mapping, Sequence

import numpy as np

from uvdose.service.cache.byte_rows import digest


def key_matrix(prefix: bytes, namespace: Sequence[str], indices: Mapping[str, np.ndarray]) -> np.ndarray:
    """The ``(N, key bytes)`` uint8 matrix of the entry keys of N records.

    ``namespace`` holds everything besides the indices that tells results apart (the
    column names are added here); ``indices`` are the records' integer step indices.
    """
    names = sorted(indices)
    head = prefix + b"s:" + digest("\0".join([*namespace, *names]), 10)
    count = len(next(iter(indices.values()))) if indices else 0
    blocks = [np.broadcast_to(np.frombuffer(head, dtype=np.uint8), (count, len(head)))]
    for name in names:
        little_endian = indices[name].astype(indices[name].dtype.newbyteorder("<"))
        blocks.append(np.ascontiguousarray(little_endian).view(np.uint8).reshape(count, -1))
    return np.ascontiguousarray(np.hstack(blocks))


def layout_key(prefix: bytes, layout_digest: bytes) -> bytes:
    """Where the value layout of digest ``layout_digest`` is stored."""
    return prefix + b"l:" + layout_digest
