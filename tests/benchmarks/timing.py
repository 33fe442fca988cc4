"""The timers the benchmark scripts share: median wall or CPU seconds of a call."""
from __future__ import annotations

import statistics
import time


def median_time(fn, repeats: int = 7, warm_up: bool = True,
                clock=time.perf_counter) -> float:
    """Median seconds of ``fn()`` over ``repeats`` calls (after one untimed call when
    ``warm_up``) on ``clock``: wall time by default."""
    if warm_up:
        fn()
    times = []
    for _ in range(repeats):
        t0 = clock()
        fn()
        times.append(clock() - t0)
    return statistics.median(times)


def median_cpu(fn, repeats: int = 7, warm_up: bool = True) -> float:
    """:func:`median_time` in CPU seconds of this process (steadier than wall time on
    a shared machine)."""
    return median_time(fn, repeats, warm_up, clock=time.process_time)


def process_time(cmd: list[str], repeats: int) -> tuple[float, float]:
    """Median wall and median CPU seconds of ``cmd`` run as a fresh process
    ``repeats`` times (CPU is the steadier figure on a shared machine)."""
    import resource
    import subprocess
    times, cpu = [], []
    for _ in range(repeats):
        r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
        t0 = time.perf_counter()
        subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL)
        times.append(time.perf_counter() - t0)
        r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu.append(r1.ru_utime + r1.ru_stime - r0.ru_utime - r0.ru_stime)
    return statistics.median(times), statistics.median(cpu)


#: median CPU seconds of each command timed by :func:`wall`, keyed by the command line
CPU: dict[str, float] = {}


def wall(cmd: list[str], repeats: int) -> float:
    """Median wall seconds of ``cmd`` as a fresh process; its median CPU seconds go to
    :data:`CPU`."""
    w, c = process_time(cmd, repeats)
    CPU[" ".join(cmd)] = c
    return w


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
