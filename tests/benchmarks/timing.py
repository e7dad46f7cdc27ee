"""Timing helpers shared by the benchmark scripts in this folder (not collected by pytest).

The scripts run as ``python tests/benchmarks/bench_<name>.py``, so this folder is first on
``sys.path`` and they import it as ``timing``.
"""
from __future__ import annotations

import argparse
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


def whole_number_options(doc: str, **defaults: int) -> argparse.Namespace:
    """The command line of a benchmark whose options are whole numbers (``--rows 10000``),
    each named and defaulted by ``defaults``; ``doc``'s first line describes the script."""
    parser = argparse.ArgumentParser(description=doc.splitlines()[0])
    for name, default in defaults.items():
        parser.add_argument(f"--{name.replace('_', '-')}", type=int, default=default)
    return parser.parse_args()
