"""The physics-state cache that wraps the engine's radiative transfer.

Farm and fleet batches repeat the same physics again and again: many places and times
share the solar zenith, ozone column, pressure, surface and aerosol of another, so results
are kept per *physics state* (the engine's ``models.engine.TRANSFER_STATE_COLUMNS``), each
column rounded to a stated step (:data:`STATE_STEPS`). The cache sits behind the engine's
``transfer_memo``: the solar position is always computed for each record's own time and
place, and the Earth–Sun distance, the cloud factor and the receiver are applied per
record after the transfer, so no answer carries a position or time error; the cached part
is the horizontal clear-sky irradiance (weighted integrals, or spectra when asked for) at
1 AU. The transfer is always run on the **rounded state**, for hits and misses alike and
also while the backend is down, so one record always gets the same answer from one
deployment. The error this costs is bounded and tested (:data:`CACHE_ERROR_BOUND`, README
"Cache", ``tests/service/test_cache_accuracy.py``).

One request writes at most ``UVDOSE_CACHE_MAX_WRITES`` new entries (those most of its
records use first), so a large dose request cannot evict every other client's entries;
what it computes beyond that it answers without storing.

A model upgrade changes every key (``models.MODEL_VERSION`` is part of it); old entries are
never read again and age out by TTL or by the server's eviction policy. A failing Redis
opens a circuit breaker: the batch is answered from the engine, the fault is logged and
counted, and Redis is tried again only after a backoff that doubles up to
``UVDOSE_CACHE_RETRY_MAX_S``. Results just computed pass through the same encoding before
they are returned, so a miss and a later hit return identical numbers.

One module per part:

================== ====================================================================
``physics_keys``   the rounding of each state column and the error bound (the keying)
``keys``           step indices -> byte keys (prefix, namespace digest, indices)
``codec``          results <-> compact binary values with a check over key and contents
``byte_rows``      digests, row checks, dedupe and splitting of byte matrices
``breaker``        the circuit breaker in front of Redis
``memory_store``   the in-process LRU with TTL
``redis_store``    Redis, one pipelined round trip per read and per bounded write chunk
``state_cache``    :class:`StateCache`, its ``compute_through`` and the per-request
                   :class:`WriteAllowance`
``build``          :func:`build_cache` from the parsed settings (the engine gateway calls it)
================== ====================================================================
"""
from uvdose.service.cache.build import build_cache
from uvdose.service.cache.physics_keys import CACHE_ERROR_BOUND, STATE_STEPS, Keying, PhysicsKeying
from uvdose.service.cache.state_cache import StateCache, WriteAllowance

__all__ = ["CACHE_ERROR_BOUND", "STATE_STEPS", "Keying", "PhysicsKeying", "StateCache", "WriteAllowance",
           "build_cache"]
