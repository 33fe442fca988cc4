"""Speed and memory of ``optbench screen`` on a synthetic universe (invented
underlyings, ~2,000 quotes and 2,500 days of history each; see synthetic_universe.py).

Target: 5,000 underlyings on 2 local workers in <= 180 s with peak memory <= 2 GB
across processes, with the same rows as the full-cost row.

The universe is written once into a cache folder under /tmp (named by its size and
seed; ``--cache-dir``) and reused by later runs. In the same run the script measures:

* the reference: the full-cost row (``full=True``: the hedge simulated again per
  tenor) and the lean row (the default) on ``--n-reference`` underlyings spread
  evenly over the universe, in this process, one after the other — seconds and CPU seconds per underlying, and
  the largest relative difference of any number between the two (tolerance 1e-9;
  text columns must be identical);
* the screen of the whole universe with ``--workers`` (default 2) local processes:
  wall time, per underlying, CPU seconds of all processes per underlying, and the peak
  resident memory of this process and its workers together (sampled from /proc every
  0.1 s);
* the load average before and after (the machine is shared: figures measured under
  load are slower than on a quiet machine).

Run: .venv/bin/python tests/benchmarks/bench_screen.py [--n 5000] [--n-reference 20]
     .venv/bin/python tests/benchmarks/bench_screen.py --quick        (200 underlyings)
     .venv/bin/python tests/benchmarks/bench_screen.py --scaling
"""
from __future__ import annotations

import argparse
import math
import os
import resource
import shutil
import statistics
import sys
import tempfile
import threading
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from synthetic_universe import write_universe  # noqa: E402

from optbench.screening.screen import screen  # noqa: E402
from timing import figure  # noqa: E402  (tests/benchmarks)

TARGET_S_PER_5000 = 180.0
TARGET_MIB = 2048
SEED = 20261201


def _tree_pids(root_pid: int) -> list[int]:
    """A process and all its descendants (Linux /proc: every process's parent)."""
    children: dict[int, list[int]] = {}
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/stat") as f:
                ppid = int(f.read().rsplit(")", 1)[1].split()[1])
        except (OSError, IndexError, ValueError):
            continue
        children.setdefault(ppid, []).append(int(entry))
    out, stack = [], [root_pid]
    while stack:
        pid = stack.pop()
        out.append(pid)
        stack.extend(children.get(pid, []))
    return out


def _rss_bytes(pids: list[int]) -> int:
    """Resident memory of these processes together (those that have ended count 0)."""
    page = os.sysconf("SC_PAGE_SIZE")
    total = 0
    for pid in pids:
        try:
            with open(f"/proc/{pid}/statm") as f:
                total += int(f.read().split()[1]) * page
        except (OSError, IndexError, ValueError):
            continue
    return total


def _tree_rss_bytes(root_pid: int) -> int:
    """Resident memory of a process and all its descendants."""
    return _rss_bytes(_tree_pids(root_pid))


class PeakMemory:
    """Peak resident memory of this process and its descendants, sampled every 0.1 s
    from the processes found by the last scan of /proc; the scan (2 ms of CPU taken
    from the screen it measures) is repeated every 2 s, or at once when a process
    has ended (a worker replaced)."""

    RESCAN_EVERY = 20

    def __init__(self) -> None:
        self.peak = 0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def _run(self) -> None:
        pids: list[int] = []
        tick = 0
        while not self._stop.is_set():
            if tick % self.RESCAN_EVERY == 0 or not all(
                    os.path.exists(f"/proc/{pid}") for pid in pids):
                pids = _tree_pids(os.getpid())
            self.peak = max(self.peak, _rss_bytes(pids))
            tick += 1
            self._stop.wait(0.1)

    def __enter__(self):
        self._thread.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._thread.join()


def _cpu_seconds() -> float:
    """CPU seconds of this process and its finished children so far."""
    own = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def cached_universe(cache_dir: Path, n: int, quotes: int, days: int) -> tuple[Path, float]:
    """The universe folder, written once (a ``.complete`` marker says it is whole);
    returns (folder, seconds spent writing it, 0 when reused)."""
    folder = cache_dir / f"n{n}-q{quotes}-d{days}-s{SEED}"
    if (folder / ".complete").is_file():
        return folder, 0.0
    shutil.rmtree(folder, ignore_errors=True)
    start = time.perf_counter()
    write_universe(folder, n, quotes, days, seed=SEED)
    (folder / ".complete").write_text("written by bench_screen.py\n")
    return folder, time.perf_counter() - start


def _numbers_differ(lean: list[dict], full: list[dict]) -> tuple[float, list[str]]:
    """(largest relative difference of any number, text columns that differ)."""
    worst, texts = 0.0, []
    ref = {(r["code"], r["tenor_days"]): r for r in full}
    for r in lean:
        f = ref[(r["code"], r["tenor_days"])]
        for col, want in f.items():
            have = r.get(col)
            if isinstance(want, float) and isinstance(have, float):
                if want != have:
                    worst = max(worst, abs(have - want) / max(abs(want), 1e-12))
            elif have != want:
                texts.append(f"{r['code']} {r['tenor_days']} {col}")
    return worst, texts


def reference_run(folder: Path, n_reference: int) -> dict:
    """Full-cost rows, lean rows and lean rows with a warm fit cache (same history:
    the cached parameters held) of ``n_reference`` underlyings spread evenly over the
    universe (every k-th: the first ones alone are cheaper than the universe's
    median), in this process (one worker), alternating so that load changes hit all
    alike."""
    from optbench.volatility.distributions import _normal_to_t_table

    subset = Path(tempfile.mkdtemp(prefix="optbench-screen-ref-"))
    try:
        every = sorted(q for q in folder.iterdir() if q.is_dir())
        for p in every[::max(1, len(every) // n_reference)][:n_reference]:
            (subset / p.name).symlink_to(p, target_is_directory=True)
        cache = subset / ".fit-cache"
        screen(subset, workers=1, tenors=(30,), fit_cache=cache)   # warm imports; cache
        times = {"full": [], "lean": [], "cached": []}
        options = {"full": {"full": True}, "lean": {}, "cached": {"fit_cache": cache}}
        rows = {}
        for i in range(2):
            for mode in (("full", "lean", "cached") if i == 0 else ("cached", "lean", "full")):
                # each underlying builds its own t-quantile table in a real screen
                # (one per degrees of freedom, cached in process): start each mode cold
                _normal_to_t_table.cache_clear()
                w0, c0 = time.perf_counter(), time.process_time()
                result = screen(subset, workers=1, **options[mode])
                times[mode].append((time.perf_counter() - w0, time.process_time() - c0))
                rows[mode] = list(result.rows)
        worst, texts = _numbers_differ(rows["lean"], rows["full"])
        out = {"worst": worst, "texts": texts, "n": n_reference}
        for mode, pairs in times.items():
            out[mode] = (statistics.median(w for w, _ in pairs) / n_reference,
                         statistics.median(c for _, c in pairs) / n_reference)
        return out
    finally:
        shutil.rmtree(subset, ignore_errors=True)


def scaling(root: Path) -> None:
    """Seconds of one underlying, in this process, by chain size and history length
    (median of 3 underlyings each)."""
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
    parser.add_argument("--n", type=int, default=5000)
    parser.add_argument("--n-reference", type=int, default=20,
                        help="underlyings screened with the full-cost and the lean row")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--quotes", type=int, default=2000)
    parser.add_argument("--days", type=int, default=2500)
    parser.add_argument("--cache-dir", type=Path,
                        default=Path(tempfile.gettempdir()) / "optbench-bench-universe")
    parser.add_argument("--quick", action="store_true",
                        help="200 underlyings, 8 in the reference (indicative only)")
    parser.add_argument("--scaling", action="store_true",
                        help="instead: time one underlying by chain size and history length")
    a = parser.parse_args()
    if a.scaling:
        with tempfile.TemporaryDirectory() as tmp:
            scaling(Path(tmp))
        return
    if a.quick:
        a.n, a.n_reference = 200, 8
    folder, wrote = cached_universe(a.cache_dir, a.n, a.quotes, a.days)
    load0 = os.getloadavg()
    print(f"universe: {a.n} underlyings x ~{a.quotes} quotes x {a.days} days in {folder} "
          + (f"(written in {wrote:.0f} s)" if wrote else "(reused)"))
    print(f"load average at start: {load0[0]:.1f} {load0[1]:.1f} {load0[2]:.1f} "
          f"({os.cpu_count()} cores)")

    ref = reference_run(folder, min(a.n_reference, a.n))
    print(f"reference, {ref['n']} underlyings spread over the universe, in process "
          "(1 worker), median of 2:")
    for mode, label in (("full", "full-cost row"), ("lean", "lean row"),
                        ("cached", "lean row, warm fit cache")):
        w, c = ref[mode]
        print(f"  {label:25s}: {1e3 * w:6.0f} ms wall, {1e3 * c:6.0f} ms CPU per "
              "underlying")
    print(f"  lean against full: largest relative difference of any number "
          f"{ref['worst']:.1e} (tolerance 1e-9); text columns differing: "
          f"{len(ref['texts'])}{' ' + ', '.join(ref['texts'][:5]) if ref['texts'] else ''}")

    cpu0 = _cpu_seconds()
    with PeakMemory() as mem:
        start = time.perf_counter()
        result = screen(folder, workers=a.workers)
        wall = time.perf_counter() - start
    cpu = _cpu_seconds() - cpu0
    load1 = os.getloadavg()
    per = wall / a.n
    print(f"{a.workers} workers: {a.n} underlyings in {wall:7.1f} s  {1e3 * per:6.1f} ms "
          f"each  CPU {1e3 * cpu / a.n:6.1f} ms each (all processes)  peak memory "
          f"{mem.peak / 2**20:6.0f} MiB   failures: {len(result.failures)}")
    print(f"load average at end: {load1[0]:.1f} {load1[1]:.1f} {load1[2]:.1f}")
    # CPU seconds are the steadier figure on a shared machine: what the same work
    # takes on an otherwise idle machine with one core per worker (an estimate)
    full_s = ref["full"][1] * a.n / a.workers
    lean_s = ref["lean"][1] * a.n / a.workers
    print(f"CPU-bound estimates for {a.n} underlyings on {a.workers} idle cores: "
          f"full-cost row {full_s:.0f} s, lean row {lean_s:.0f} s (reference rows), "
          f"this screen's CPU of all processes {cpu / a.workers:.0f} s; measured wall "
          f"{wall:.0f} s")
    target = TARGET_S_PER_5000 * a.n / 5000
    figure(f"screen {a.n} underlyings, {a.workers} workers", wall, "s", target,
           reference=f"full-cost row {1e3 * ref['full'][1]:.0f} ms CPU/underlying -> "
                     f"{full_s:.0f} s on {a.workers} idle cores; load "
                     f"{load0[0]:.1f}-{load1[0]:.1f}")
    figure("screen peak memory, all processes", mem.peak / 2**20, "MiB", TARGET_MIB)
    figure("screen lean vs full-cost row, largest relative difference",
           ref["worst"] if not ref["texts"] else math.inf, "", 1e-9,
           reference=f"{ref['n']} underlyings, same run")


if __name__ == "__main__":
    main()
