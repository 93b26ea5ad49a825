"""Shared timing for the benchmark scripts (run as ``python tests/perf/bench_<topic>.py``)."""

from __future__ import annotations

import time
from collections.abc import Callable


def best(fn: Callable[[], object], repeat: int = 3) -> float:
    """The shortest of ``repeat`` wall-clock timings of ``fn()``, in seconds (the least disturbed run)."""
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def ratio_rounds(fn: Callable[[], object], floor: Callable[[], object], rounds: int = 7,
                 repeat: int = 5) -> tuple[float, float, float, float, float]:
    """``fn``'s time over ``floor``'s on a shared machine: ``rounds`` rounds of (best of ``repeat`` for fn, then
    best of ``repeat`` for floor), so each ratio compares times taken moments apart.

    Returns (median ratio, lowest, highest, fn's best time, floor's best time); the median is what a target
    is checked against."""
    ratios, fn_best, floor_best = [], float("inf"), float("inf")
    for _ in range(rounds):
        a = best(fn, repeat)
        time.sleep(0.2)  # let thread pools that spin after a call go idle (OpenBLAS: about 0.1 s)
        b = best(floor, repeat)
        time.sleep(0.2)
        ratios.append(a / b)
        fn_best, floor_best = min(fn_best, a), min(floor_best, b)
    ratios.sort()
    return ratios[len(ratios) // 2], ratios[0], ratios[-1], fn_best, floor_best
