"""Timing shared by the benchmark scripts: the best of a few runs, in the same process as its baseline."""

from __future__ import annotations

import time
from typing import Callable


def best_of(call: Callable[[], object], repeats: int) -> float:
    """The shortest wall time of ``repeats`` calls, in seconds."""
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        call()
        times.append(time.perf_counter() - start)
    return min(times)
