"""The physics-state cache that wraps the engine's radiative transfer (see the package docstring)."""
from __future__ import annotations

import logging
import threading
import time
from typing import Any, Callable, Mapping

import numpy as np

from uvdose import models
from uvdose.service.cache.breaker import Breaker
from uvdose.service.cache.byte_rows import distinct_rows, split_rows
from uvdose.service.cache.codec import Layout, decode, encode, layout_digest_of
from uvdose.service.cache.keys import key_matrix, layout_key
from uvdose.service.cache.memory_store import MemoryStore
from uvdose.service.cache.physics_keys import Keying, PhysicsKeying
from uvdose.service.cache.redis_store import RedisStore

log = logging.getLogger("uvdose.cache")

Columns = dict[str, np.ndarray]
ComputeFn = Callable[[Columns], Columns]
BACKENDS = ("redis", "memory", "off")


def _ignore(*_: Any) -> None:
    pass


class WriteAllowance:
    """How many new entries one request may still write (``None``: no bound).

    One allowance is made per request and passed to every ``compute_through`` of that
    request, so that a request cannot fill the backend and evict every other client's
    entries: what it computes beyond the allowance it answers without storing."""

    def __init__(self, entries: int | None):
        self.left = entries
        self._lock = threading.Lock()

    def take(self, wanted: int) -> int:
        """Reserve up to ``wanted`` entries; returns how many may be written."""
        if self.left is None:
            return wanted
        with self._lock:
            granted = min(wanted, self.left)
            self.left -= granted
        return granted


class StateCache:
    """Caches transfer results per physics state; see the package docstring.

    ``backend`` is ``"redis"``, ``"memory"`` or ``"off"``. With ``"off"`` the transfer sees
    the records' exact states; otherwise it always sees the rounded states of ``keying``.
    ``max_writes`` bounds the entries one request writes (see :meth:`allowance`).
    ``count`` is told every lookup outcome (``"hit"``, ``"miss"``, ``"error"``,
    ``"unstored"``, and how many) and ``observe_latency`` the seconds of every backend
    call, e.g. to feed metrics.
    """

    def __init__(
        self,
        backend: str = "memory",
        keying: Keying | None = None,
        redis_url: str | None = None,
        ttl_s: float = 86_400.0,
        max_entries: int = 50_000,
        max_writes: int | None = 10_000,
        prefix: str = "uvdose:",
        connect_timeout_s: float = 0.25,
        timeout_s: float = 0.5,
        retry_initial_s: float = 1.0,
        retry_max_s: float = 30.0,
        clock: Callable[[], float] = time.monotonic,
        count: Callable[[str, int], None] = _ignore,
        observe_latency: Callable[[float], None] = _ignore,
    ):
        if backend not in BACKENDS:
            raise ValueError(f"backend must be one of {BACKENDS}, got {backend!r}")
        if backend == "redis" and not redis_url:
            raise ValueError("the redis backend needs a redis_url")
        self.backend = backend
        self.keying = keying or PhysicsKeying()
        self.max_writes = max_writes
        self.prefix = prefix.encode("utf-8")
        self.breaker = Breaker(retry_initial_s, retry_max_s, clock)
        self._layouts: dict[bytes, Layout] = {}
        self.store: MemoryStore | RedisStore | None = None
        if backend == "redis":
            self.store = RedisStore(redis_url, ttl_s, connect_timeout_s, timeout_s)
        elif backend == "memory":
            self.store = MemoryStore(max_entries, ttl_s, clock)
        self._count_outcome, self._observe_latency = count, observe_latency
        self._stats_lock = threading.Lock()
        self.stats = {"hit": 0, "miss": 0, "error": 0, "unstored": 0}

    # -- the API -------------------------------------------------------------------------

    def allowance(self) -> WriteAllowance:
        """A fresh write allowance of ``max_writes`` entries, for one request."""
        return WriteAllowance(self.max_writes)

    def compute_through(self, columns: Mapping[str, np.ndarray], compute: ComputeFn, context: str,
                        writes: WriteAllowance | None = None) -> Columns:
        """Results of ``compute`` for every record of ``columns``, in record order.

        ``columns`` are (N,) state arrays (``models.engine.TRANSFER_STATE_COLUMNS``);
        ``compute`` maps a dict of such columns to a dict of (M,) result arrays;
        ``context`` names everything besides the state that changes the results. Records
        of one rounded state share one ``compute`` run on that state; ``compute`` is
        called once, on the states not found in the backend. ``writes`` bounds what this
        call stores (default: a fresh :meth:`allowance`); the entries used by the most
        records are stored first.
        """
        if self.store is None or not columns or len(next(iter(columns.values()))) == 0:
            return compute(dict(columns))
        quantised = self.keying.quantise(columns)
        if quantised is None:
            return compute(dict(columns))
        indices, centres = quantised
        keys_matrix = self.key_rows(indices, context)
        first, inverse = distinct_rows(keys_matrix)
        entry_rows = keys_matrix[first]
        keys = split_rows(entry_rows)
        entry_inputs = {name: value[first] for name, value in centres.items()}

        cached = self._fetch(keys)
        if cached is None:
            missing = np.ones(len(keys), dtype=bool)
        else:
            missing = np.fromiter((value is None for value in cached), dtype=bool, count=len(keys))
        miss_at = np.flatnonzero(missing)
        hit_at = np.flatnonzero(~missing)

        parts: list[tuple[np.ndarray, Columns]] = []
        if len(hit_at):
            try:
                parts, unsound = self._decode_hits([cached[i] for i in hit_at], hit_at, entry_rows)
            except Exception as error:  # a value that passed its checks but will not decode
                log.warning("cached entries would not decode (%s: %s); recomputing them", type(error).__name__, error)
                parts, unsound = [], hit_at
            if len(unsound):
                self._count(error=1)
                miss_at = np.sort(np.concatenate([miss_at, unsound]))
                hit_at = np.setdiff1d(hit_at, unsound)
        users = np.bincount(inverse, minlength=len(keys))
        writes = writes if writes is not None else self.allowance()
        if len(miss_at):
            parts.append((miss_at, self._computed(compute, entry_inputs, miss_at, entry_rows, keys,
                                                  users, writes)))
        names = set(parts[0][1])
        if any(set(p[1]) != names for p in parts):
            # Cached entries of another column set (not expected for one context): recompute all.
            log.warning("cached entries disagree with the transfer's columns; recomputing the batch")
            everything = np.arange(len(keys))
            parts = [(everything, self._computed(compute, entry_inputs, everything, entry_rows, keys,
                                                 users, writes))]
        self._count(hit=len(hit_at), miss=len(miss_at))
        return _assemble(parts, len(keys), inverse)

    def key_rows(self, indices: Mapping[str, np.ndarray], context: str) -> np.ndarray:
        """The entry keys (as a byte matrix, one row per record) of records with step
        ``indices`` under ``context``; ``models.MODEL_VERSION`` is part of every key."""
        return key_matrix(self.prefix, (models.MODEL_VERSION, context, self.keying.describe()), indices)

    def rounded_state(self, columns: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
        """The state the transfer is run on for ``columns`` (rounded), e.g. to reproduce a
        cached result without the cache."""
        quantised = None if self.store is None else self.keying.quantise(columns)
        if quantised is None:
            return {name: np.asarray(value) for name, value in columns.items()}
        return quantised[1]

    def status(self) -> dict[str, Any]:
        """Backend, whether it answers now, breaker state and lookup counts (for /readyz).

        The probe goes through the breaker like a batch: while it is open the backend is
        not asked; once the backoff has passed the probe itself may close it again."""
        state: dict[str, Any] = {"backend": self.backend, **self.stats}
        if self.store is None:
            return {**state, "answers": False, "breaker": "closed"}
        if not self.breaker.allow():
            return {**state, "answers": False, "breaker": "open", "retry_in_s": round(self.breaker.retry_in_s(), 3)}
        try:
            answers = bool(self._timed(self.store.ping))
        except Exception as error:  # the cache is optional; a failed probe is a state, not an error
            self._fault(error)
            return {**state, "error": state["error"] + 1, "answers": False, "breaker": "open",
                    "retry_in_s": round(self.breaker.retry_in_s(), 3)}
        self.breaker.success()
        return {**state, "answers": answers, "breaker": "closed"}

    # -- internals -----------------------------------------------------------------------

    def _computed(self, compute: ComputeFn, entry_inputs: Columns, at: np.ndarray,
                  entry_rows: np.ndarray, keys: list[bytes], users: np.ndarray,
                  writes: WriteAllowance) -> Columns:
        """Run the transfer on entries ``at``, store as many as the allowance lets (those
        most records use first), return them as a hit would."""
        fresh = compute({name: value[at] for name, value in entry_inputs.items()})
        layout, values = encode(fresh, entry_rows[at])
        self._layouts[layout.digest] = layout
        granted = writes.take(len(at))
        if granted:
            keep = (np.arange(len(at)) if granted == len(at)
                    else np.sort(np.argsort(-users[at], kind="stable")[:granted]))
            self._store([keys[at[i]] for i in keep], [values[i] for i in keep], layout)
        if granted < len(at):
            self._count(unstored=len(at) - granted)
        return decode(layout, values, entry_rows[at])[1]

    def _fetch(self, keys: list[bytes]) -> list[bytes | None] | None:
        """Values for ``keys`` (None where absent or unusable), or None if the backend failed."""
        if not self.breaker.allow():
            return None
        try:
            values = self._timed(self.store.get_many, keys)
            unknown = sorted({layout_digest_of(v) for v in values if v is not None and len(v) >= 8}
                             - set(self._layouts))
            if unknown:
                layout_keys = [layout_key(self.prefix, digest) for digest in unknown]
                for digest, data in zip(unknown, self._timed(self.store.get_layouts, layout_keys)):
                    if data is not None:
                        layout = Layout.from_json(data)
                        if layout.digest == digest:
                            self._layouts[digest] = layout
        except Exception as error:  # any backend fault: answer from the transfer instead
            self._fault(error)
            return None
        self.breaker.success()
        # A value of unknown layout or of the wrong size counts as absent.
        sizes = {digest: layout.value_bytes for digest, layout in self._layouts.items()}
        return [v if v is not None and sizes.get(layout_digest_of(v)) == len(v) else None for v in values]

    def _decode_hits(self, values: list[bytes], positions: np.ndarray,
                     entry_rows: np.ndarray) -> tuple[list[tuple[np.ndarray, Columns]], np.ndarray]:
        """Decoded hits grouped by layout, and the positions whose check failed."""
        by_layout: dict[bytes, list[int]] = {}
        for index, value in enumerate(values):
            by_layout.setdefault(layout_digest_of(value), []).append(index)
        parts, unsound = [], []
        for digest, members in by_layout.items():
            at = positions[members]
            sound, columns = decode(self._layouts[digest], [values[i] for i in members], entry_rows[at])
            parts.append((at[sound], columns))
            unsound.append(at[~sound])
        return parts, np.concatenate(unsound)

    def _store(self, keys: list[bytes], values: list[bytes], layout: Layout) -> None:
        if not self.breaker.allow():
            return
        try:
            self._timed(self.store.set_many, keys, values, layout_key(self.prefix, layout.digest), layout.to_json())
        except Exception as error:  # a failed write only costs a later recomputation
            self._fault(error)
            return
        self.breaker.success()

    def _fault(self, error: BaseException) -> None:
        self.breaker.failure(error)
        self._count(error=1)

    def _timed(self, call: Callable, *args: Any) -> Any:
        started = time.perf_counter()
        try:
            return call(*args)
        finally:
            self._observe_latency(time.perf_counter() - started)

    def _count(self, **amounts: int) -> None:
        with self._stats_lock:
            for event, amount in amounts.items():
                self.stats[event] += amount
        for event, amount in amounts.items():
            if amount:
                self._count_outcome(event, amount)


def _assemble(parts: list[tuple[np.ndarray, Columns]], entries: int, inverse: np.ndarray) -> Columns:
    """Merge per-entry parts (positions, columns) into entry order, then expand to records."""
    positions = np.concatenate([p for p, _ in parts])
    order = np.argsort(positions, kind="stable")
    assert len(positions) == entries and (positions[order] == np.arange(entries)).all()
    merged: Columns = {}
    for name in parts[0][1]:
        stacked = np.concatenate([columns[name] for _, columns in parts])
        merged[name] = stacked[order][inverse]
    return merged
