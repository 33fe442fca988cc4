"""Speed and memory of ``optbench screen`` on a synthetic universe (invented
underlyings, ~2,000 quotes and 2,500 days of history each; see synthetic_universe.py).

Target: 500 underlyings with 2 workers in <= 60 s, peak memory <= 2 GB. Prints the
wall time with 1 and with 2 local worker processes, the speed-up, seconds per
underlying, and the peak resident memory of this process and its workers together
(sampled from /proc every 0.1 s).

Run: .venv/bin/python tests/benchmarks/bench_screen.py [--n 500] [--n-serial 60]
     .venv/bin/python tests/benchmarks/bench_screen.py --scaling
(--n-serial: underlyings timed with 1 worker; the speed-up compares per-underlying
times, so a subset keeps the run short.)
"""
from __future__ import annotations

import argparse
import os
import sys
import tempfile
import threading
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from synthetic_universe import write_universe  # noqa: E402

from optbench.screening.screen import screen  # noqa: E402
from timing import figure  # noqa: E402  (tests/benchmarks)


def _tree_rss_bytes(root_pid: int) -> int:
    """Resident memory of a process and all its descendants (Linux /proc)."""
    children: dict[int, list[int]] = {}
    rss: dict[int, int] = {}
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/stat") as f:
                fields = f.read().rsplit(")", 1)[1].split()
            ppid = int(fields[1])
            pages = int(fields[21])
        except (OSError, IndexError, ValueError):
            continue
        pid = int(entry)
        children.setdefault(ppid, []).append(pid)
        rss[pid] = pages * os.sysconf("SC_PAGE_SIZE")
    total, stack = 0, [root_pid]
    while stack:
        pid = stack.pop()
        total += rss.get(pid, 0)
        stack.extend(children.get(pid, []))
    return total


class PeakMemory:
    def __init__(self) -> None:
        self.peak = 0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def _run(self) -> None:
        while not self._stop.is_set():
            self.peak = max(self.peak, _tree_rss_bytes(os.getpid()))
            self._stop.wait(0.1)

    def __enter__(self):
        self._thread.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._thread.join()


def timed_screen(folder: Path, workers: int):
    with PeakMemory() as mem:
        start = time.perf_counter()
        result = screen(folder, workers=workers)
        wall = time.perf_counter() - start
    return result, wall, mem.peak


def scaling(root: Path) -> None:
    """Seconds and peak memory of one underlying, in this process, by chain size and
    history length (median of 3 underlyings each)."""
    import resource
    import statistics

    from optbench.screening.rows import ScreenTask, screen_one

    print("one underlying, in process: quotes x days -> median seconds")
    for quotes in (500, 2000, 8000):
        for days in (1000, 2500, 5000):
            folder = root / f"scale_{quotes}_{days}"
            folders = write_universe(folder, 3, quotes, days, seed=quotes + days)
            screen_one(ScreenTask(str(folders[0])))          # warm caches
            times = []
            for f in folders:
                start = time.perf_counter()
                screen_one(ScreenTask(str(f)))
                times.append(time.perf_counter() - start)
            print(f"  {quotes:5d} quotes x {days:5d} days: {statistics.median(times):6.3f} s")
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak resident memory of this process: {peak:.0f} MiB")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--n", type=int, default=500)
    parser.add_argument("--n-serial", type=int, default=60)
    parser.add_argument("--quotes", type=int, default=2000)
    parser.add_argument("--days", type=int, default=2500)
    parser.add_argument("--scaling", action="store_true",
                        help="instead: time one underlying by chain size and history length")
    a = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        if a.scaling:
            scaling(root)
            return
        start = time.perf_counter()
        write_universe(root / "full", a.n, a.quotes, a.days)
        serial_dir = root / "subset"
        serial_dir.mkdir()
        for p in sorted((root / "full").iterdir())[:a.n_serial]:
            (serial_dir / p.name).symlink_to(p, target_is_directory=True)
        print(f"universe: {a.n} underlyings x ~{a.quotes} quotes x {a.days} days "
              f"(written in {time.perf_counter() - start:.1f} s)")
        r1, wall1, mem1 = timed_screen(serial_dir, workers=1)
        r2, wall2, mem2 = timed_screen(root / "full", workers=2)
        per1 = wall1 / a.n_serial
        per2 = wall2 / a.n
        failed = len(r2.failures)
        print(f"1 worker : {a.n_serial:4d} underlyings in {wall1:6.1f} s  "
              f"{per1 * 1000:6.0f} ms each   peak memory {mem1 / 2**20:6.0f} MiB")
        print(f"2 workers: {a.n:4d} underlyings in {wall2:6.1f} s  "
              f"{per2 * 1000:6.0f} ms each   peak memory {mem2 / 2**20:6.0f} MiB  "
              f"(target <= 60 s, <= 2048 MiB)")
        print(f"speed-up 1 -> 2 workers: {per1 / per2:.2f}x   failures: {failed}")
        # target: 5,000 underlyings in 180 s on 2 workers, scaled to this universe
        figure(f"screen {a.n} underlyings, 2 workers", wall2, "s", 180 * a.n / 5000,
               reference=f"1 worker {per1 * a.n:.0f} s extrapolated")
        figure("screen peak memory, all processes", mem2 / 2**20, "MiB", 2048)


if __name__ == "__main__":
    main()
