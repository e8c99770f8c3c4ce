"""Timing helpers shared by the benchmarks (run.py and every bench_<area>.py)."""

from __future__ import annotations

import time
from collections.abc import Callable


def best_of(func: Callable[[], object], repeat: int = 7, number: int = 20, *,
            warm_up: bool = False) -> float:
    """Smallest mean time per call (seconds) over ``repeat`` batches of ``number`` calls.

    ``warm_up`` makes one untimed call first (caches filled, modules imported).
    """
    if warm_up:
        func()
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        for _ in range(number):
            func()
        times.append((time.perf_counter() - start) / number)
    return min(times)


def verdict(ok: bool) -> str:
    """How a benchmark row reports its target."""
    return "met" if ok else "NOT MET"
