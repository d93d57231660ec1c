"""Timing helpers shared by the scripts/bench_*.py benchmarks.

Every benchmark compares against a baseline timed in the same run, with the same helper, so
that machine speed and load cancel in the ratio.
"""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable, Sequence


def best_time_and_result(fn: Callable[[], object], repeat: int) -> tuple[float, object]:
    """Shortest wall time of ``repeat`` calls (seconds) and the result of the last call."""
    best, result = float("inf"), None
    for _ in range(max(1, repeat)):
        t0 = time.perf_counter()
        result = fn()
        best = min(best, time.perf_counter() - t0)
    return best, result


def best_time(fn: Callable[[], object], repeat: int) -> float:
    """Shortest wall time of ``repeat`` calls, seconds."""
    return best_time_and_result(fn, repeat)[0]


def median_time(fn: Callable[[], object], repeat: int) -> float:
    """Median wall time of ``repeat`` calls after one warm-up call (imports, caches), seconds."""
    fn()
    times = []
    for _ in range(max(1, repeat)):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def best_of_interleaved(fns: Sequence[Callable[[], object]], repeat: int) -> list[float]:
    """Best wall time of each function, runs interleaved so that load changes hit all alike."""
    times: list[list[float]] = [[] for _ in fns]
    for _ in range(max(1, repeat)):
        for fn, t in zip(fns, times, strict=True):
            t0 = time.perf_counter()
            fn()
            t.append(time.perf_counter() - t0)
    return [min(t) for t in times]


def print_rows(rows: list[dict]) -> None:
    """Print benchmark rows (``benchmark``, ``measured``, ``baseline``, ``ratio``, ``goal``)."""
    for row in rows:
        print(f"{row['benchmark']}\n    measured {row['measured']}\n    baseline {row['baseline']}\n"
              f"    ratio {row['ratio']:.3g}   goal: {row['goal']}")
