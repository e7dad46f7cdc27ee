"""Timing helpers shared by the benchmark scripts in this folder (not collected by pytest).

The scripts run as ``python tests/benchmarks/bench_<name>.py``, so this folder is first on
``sys.path`` and they import it as ``timing``.
"""
from __future__ import annotations

import time
from typing import Callable


def timings(repeats: int, call: Callable[[], object], warmup: bool = False) -> list[float]:
    """Wall-clock seconds of ``repeats`` calls of ``call`` (one untimed call first if ``warmup``)."""
    if warmup:
        call()
    times = []
    for _ in range(repeats):
        started = time.perf_counter()
        call()
        times.append(time.perf_counter() - started)
    return times


def best_of(repeats: int, call: Callable[[], object], warmup: bool = False) -> float:
    """The fastest of ``repeats`` timed calls, seconds: the least disturbed by other load."""
    return min(timings(repeats, call, warmup))
