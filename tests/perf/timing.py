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
