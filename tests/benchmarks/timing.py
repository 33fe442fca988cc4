"""The one timer the benchmark scripts share: median wall seconds of a call."""
from __future__ import annotations

import statistics
import time


def median_time(fn, repeats: int = 7, warm_up: bool = True) -> float:
    """Median wall time in seconds of ``fn()`` over ``repeats`` calls (after one
    untimed call when ``warm_up``)."""
    if warm_up:
        fn()
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)
