"""The grid-cell cache that wraps the engine call.

Farm and fleet batches repeat the same places and times, so results are kept per *grid
cell*: every record is mapped to a cell in space (``UVDOSE_CELL_DEG`` degrees of latitude
by the same of longitude), in time (``UVDOSE_CELL_MINUTES``) and in every other input that
changes the result (each rounded to the resolution in :data:`INPUT_RESOLUTIONS`). The engine
is always run on the **cell-centre inputs**, for hits and misses alike and also while the
backend is down, so one record always gets the same answer from one deployment. The error
this costs is bounded and tested (README "Cache", ``tests/service/test_cache_accuracy.py``).

A cell key is the prefix ``UVDOSE_CACHE_PREFIX`` + a digest of (``models.MODEL_VERSION``,
the request-wide ``context``, the cell geometry and the column names) + the cell's integer
indices as raw bytes. A model upgrade therefore changes every key; old entries are never
read again and age out by TTL or by the server's eviction policy.

Backends: Redis (one MGET pipeline per batch, one pipelined SET … EX per batch), an
in-process LRU with TTL, or none. A failing Redis opens a circuit breaker: the batch is
answered from the engine, the fault is logged and counted, and Redis is tried again only
after a backoff that doubles up to ``UVDOSE_CACHE_RETRY_MAX_S``.

Values are stored compactly: a 16-byte header (layout digest; a check over the key and
the contents, so a value is used only for its own cell and only intact), the numeric
columns as raw float64 bytes (spectral columns ``spectrum_w_m2_nm.*`` as float32) and the
string columns as fixed-width UTF-8. Results just computed pass through the same encoding
before they are returned, so a miss and a later hit return identical numbers.
"""
from __future__ import annotations

import hashlib
import json
import logging
import os
import threading
import time
from collections import OrderedDict
from dataclasses import dataclass
from functools import cached_property
from typing import Any, Callable, Mapping

import numpy as np

from uvdose import models
log = logging.getLogger("uvdose.cache")

Columns = dict[str, np.ndarray]
ComputeFn = Callable[[Columns], Columns]

# Round-to-nearest resolution of each input besides place and time. What half a step
# changes in the erythemal irradiance: ozone 0.5 DU ≈ 0.2 % (radiation amplification factor
# ≈ 1.2, WMO ozone assessments, from memory); pressure 0.5 hPa ≈ 0.05 % of the Rayleigh
# optical depth; elevation 5 m ≈ 0.04 % (≈ 7 %/km, from memory); the cloud factor ±0.001,
# which is ±0.016 UVI at a clear-sky UVI of 16; the aerosol single-scattering albedo
# ±0.001, as under a thick aerosol (AOD 0.8) a 0.005 change moved the UVI by 1.2 % in
# the engine; the others are dimensionless factors at a resolution below what clients
# know them to. Every fractional step is 1/k for a whole k.
INPUT_RESOLUTIONS: dict[str, float] = {
    "elevation_m": 10.0,
    "pressure_hpa": 1.0,
    "ozone_du": 1.0,
    "aod_550": 0.01,
    "angstrom_exponent": 0.05,
    "single_scattering_albedo": 0.002,
    "asymmetry_factor": 0.005,
    "surface_albedo": 0.01,
    "cloud_modification_factor": 0.002,
    "tilt_deg": 1.0,
    "receiver_azimuth_deg": 1.0,
    "sky_view_factor": 0.01,
}
"""Input column -> step. The cell centre takes the nearest multiple of the step."""

_WRAPPED_360 = ("receiver_azimuth_deg",)
_CELL_COLUMNS = ("time_unix_s", "latitude_deg", "longitude_deg")
_SPECTRAL_PREFIX = "spectrum_w_m2_nm."
_NAN_INDEX = np.iinfo(np.int32).min
_INDEX_LIMITS = {np.int32: np.iinfo(np.int32).max - 1, np.int64: 2.0**62}
_HEADER_BYTES = 16
_KEY_END = b";"  # keeps numpy's fixed-width bytes from trimming trailing NUL bytes


class CacheSettingsError(ValueError):
    """A cache setting holds a value the service cannot use."""


@dataclass(frozen=True)
class CellGrid:
    """How records are mapped to cells: ``cell_deg`` × ``cell_deg`` in latitude and
    longitude, counted from (-90°, -180°); ``cell_minutes`` of time, counted from the Unix
    epoch; the other inputs rounded to :data:`INPUT_RESOLUTIONS`."""

    cell_deg: float = 0.05
    cell_minutes: float = 2.0

    def __post_init__(self) -> None:
        for total in (180.0, 360.0):
            cells = total / self.cell_deg if self.cell_deg > 0 else 0.0
            if not (cells >= 1 and abs(cells - round(cells)) < 1e-9):
                raise CacheSettingsError(
                    f"UVDOSE_CELL_DEG must divide 180 and 360 into whole cells, got {self.cell_deg}"
                )
        if not self.cell_minutes > 0:
            raise CacheSettingsError(f"UVDOSE_CELL_MINUTES must be positive, got {self.cell_minutes}")

    def describe(self) -> str:
        steps = ",".join(f"{k}={v!r}" for k, v in sorted(INPUT_RESOLUTIONS.items()))
        return f"deg={self.cell_deg!r};min={self.cell_minutes!r};{steps}"

    def quantise(self, columns: Mapping[str, np.ndarray]) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]] | None:
        """Integer cell indices and cell-centre values of every column.

        Returns ``(indices, centres)`` keyed by column name, or ``None`` when some value
        cannot be placed in a cell (infinite, or too large for a cell index); the caller
        then leaves the batch to the engine uncached, so the engine's own validation speaks.
        Not-given values (NaN) get their own index and stay NaN.
        """
        indices: dict[str, np.ndarray] = {}
        centres: dict[str, np.ndarray] = {}
        for name, raw in columns.items():
            values = np.asarray(raw)
            if values.dtype.kind in "OUS":
                indices[name] = _string_codes(values)
                centres[name] = values
                continue
            values = values.astype(np.float64)
            if name not in _CELL_COLUMNS and name not in INPUT_RESOLUTIONS:
                # An input without a stated resolution is keyed on its exact bits.
                indices[name] = np.where(np.isnan(values), np.nan, values).view(np.int64)
                centres[name] = values
                continue
            index_dtype = np.int64 if name == "time_unix_s" else np.int32
            nan = np.isnan(values)
            if nan.all():  # an optional input no record gives: nothing to compute
                indices[name] = np.full(len(values), _NAN_INDEX, dtype=index_dtype)
                centres[name] = values
                continue
            some_nan = nan.any()
            given = np.where(nan, 0.0, values) if some_nan else values
            if np.isinf(given).any():
                return None
            index, centre = self._cell_of(name, given)
            if np.abs(index).max() > _INDEX_LIMITS[index_dtype]:
                return None
            index = index.astype(index_dtype)
            if some_nan:
                index[nan] = _NAN_INDEX
                centre = np.where(nan, np.nan, centre)
            indices[name] = index
            centres[name] = centre
        return indices, centres

    def _cell_of(self, name: str, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(cell index as float, cell-centre value) of finite ``values`` of column ``name``."""
        if name == "time_unix_s":
            step_s = self.cell_minutes * 60.0
            index = np.floor(values / step_s)
            return index, (index + 0.5) * step_s
        if name == "latitude_deg":
            index = np.clip(np.floor((values + 90.0) / self.cell_deg), 0, round(180.0 / self.cell_deg) - 1)
            return index, -90.0 + (index + 0.5) * self.cell_deg
        if name == "longitude_deg":
            index = np.mod(np.floor((values + 180.0) / self.cell_deg), round(360.0 / self.cell_deg))
            return index, -180.0 + (index + 0.5) * self.cell_deg
        step = INPUT_RESOLUTIONS[name]
        index = np.floor(values / step + 0.5)
        if name in _WRAPPED_360:
            index = np.mod(index, round(360.0 / step))
        # Dividing by the whole number 1/step keeps centres such as 1.5 exact.
        return index, (index / round(1.0 / step) if step < 1.0 else index * step)

    def cell_centres(self, columns: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
        """The cell-centre inputs the cache hands to the engine for ``columns``."""
        quantised = self.quantise(columns)
        if quantised is None:
            return {name: np.asarray(value) for name, value in columns.items()}
        return quantised[1]


def _digest(text: str | bytes, size: int = 8) -> bytes:
    data = text.encode("utf-8") if isinstance(text, str) else text
    return hashlib.blake2b(data, digest_size=size).digest()


def _string_codes(values: np.ndarray) -> np.ndarray:
    """A 64-bit code per string, the same in every batch (digest of the UTF-8 text)."""
    uniques, inverse = np.unique(values.astype(str), return_inverse=True)
    codes = np.array([int.from_bytes(_digest(u), "little", signed=True) for u in uniques], dtype=np.int64)
    return codes[inverse.reshape(-1)]


def _distinct_rows(matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(first row of each distinct row, index of each row's distinct row) of a byte matrix.

    Sorting 64-bit row checks is faster than sorting the rows themselves; the result is
    verified byte for byte, and a collision falls back to sorting the rows."""
    _, first, inverse = np.unique(_row_checks(matrix), return_index=True, return_inverse=True)
    inverse = inverse.reshape(-1)
    if np.array_equal(matrix[first][inverse], matrix):
        return first, inverse
    rows = matrix.view(f"V{matrix.shape[1]}").reshape(-1)
    _, first, inverse = np.unique(rows, return_index=True, return_inverse=True)
    return first, inverse.reshape(-1)


def _row_checks(rows: np.ndarray) -> np.ndarray:
    """A 64-bit check of each byte row (FNV-1a over 8-byte lanes with an xor-shift),
    vectorised over rows; stored in each value to prove it belongs to its key."""
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


@dataclass(frozen=True)
class _Layout:
    """How one value's bytes map to result columns: (name, kind, stored dtype, width)."""

    fields: tuple[tuple[str, str, str, int], ...]

    @cached_property
    def value_bytes(self) -> int:
        return _HEADER_BYTES + sum(width for _, _, _, width in self.fields)

    def to_json(self) -> bytes:
        return json.dumps(self.fields, separators=(",", ":")).encode()

    @classmethod
    def from_json(cls, data: bytes) -> "_Layout":
        return cls(tuple(tuple(f) for f in json.loads(data)))

    @cached_property
    def digest(self) -> bytes:
        return _digest(self.to_json())


def _value_checks(key_rows: np.ndarray, payload: np.ndarray) -> np.ndarray:
    """The check stored in each value: over its key and its payload, so a value is only
    used for the cell it was written for and only as it was written."""
    return _row_checks(np.hstack([key_rows, payload]))


def _encode(results: Mapping[str, np.ndarray], key_rows: np.ndarray) -> tuple[_Layout, list[bytes]]:
    """Serialise M cells of engine output (their key rows given) to M values sharing one layout."""
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
        stored = np.dtype(np.float32) if name.startswith(_SPECTRAL_PREFIX) else column.dtype
        data = np.ascontiguousarray(column.reshape(count, -1).astype(stored.newbyteorder("<")))
        fields.append((name, column.dtype.str, stored.newbyteorder("<").str + f"x{data.shape[1]}", data.nbytes // max(count, 1)))
        blocks.append(data.view(np.uint8).reshape(count, -1))
    layout = _Layout(tuple(fields))
    payload = np.hstack(blocks) if blocks else np.zeros((count, 0), dtype=np.uint8)
    header = np.empty((count, _HEADER_BYTES), dtype=np.uint8)
    header[:, :8] = np.frombuffer(layout.digest, dtype=np.uint8)
    header[:, 8:] = _value_checks(key_rows, payload).astype("<u8").view(np.uint8).reshape(count, 8)
    matrix = np.ascontiguousarray(np.hstack([header, payload]))
    return layout, _split_rows(matrix)


def _split_rows(matrix: np.ndarray) -> list[bytes]:
    # One bytes object per row without a Python-level loop over rows: a fixed-width view
    # (a trailing marker keeps numpy from trimming trailing NUL bytes), then strip the marker.
    marked = np.empty((matrix.shape[0], matrix.shape[1] + 1), dtype=np.uint8)
    marked[:, :-1] = matrix
    marked[:, -1] = _KEY_END[0]
    rows = marked.view(f"S{marked.shape[1]}").reshape(-1).tolist()
    return [row[:-1] for row in rows]


def _decode(layout: _Layout, values: list[bytes], key_rows: np.ndarray) -> tuple[np.ndarray, Columns]:
    """Inverse of :func:`_encode` for values of ``layout`` read for ``key_rows``.

    Returns the mask of values whose check holds and the columns of those values."""
    matrix = np.frombuffer(b"".join(values), dtype=np.uint8).reshape(len(values), layout.value_bytes)
    stored_checks = np.ascontiguousarray(matrix[:, 8:_HEADER_BYTES]).view("<u8").reshape(-1)
    sound = stored_checks == _value_checks(key_rows, matrix[:, _HEADER_BYTES:])
    matrix = matrix[sound]
    count = len(matrix)
    offset = _HEADER_BYTES
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


class _Breaker:
    """Circuit breaker for a remote backend: after a failure, skip it for a backoff
    (``initial_s``, doubling to ``max_s``); then let one batch try it again."""

    def __init__(self, initial_s: float, max_s: float, clock: Callable[[], float] = time.monotonic):
        self.initial_s, self.max_s, self.clock = initial_s, max_s, clock
        self._lock = threading.Lock()
        self._backoff_s = initial_s
        self._open_until: float | None = None

    @property
    def is_open(self) -> bool:
        return self._open_until is not None

    def retry_in_s(self) -> float:
        return 0.0 if self._open_until is None else max(0.0, self._open_until - self.clock())

    def allow(self) -> bool:
        with self._lock:
            if self._open_until is None:
                return True
            now = self.clock()
            if now < self._open_until:
                return False
            self._open_until = now + self._backoff_s  # others keep skipping while one tries
            return True

    def success(self) -> None:
        with self._lock:
            was_open = self._open_until is not None
            self._open_until, self._backoff_s = None, self.initial_s
        if was_open:
            log.info("cache backend answers again; caching resumed")

    def failure(self, error: BaseException) -> None:
        with self._lock:
            backoff_s = self._backoff_s
            self._open_until = self.clock() + backoff_s
            self._backoff_s = min(backoff_s * 2.0, self.max_s)
        log.warning("cache backend failed (%s: %s); answering from the engine, retry in %.1f s",
                    type(error).__name__, error, backoff_s)


class _MemoryStore:
    """In-process LRU of at most ``max_entries`` values, each expiring after ``ttl_s``."""

    name = "memory"

    def __init__(self, max_entries: int, ttl_s: float, clock: Callable[[], float] = time.monotonic):
        self.max_entries, self.ttl_s, self.clock = max_entries, ttl_s, clock
        self._values: OrderedDict[bytes, tuple[float, bytes]] = OrderedDict()
        self._layouts: dict[bytes, bytes] = {}
        self._lock = threading.Lock()

    def get_many(self, keys: list[bytes]) -> list[bytes | None]:
        now = self.clock()
        found: list[bytes | None] = []
        with self._lock:
            for key in keys:
                entry = self._values.get(key)
                if entry is None or entry[0] <= now:
                    found.append(None)
                    continue
                self._values.move_to_end(key)
                found.append(entry[1])
        return found

    def set_many(self, keys: list[bytes], values: list[bytes], layout_key: bytes, layout: bytes) -> None:
        expires = self.clock() + self.ttl_s
        with self._lock:
            self._layouts[layout_key] = layout
            for key, value in zip(keys, values):
                self._values[key] = (expires, value)
                self._values.move_to_end(key)
            while len(self._values) > self.max_entries:
                self._values.popitem(last=False)

    def get_layouts(self, layout_keys: list[bytes]) -> list[bytes | None]:
        with self._lock:
            return [self._layouts.get(k) for k in layout_keys]

    def ping(self) -> bool:
        return True

    def __len__(self) -> int:
        return len(self._values)


def _quiet_handshake_options() -> dict[str, Any]:
    """Client options that skip CLIENT SETINFO and maintenance notifications where the
    installed redis-py has them (redis-py 7+), so older clients still work."""
    import inspect

    import redis

    accepted = inspect.signature(redis.Redis.__init__).parameters
    options: dict[str, Any] = {}
    if "driver_info" in accepted:
        options["driver_info"] = None
    if "maint_notifications_config" in accepted:
        from redis.maint_notifications import MaintNotificationsConfig

        options["maint_notifications_config"] = MaintNotificationsConfig(enabled=False)
    return options


def _resp_command(*parts: bytes) -> bytes:
    """One command in the Redis serialisation protocol (RESP), from its byte arguments."""
    return b"*%d\r\n" % len(parts) + b"".join(b"$%d\r\n%s\r\n" % (len(p), p) for p in parts)


class _RedisStore:
    """Redis: one pipelined round trip to read a batch and one to write it."""

    name = "redis"
    _MGET_CHUNK = 10_000

    def __init__(self, url: str, ttl_s: float, connect_timeout_s: float, timeout_s: float):
        import redis
        from redis.backoff import NoBackoff
        from redis.retry import Retry

        self.ttl_ms = max(1, int(round(ttl_s * 1000)))
        # No retries inside the client: a failure goes to the circuit breaker at once.
        # RESP2 without client-name/notification handshakes: a (re)connection costs one
        # round trip (plus SELECT for a non-zero database), not five.
        self.client = redis.Redis.from_url(
            url,
            socket_connect_timeout=connect_timeout_s,
            socket_timeout=timeout_s,
            retry=Retry(NoBackoff(), 0),
            retry_on_timeout=False,
            protocol=2,
            **_quiet_handshake_options(),
        )

    def get_many(self, keys: list[bytes]) -> list[bytes | None]:
        chunks = [keys[start : start + self._MGET_CHUNK] for start in range(0, len(keys), self._MGET_CHUNK)]
        replies = self._round_trip(b"".join(_resp_command(b"MGET", *chunk) for chunk in chunks), len(chunks))
        found = [value for reply in replies for value in reply]
        if len(found) != len(keys):
            raise RuntimeError(f"MGET answered {len(found)} values for {len(keys)} keys")
        return found

    def set_many(self, keys: list[bytes], values: list[bytes], layout_key: bytes, layout: bytes) -> None:
        ttl = b"%d" % self.ttl_ms
        tail = b"$2\r\nPX\r\n$%d\r\n%s\r\n" % (len(ttl), ttl)
        commands = [_resp_command(b"SET", layout_key, layout, b"PX", ttl)]
        commands.extend(
            b"*5\r\n$3\r\nSET\r\n$%d\r\n%s\r\n$%d\r\n%s\r\n%s" % (len(k), k, len(v), v, tail)
            for k, v in zip(keys, values)
        )
        self._round_trip(b"".join(commands), len(commands))

    def _round_trip(self, packed: bytes, replies: int) -> list[Any]:
        """Send RESP commands packed by hand in one write and read their replies.

        redis-py's pipeline spends most of a 500-cell batch packing commands one by one
        (measured: about 35 ms against 5 ms for the same SETs packed here). A failure part
        way closes the connection, so no unread reply is left for a later command."""
        pool = self.client.connection_pool
        connection = pool.get_connection()
        try:
            connection.send_packed_command([packed])
            return [connection.read_response() for _ in range(replies)]
        except BaseException:
            connection.disconnect()
            raise
        finally:
            pool.release(connection)

    def get_layouts(self, layout_keys: list[bytes]) -> list[bytes | None]:
        return self.client.mget(layout_keys)

    def ping(self) -> bool:
        return bool(self.client.ping())


class GridCellCache:
    """Caches engine results per grid cell; see the module docstring.

    ``backend`` is ``"redis"``, ``"memory"`` or ``"off"``. With ``"off"`` the engine sees
    the records' exact inputs; otherwise it always sees cell-centre inputs.
    """

    def __init__(
        self,
        backend: str = "memory",
        grid: CellGrid | None = None,
        redis_url: str | None = None,
        ttl_s: float = 86_400.0,
        max_entries: int = 50_000,
        prefix: str = "uvdose:",
        connect_timeout_s: float = 0.25,
        timeout_s: float = 0.5,
        retry_initial_s: float = 1.0,
        retry_max_s: float = 30.0,
        clock: Callable[[], float] = time.monotonic,
    ):
        if backend not in ("redis", "memory", "off"):
            raise CacheSettingsError(f"UVDOSE_CACHE must be auto, redis, memory or off, got {backend!r}")
        if not ttl_s > 0:
            raise CacheSettingsError(f"UVDOSE_CACHE_TTL_S must be positive, got {ttl_s}")
        if max_entries < 1:
            raise CacheSettingsError(f"UVDOSE_CACHE_MAX_ENTRIES must be at least 1, got {max_entries}")
        self.backend = backend
        self.grid = grid or CellGrid()
        self.prefix = prefix.encode("utf-8")
        self.breaker = _Breaker(retry_initial_s, retry_max_s, clock)
        self._layouts: dict[bytes, _Layout] = {}
        self.store: _MemoryStore | _RedisStore | None = None
        if backend == "redis":
            if not redis_url:
                raise CacheSettingsError("UVDOSE_CACHE=redis needs REDIS_URL")
            self.store = _RedisStore(redis_url, ttl_s, connect_timeout_s, timeout_s)
        elif backend == "memory":
            self.store = _MemoryStore(max_entries, ttl_s, clock)
        self._stats_lock = threading.Lock()
        self.stats = {"hit": 0, "miss": 0, "error": 0}

    # -- the API -------------------------------------------------------------------------

    def compute_through(self, columns: Mapping[str, np.ndarray], compute: ComputeFn, context: str) -> Columns:
        """Results of ``compute`` for every record of ``columns``, in record order.

        ``columns`` are (N,) input arrays named as in ``models.engine.Conditions``;
        ``compute`` maps a dict of such columns to a dict of (M, …) result arrays;
        ``context`` holds every request-wide option that changes the results. Records of one
        cell share one engine run on the cell-centre inputs; ``compute`` is called once, on
        the cells not found in the backend.
        """
        if self.store is None or not columns or len(next(iter(columns.values()))) == 0:
            return compute(dict(columns))
        quantised = self.grid.quantise(columns)
        if quantised is None:
            return compute(dict(columns))
        indices, centres = quantised
        keys_matrix = self._key_matrix(indices, context)
        first, inverse = _distinct_rows(keys_matrix)
        cell_rows = keys_matrix[first]
        keys = _split_rows(cell_rows)
        cell_inputs = {name: value[first] for name, value in centres.items()}

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
                parts, unsound = self._decode_hits([cached[i] for i in hit_at], hit_at, cell_rows)
            except Exception as error:  # a value that passed its checks but will not decode
                log.warning("cached cells would not decode (%s: %s); recomputing them", type(error).__name__, error)
                parts, unsound = [], hit_at
            if len(unsound):
                self._count(error=1)
                miss_at = np.sort(np.concatenate([miss_at, unsound]))
                hit_at = np.setdiff1d(hit_at, unsound)
        if len(miss_at):
            parts.append((miss_at, self._computed(compute, cell_inputs, miss_at, cell_rows, keys)))
        names = set(parts[0][1])
        if any(set(p[1]) != names for p in parts):
            # Cached cells of another column set (not expected for one context): recompute all.
            log.warning("cached cells disagree with the engine's columns; recomputing the batch")
            everything = np.arange(len(keys))
            parts = [(everything, self._computed(compute, cell_inputs, everything, cell_rows, keys))]
        self._count(hit=len(hit_at), miss=len(miss_at))
        return _assemble(parts, len(keys), inverse)

    def cell_centres(self, columns: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
        """The inputs the engine is run on for ``columns`` (cell centres), e.g. to report
        the cell used, or to reproduce a cached result without the cache."""
        if self.store is None:
            return {name: np.asarray(value) for name, value in columns.items()}
        return self.grid.cell_centres(columns)

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

    def _key_matrix(self, indices: Mapping[str, np.ndarray], context: str) -> np.ndarray:
        names = sorted(indices)
        namespace = "\0".join([models.MODEL_VERSION, context, self.grid.describe(), *names])
        head = self.prefix + b"c:" + _digest(namespace, 10)
        count = len(next(iter(indices.values()))) if indices else 0
        blocks = [np.broadcast_to(np.frombuffer(head, dtype=np.uint8), (count, len(head)))]
        for name in names:
            blocks.append(np.ascontiguousarray(indices[name].astype(indices[name].dtype.newbyteorder("<"))).view(np.uint8).reshape(count, -1))
        return np.ascontiguousarray(np.hstack(blocks))

    def _computed(self, compute: ComputeFn, cell_inputs: Columns, at: np.ndarray,
                  cell_rows: np.ndarray, keys: list[bytes]) -> Columns:
        """Run the engine on cells ``at``, store them, return them as a hit would."""
        fresh = compute({name: value[at] for name, value in cell_inputs.items()})
        layout, values = _encode(fresh, cell_rows[at])
        self._layouts[layout.digest] = layout
        self._store([keys[i] for i in at], values, layout)
        return _decode(layout, values, cell_rows[at])[1]

    def _fetch(self, keys: list[bytes]) -> list[bytes | None] | None:
        """Values for ``keys`` (None where absent or unusable), or None if the backend failed."""
        if not self.breaker.allow():
            return None
        try:
            values = self._timed(self.store.get_many, keys)
            unknown = sorted({v[:8] for v in values if v is not None and len(v) >= 8} - set(self._layouts))
            if unknown:
                layout_keys = [self.prefix + b"l:" + digest for digest in unknown]
                for digest, data in zip(unknown, self._timed(self.store.get_layouts, layout_keys)):
                    if data is not None:
                        layout = _Layout.from_json(data)
                        if layout.digest == digest:
                            self._layouts[digest] = layout
        except Exception as error:  # any backend fault: answer from the engine instead
            self._fault(error)
            return None
        self.breaker.success()
        # A value of unknown layout or of the wrong size counts as absent.
        sizes = {digest: layout.value_bytes for digest, layout in self._layouts.items()}
        return [v if v is not None and sizes.get(v[:8]) == len(v) else None for v in values]

    def _decode_hits(self, values: list[bytes], positions: np.ndarray,
                     cell_rows: np.ndarray) -> tuple[list[tuple[np.ndarray, Columns]], np.ndarray]:
        """Decoded hits grouped by layout, and the positions whose check failed."""
        by_layout: dict[bytes, list[int]] = {}
        for index, value in enumerate(values):
            by_layout.setdefault(value[:8], []).append(index)
        parts, unsound = [], []
        for digest, members in by_layout.items():
            at = positions[members]
            sound, columns = _decode(self._layouts[digest], [values[i] for i in members], cell_rows[at])
            parts.append((at[sound], columns))
            unsound.append(at[~sound])
        return parts, np.concatenate(unsound)

    def _store(self, keys: list[bytes], values: list[bytes], layout: _Layout) -> None:
        if not self.breaker.allow():
            return
        try:
            self._timed(self.store.set_many, keys, values, self.prefix + b"l:" + layout.digest, layout.to_json())
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
            _observe_latency(time.perf_counter() - started)

    def _count(self, **amounts: int) -> None:
        with self._stats_lock:
            for event, amount in amounts.items():
                self.stats[event] += amount
        for event, amount in amounts.items():
            _count_event(event, amount)


def _assemble(parts: list[tuple[np.ndarray, Columns]], cells: int, inverse: np.ndarray) -> Columns:
    """Merge per-cell parts (positions, columns) into cell order, then expand to records."""
    positions = np.concatenate([p for p, _ in parts])
    order = np.argsort(positions, kind="stable")
    assert len(positions) == cells and (positions[order] == np.arange(cells)).all()
    merged: Columns = {}
    for name in parts[0][1]:
        stacked = np.concatenate([columns[name] for _, columns in parts])
        merged[name] = stacked[order][inverse]
    return merged


def _count_event(event: str, amount: int) -> None:
    from uvdose.service import metrics

    counter = getattr(metrics, "count_cache", None)
    if counter is not None and amount:
        counter(event, amount)


def _observe_latency(seconds: float) -> None:
    from uvdose.service import metrics

    observe = getattr(metrics, "observe_cache_latency", None)
    if observe is not None:
        observe(seconds)


# -- settings ----------------------------------------------------------------------------

_SETTINGS: dict[str, tuple[str, Callable[[str], Any], Any]] = {
    # app.config / environment key: (GridCellCache argument, parser, default)
    "UVDOSE_CACHE_TTL_S": ("ttl_s", float, 86_400.0),
    "UVDOSE_CACHE_MAX_ENTRIES": ("max_entries", int, 50_000),
    "UVDOSE_CACHE_PREFIX": ("prefix", str, "uvdose:"),
    "UVDOSE_REDIS_CONNECT_TIMEOUT_S": ("connect_timeout_s", float, 0.25),
    "UVDOSE_REDIS_TIMEOUT_S": ("timeout_s", float, 0.5),
    "UVDOSE_CACHE_RETRY_S": ("retry_initial_s", float, 1.0),
    "UVDOSE_CACHE_RETRY_MAX_S": ("retry_max_s", float, 30.0),
}


def cache_from_settings(settings: Mapping[str, Any]) -> GridCellCache:
    """Build the cache from app.config, falling back to the environment, then defaults.
    A setting that cannot be parsed raises :class:`CacheSettingsError` naming it."""

    def raw(name: str) -> Any:
        value = settings.get(name)
        return os.environ.get(name) if value is None else value

    def parsed(name: str, parse: Callable[[str], Any], default: Any) -> Any:
        value = raw(name)
        if value is None or value == "":
            return default
        try:
            return parse(value)
        except (TypeError, ValueError) as error:
            raise CacheSettingsError(f"{name} cannot be used: {value!r} ({error})") from None

    mode = str(raw("UVDOSE_CACHE") or "auto").strip().lower()
    redis_url = raw("REDIS_URL") or None
    if mode == "auto":
        mode = "redis" if redis_url else "memory"
    elif mode == "none":
        mode = "off"
    grid = CellGrid(parsed("UVDOSE_CELL_DEG", float, 0.05), parsed("UVDOSE_CELL_MINUTES", float, 2.0))
    options = {arg: parsed(name, parse, default) for name, (arg, parse, default) in _SETTINGS.items()}
    return GridCellCache(backend=mode, grid=grid, redis_url=redis_url, **options)


def init_app(app) -> None:
    """Attach the cache as ``app.extensions["uvdose_cache"]``."""
    app.extensions["uvdose_cache"] = cache_from_settings(app.config)
