"""How ``optbench screen`` scales on a Dask cluster, and a larger cluster simulated
from the task times measured in the same run.

A synthetic universe (invented underlyings, ~2,000 quotes and 2,500 days each; see
synthetic_universe.py) is screened on a real ``dask.distributed.LocalCluster`` on
loopback (worker processes, one thread each) with 1, 2 and 4 workers, through the
same ``screen(..., scheduler=ADDRESS)`` call that ``optbench screen --scheduler``
makes. The same-run reference is the local process-pool path of ``optbench screen``
(``screen(..., workers=W)``) with the same worker counts.

Measured per cluster size:

- wall of the screen on the running cluster (the cluster's start-up is printed
  apart: a desk's cluster is started once, not per screen), per underlying,
  speed-up against 1 worker and efficiency (speed-up / workers, and / the cores the
  workers can use: this machine has 2 cores, so 4 workers share them);
- each task's compute time on its worker, from the scheduler's task stream, and
  the gap: ``(workers x wall - sum of compute times) / tasks``, the wall per task
  that the workers did not spend computing (dispatch, results, the last task's
  tail);
- the scheduler's cost per task, measured with the same runner on no-op tasks:
  ``(wall(K no-op tasks) - wall(1 no-op task)) / (K - 1)``, and the fixed cost of a
  screen on a running cluster (connect, first dispatch): ``wall(1 no-op task)``.

The simulated cluster (list scheduling over the measured task times):

- N underlyings' task times are drawn (with replacement, fixed seed) from the task
  times measured with 1 worker; each task also costs the measured scheduler cost
  per task; tasks go in order to the worker that becomes free first (what the Dask
  scheduler does for independent tasks of equal priority); the wall is the fixed
  cost plus the last worker's finishing time — median and 90 % range over 50 draws;
- lower bounds that can dominate on a large cluster: the scheduler handles tasks
  one at a time (N × cost per task), and every task reads its folder over shared
  storage (N × bytes per underlying / storage bandwidth; ``--storage-mb-s``,
  default 100 MB/s, about a 1 Gbit/s network file system: an assumption, not a
  measurement);
- assumes one core per worker, no other work on the machines, the same task-time
  distribution on every worker (same CPU as this machine), and a cluster already
  running with optbench installed on every worker.

The model is checked against the runs it was fitted on (predicted beside measured,
for the worker counts this machine has cores for).

Run: .venv/bin/python tests/benchmarks/bench_screen_dask.py [--n 60] [--quick]
     [--workers 1,2,4] [--simulate 8,16,64,128] [--simulate-n 5000] [--storage-mb-s 100]
"""
from __future__ import annotations

import argparse
import heapq
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from synthetic_universe import write_universe  # noqa: E402
from timing import figure  # noqa: E402  (tests/benchmarks)

from optbench.screening.runner import default_workers, run_outcomes  # noqa: E402
from optbench.screening.screen import screen  # noqa: E402

NOOP_TASKS = 400


def noop(x):
    """A task that does nothing: what is left of its wall is the scheduler's cost."""
    return x


def scheduler_cost(address: str, k: int) -> tuple[float, float]:
    """(fixed cost of a run, cost per task) in seconds, through the same runner as
    the screen: ``wall(1)`` and ``(wall(k) - wall(1)) / (k - 1)``, medians of 3."""
    ones, many = [], []
    for _ in range(3):
        t0 = time.perf_counter()
        run_outcomes(noop, [0], scheduler=address)
        ones.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        run_outcomes(noop, range(k), scheduler=address)
        many.append(time.perf_counter() - t0)
    fixed, total = statistics.median(ones), statistics.median(many)
    return fixed, max(0.0, (total - fixed) / (k - 1))


def task_times(client, since: float) -> list[float]:
    """Compute seconds of every task recorded by the scheduler's task stream since
    ``since`` (the screen's tasks: key prefix ``call_safely``)."""
    out = []
    for rec in client.get_task_stream(start=since):
        if not str(rec.get("key", "")).startswith(("call_safely", "('call_safely")):
            continue
        compute = sum(s["stop"] - s["start"] for s in rec.get("startstops", ())
                      if s.get("action") == "compute")
        if compute > 0:
            out.append(compute)
    return out


def list_schedule(times: np.ndarray, workers: int, per_task: float) -> float:
    """Finishing time of the last worker when the tasks, in order, each go to the
    worker that becomes free first (each task costs its time plus ``per_task``)."""
    free = [0.0] * workers
    for t in times:
        heapq.heapreplace(free, free[0] + t + per_task)
    return max(free)


def simulate(sample: np.ndarray, n: int, workers: int, fixed: float, per_task: float,
             bytes_per_task: float, storage_bytes_s: float, draws: int = 50,
             seed: int = 20261203) -> tuple[float, float, float, str]:
    """Median, 5 % and 95 % quantiles of the simulated wall, and which bound set it."""
    rng = np.random.default_rng(seed)
    walls, limits = [], []
    for _ in range(draws):
        times = rng.choice(sample, size=n, replace=True)
        bounds = {"workers": list_schedule(times, workers, per_task),
                  "scheduler": n * per_task,
                  "storage": n * bytes_per_task / storage_bytes_s}
        limit = max(bounds, key=bounds.get)
        walls.append(fixed + bounds[limit])
        limits.append(limit)
    q = np.quantile(walls, [0.5, 0.05, 0.95])
    return float(q[0]), float(q[1]), float(q[2]), statistics.mode(limits)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=60, help="underlyings in the universe")
    ap.add_argument("--quotes", type=int, default=2000)
    ap.add_argument("--days", type=int, default=2500)
    ap.add_argument("--workers", default="1,2,4")
    ap.add_argument("--simulate", default="8,16,64,128", help="simulated cluster sizes")
    ap.add_argument("--simulate-n", type=int, default=5000)
    ap.add_argument("--storage-mb-s", type=float, default=100.0,
                    help="assumed shared-storage bandwidth, MB/s (default 100)")
    ap.add_argument("--quick", action="store_true", help="24 underlyings, 1 and 2 workers")
    a = ap.parse_args()
    if a.quick:
        a.n, a.workers = 24, "1,2"
    counts = [int(w) for w in a.workers.split(",")]
    cores = default_workers()

    from distributed import Client, LocalCluster

    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp) / "universe"
        folders = write_universe(root, a.n, a.quotes, a.days)
        bytes_per_task = statistics.mean(
            sum(f.stat().st_size for f in folder.iterdir()) for folder in folders)
        print(f"universe: {a.n} synthetic underlyings, ~{a.quotes} quotes x {a.days} days, "
              f"{bytes_per_task / 1e3:.0f} kB of files each; this machine: {cores} cores "
              f"(shared with other work), load average {os.getloadavg()[0]:.1f}")
        rows = []
        measured: dict[int, list[float]] = {}
        costs: dict[int, tuple[float, float]] = {}
        for w in counts:
            t0 = time.perf_counter()
            with LocalCluster(n_workers=w, threads_per_worker=1, processes=True,
                              host="127.0.0.1", dashboard_address=None) as cluster:
                # one client to prepare and one to read the task stream; none open
                # while the screen runs (it opens its own, as `optbench screen` does)
                with Client(cluster) as client:
                    client.wait_for_workers(w)
                    # every worker imports the screen before the clock starts
                    client.run(lambda: __import__("optbench.screening.tasks"))
                    client.get_task_stream()           # start recording
                started = time.perf_counter() - t0
                costs[w] = scheduler_cost(cluster.scheduler_address, NOOP_TASKS)
                since = time.time()
                t1 = time.perf_counter()
                result = screen(root, scheduler=cluster.scheduler_address)
                dask_wall = time.perf_counter() - t1
                with Client(cluster) as client:
                    measured[w] = task_times(client, since)
            assert not result.failures, result.failures[:3]
            t2 = time.perf_counter()
            local = screen(root, workers=w)
            local_wall = time.perf_counter() - t2
            assert not local.failures, local.failures[:3]
            rows.append((w, started, dask_wall, local_wall))
            print(f"  {w} worker(s): cluster up in {started:.1f} s, dask {dask_wall:.1f} s, "
                  f"local pool {local_wall:.1f} s", flush=True)

        base_dask = rows[0][2] * (1 / counts[0])
        base_local = rows[0][3] * (1 / counts[0])
        print()
        print("Dask LocalCluster (loopback, processes, 1 thread each) against the local "
              "process pool of `optbench screen`, same run, same universe")
        print(f"{'workers':>7} {'wall s':>8} {'per und. ms':>11} {'speed-up':>8} "
              f"{'eff.':>5} {'eff./cores':>10} {'sched. ms/task':>14} {'task ms (med)':>13} "
              f"{'gap ms/task':>11} "
              f"| {'pool wall s':>11} {'per und. ms':>11} {'speed-up':>8}")
        for w, started, dask_wall, local_wall in rows:
            speed = base_dask / dask_wall
            lspeed = base_local / local_wall
            usable = min(w, cores)
            med = statistics.median(measured[w]) * 1e3 if measured[w] else float("nan")
            # wall the workers did not spend computing, per task: dispatch, result
            # transfer, waiting for the last task
            gap = (w * dask_wall - sum(measured[w])) / a.n * 1e3
            print(f"{w:>7} {dask_wall:>8.1f} {dask_wall / a.n * 1e3:>11.0f} {speed:>8.2f} "
                  f"{speed / w:>5.0%} {speed / usable:>10.0%} {costs[w][1] * 1e3:>14.2f} "
                  f"{med:>13.0f} {gap:>11.0f} | {local_wall:>11.1f} {local_wall / a.n * 1e3:>11.0f} "
                  f"{lspeed:>8.2f}")
            figure(f"dask {w} workers: per underlying", dask_wall / a.n * 1e3, "ms",
                   reference=f"local pool {w} workers {local_wall / a.n * 1e3:.0f} ms")
            if w > counts[0]:
                figure(f"dask speed-up 1->{w} workers", speed, "x", better="higher",
                       reference=f"local pool {lspeed:.2f}x; {cores} cores")
        fixed = statistics.median(c[0] for c in costs.values())
        per_task = statistics.median(c[1] for c in costs.values())
        print(f"fixed cost of a screen on a running cluster (connect, first dispatch): "
              f"{fixed * 1e3:.0f} ms; scheduler cost per task: {per_task * 1e3:.2f} ms "
              f"(no-op tasks through the same runner, {NOOP_TASKS} tasks, median of 3)")
        figure("dask scheduler cost per task", per_task * 1e3, "ms",
               reference="no-op tasks, same runner, same run")

        sample = np.asarray(measured[counts[0]])
        print(f"\ntask times measured with {counts[0]} worker(s): {len(sample)} tasks, "
              f"median {np.median(sample) * 1e3:.0f} ms, 5-95 % "
              f"{np.quantile(sample, 0.05) * 1e3:.0f}-{np.quantile(sample, 0.95) * 1e3:.0f} ms")
        storage = a.storage_mb_s * 1e6
        print("model check on the measured runs (workers <= cores):")
        for w, _, dask_wall, _ in rows:
            if w > cores:
                continue
            med, lo, hi, limit = simulate(sample, a.n, w, fixed, per_task,
                                          bytes_per_task, storage)
            print(f"  {w} worker(s), {a.n} underlyings: predicted {med:.1f} s "
                  f"({lo:.1f}-{hi:.1f}), measured {dask_wall:.1f} s")
        n = a.simulate_n
        print(f"\nsimulated cluster, {n:,} underlyings (list scheduling over the measured "
              f"task times; shared storage {a.storage_mb_s:g} MB/s assumed):")
        print(f"{'workers':>7} {'wall s':>8} {'5-95 %':>13} {'per und. ms':>11} "
              f"{'speed-up':>8} {'eff.':>5}  bound")
        one = simulate(sample, n, 1, fixed, per_task, bytes_per_task, storage)[0]
        for w in [1] + [int(x) for x in a.simulate.split(",")]:
            med, lo, hi, limit = simulate(sample, n, w, fixed, per_task, bytes_per_task,
                                          storage)
            print(f"{w:>7} {med:>8.1f} {lo:>6.1f}-{hi:<6.1f} {med / n * 1e3:>11.1f} "
                  f"{one / med:>8.1f} {one / med / w:>5.0%}  {limit}")
            if w > 1:
                figure(f"simulated {n} underlyings on {w} workers", med, "s",
                       reference=f"1 worker {one:.0f} s (simulated)")


if __name__ == "__main__":
    main()
