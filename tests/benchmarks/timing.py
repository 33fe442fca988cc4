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


def figure(name: str, value: float, unit: str, target: float | None = None,
           better: str = "lower", reference: str = "") -> None:
    """Print one benchmark figure as a machine-readable line for ``run_all.py``.

    ``better`` is ``"lower"`` (times, memory: met when ``value <= target``) or
    ``"higher"`` (ratios against a reference: met when ``value >= target``);
    ``target`` None means the figure is printed for the record only.
    ``reference`` names what the figure is compared with in the same run.
    """
    import json
    print("FIGURE " + json.dumps({"name": name, "value": float(value), "unit": unit,
                                  "target": None if target is None else float(target),
                                  "better": better, "reference": reference}), flush=True)
