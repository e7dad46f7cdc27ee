"""The grid-cell cache that wraps the engine call.

Farm and fleet batches repeat the same places and times, so results are kept per *grid
cell*: every record is mapped to a cell in space (``UVDOSE_CELL_DEG`` degrees of latitude
by the same of longitude), in time (``UVDOSE_CELL_MINUTES``) and in every other input that
changes the result (each rounded to the resolution in :data:`INPUT_RESOLUTIONS`). The engine
is always run on the **cell-centre inputs**, for hits and misses alike and also while the
backend is down, so one record always gets the same answer from one deployment. The error
this costs is bounded and tested (README "Cache", ``tests/service/test_cache_accuracy.py``).

A model upgrade changes every key (``models.MODEL_VERSION`` is part of it); old entries are
never read again and age out by TTL or by the server's eviction policy. A failing Redis
opens a circuit breaker: the batch is answered from the engine, the fault is logged and
counted, and Redis is tried again only after a backoff that doubles up to
``UVDOSE_CACHE_RETRY_MAX_S``. Results just computed pass through the same encoding before
they are returned, so a miss and a later hit return identical numbers.

One module per part:

================== ====================================================================
``cells``          which cell a record falls in, and its cell-centre inputs (the keying)
``keys``           cell indices -> byte keys (prefix, namespace digest, indices)
``codec``          results <-> compact binary values with a check over key and contents
``byte_rows``      digests, row checks, dedupe and splitting of byte matrices
``breaker``        the circuit breaker in front of Redis
``memory_store``   the in-process LRU with TTL
``redis_store``    Redis, one pipelined round trip per read and per write
``grid_cell_cache`` :class:`GridCellCache` and its ``compute_through``
``build``          :func:`build_cache` from the parsed settings (the engine gateway calls it)
================== ====================================================================
"""
from uvdose.service.cache.build import build_cache
from uvdose.service.cache.cells import INPUT_RESOLUTIONS, CellGrid, Keying
from uvdose.service.cache.grid_cell_cache import GridCellCache

__all__ = ["INPUT_RESOLUTIONS", "CellGrid", "GridCellCache", "Keying", "build_cache"]
