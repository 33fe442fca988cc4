"""Speed of the terminal workbench on this machine.

    .venv/bin/python tests/benchmarks/bench_tui.py [--rounds 5]

Prints medians (and worst cases) of:

1. launch to the first useful screen on the demo (the overview with its headline),
   a fresh interpreter each round, side by side with ``optbench compare --format
   json`` on the same demo measured in the same run (the command-line reference);
2. switching between the seven views (the key's action to the repainted screen:
   every message handled, layout, compositor and paint done);
3. a chain of more than 20,000 quotes (the demo chain densified to 1-point strikes,
   about 33,500 quotes, by linear interpolation of the quotes between listed
   strikes, which keeps them free of static arbitrage): launch to the first useful
   screen, the longest gap of the event loop while the core works in its thread (how
   long the screen could not answer), and view switching once it is loaded.

0. what a user sees: ``optbench`` started as a new process in a real terminal
   (a detached tmux session, 120 x 40), the screen polled with ``tmux capture-pane``
   every 50 ms until the overview's numbers (an expiry row with its ATM IV and
   forecast) and the status "ready" are on screen; side by side with the floor every
   Python tool here pays, ``python -c "import numpy, pandas"``, in alternating
   rounds, and with the same start without the early fork (``OPTBENCH_EARLY=0``:
   the first run forks only after numpy, pandas and the core are imported). Wall clock only (the polling itself costs a little CPU, so the figure is
   if anything pessimistic). optbench's modules are compiled to bytecode first, as a
   plain install has them (``bench_startup.py`` does the same; an editable checkout
   under PYTHONDONTWRITEBYTECODE=1 compiles them from source at every start).

Targets: workbench ready in a terminal within 1.8x the floor (issue 15); first
useful screen within 2 s, view switches within 100 ms, the 20,000-quote chain stays
responsive (issue 6).
"""
from __future__ import annotations

import argparse
import json
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd
from timing import figure  # noqa: E402  (tests/benchmarks)

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"

DRIVER = r"""
import asyncio, json, sys, time
t_start = float(sys.argv[2])
from optbench.tui.app import make_app
from optbench.tui.screens.workbench import VIEWS

async def main():
    app = make_app(sys.argv[1])
    gaps, last = [], [time.perf_counter()]
    def tick():
        now = time.perf_counter(); gaps.append(now - last[0]); last[0] = now
    out = {}
    async with app.run_test(size=(120, 40)) as pilot:
        app.set_interval(0.01, tick)
        while app.comparison is None and app.error is None:
            await asyncio.sleep(0.005)
        await pilot._wait_for_screen()
        app.screen._on_timer_update()   # lay out and paint now
        out["first_screen_s"] = time.time() - t_start
        out["error"] = app.error
        while not (app.checked or app.error):
            await asyncio.sleep(0.01)
        out["checked_s"] = time.time() - t_start
        out["max_gap_ms"] = 1000 * max(gaps) if gaps else None
        out["p95_gap_ms"] = 1000 * float(sorted(gaps)[int(0.95 * (len(gaps) - 1))]) if gaps else None
        await app.workers.wait_for_complete()
        await pilot.pause()
        switches = []
        for _ in range(3):
            for view_id, key, _ in VIEWS:
                t = time.perf_counter()
                app.action_view(view_id)          # what the view's key does
                await pilot._wait_for_screen()    # every message it caused is handled
                app.screen._on_timer_update()     # layout, compositor and paint
                switches.append(1000 * (time.perf_counter() - t))
        out["switch_ms"] = switches
        out["quotes"] = int(app.comparison.quality["rows_used"]) if app.comparison else 0
    print(json.dumps(out))

asyncio.run(main())
"""


def run_driver(chain: Path) -> dict:
    t0 = time.time()
    out = subprocess.run([sys.executable, "-c", DRIVER, str(chain), repr(t0)],
                         capture_output=True, text=True, cwd=ROOT, timeout=600)
    if out.returncode != 0:
        raise SystemExit(f"driver failed:\n{out.stderr[-2000:]}")
    return json.loads(out.stdout.strip().splitlines()[-1])


def cli_compare_seconds(chain: Path) -> float:
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, "-m", "optbench", "compare", str(chain),
                          "--format", "json"], capture_output=True, text=True, cwd=ROOT,
                         timeout=600)
    if out.returncode != 0:
        raise SystemExit(f"optbench compare failed: {out.stderr[-500:]}")
    return time.perf_counter() - t0


def dense_chain(folder: Path, step: float = 1.0) -> int:
    """Write the demo densified to ``step``-point strikes into ``folder``; returns rows."""
    raw = pd.read_csv(DEMO / "chain.csv", dtype=str)
    for col in ("strike", "bid", "ask", "last", "volume", "open_interest"):
        raw[col] = pd.to_numeric(raw[col], errors="coerce")
    raw = raw.dropna(subset=["strike", "bid", "ask"])
    raw = raw[(raw["bid"] > 0) & (raw["ask"] > raw["bid"])]
    raw = raw.drop_duplicates(["expiry", "type", "strike"])
    parts = []
    for (expiry, kind), g in raw.groupby(["expiry", "type"]):
        g = g.sort_values("strike")
        k = g["strike"].to_numpy()
        grid = np.arange(k.min(), k.max() + 1e-9, step)
        part = pd.DataFrame({"strike": grid})
        for col in ("bid", "ask", "last"):
            part[col] = np.round(np.interp(grid, k, g[col].to_numpy(float)), 2)
        for col in ("volume", "open_interest"):
            part[col] = np.interp(grid, k, g[col].fillna(0).to_numpy(float)).astype(int)
        first = g.iloc[0]
        for col in ("underlying", "quote_date", "underlying_price", "style", "multiplier"):
            part[col] = first[col]
        part["expiry"], part["type"] = expiry, kind
        parts.append(part)
    chain = pd.concat(parts, ignore_index=True)
    chain = chain[["underlying", "quote_date", "underlying_price", "expiry", "strike", "type",
                   "bid", "ask", "last", "volume", "open_interest", "style", "multiplier"]]
    chain.to_csv(folder / "chain.csv", index=False)
    for name in ("history.csv", "meta.toml"):
        (folder / name).write_bytes((DEMO / name).read_bytes())
    return len(chain)


#: an overview row: expiry date, calendar days, then the ATM implied vol and the
#: forecast as numbers (the verdict table has no vertical rules)
_OVERVIEW_ROW = re.compile(r"\d{4}-\d{2}-\d{2}\s+\d+\s+\d+\.\d\s+\d+\.\d")


#: rounds started by :func:`terminal_ready_seconds` in this process (tmux session names)
_ROUND = 0


def terminal_ready_seconds(timeout: float = 60.0, env: str = "") -> tuple[float, float]:
    """(numbers on screen, "ready" on screen) seconds after ``optbench`` is started
    in a new 120 x 40 tmux session on the bundled demo; ``env``: ``NAME=value``
    settings put before the command."""
    global _ROUND
    _ROUND += 1
    name = f"optbench-bench-{os.getpid()}-{_ROUND}"     # a fresh name every round
    exe = str(Path(sys.executable).with_name("optbench"))
    for attempt in range(3):
        t0 = time.perf_counter()
        started = subprocess.run(["tmux", "new-session", "-d", "-s", name, "-x", "120",
                                  "-y", "40", f"cd {ROOT} && {env} {exe}"],
                                 capture_output=True, text=True)
        if started.returncode == 0:
            break
        # the tmux server of the previous round may still be exiting (it ends with
        # its last session): wait a moment and start again, timing from then
        print(f"  (tmux new-session failed: {started.stderr.strip() or started.returncode};"
              " retrying)", file=sys.stderr)
        time.sleep(0.5)
    else:
        raise SystemExit(f"tmux new-session failed 3 times: {started.stderr.strip()}")
    numbers = ready = float("nan")
    try:
        while time.perf_counter() - t0 < timeout:
            screen = subprocess.run(["tmux", "capture-pane", "-p", "-t", name],
                                    capture_output=True, text=True).stdout
            now = time.perf_counter() - t0
            if numbers != numbers and _OVERVIEW_ROW.search(screen):
                numbers = now
            if numbers == numbers and re.search(r"\bready\b", screen):
                ready = now
                break
            time.sleep(0.05)
    finally:
        subprocess.run(["tmux", "kill-session", "-t", name], capture_output=True)
    if ready != ready:
        raise SystemExit(f"workbench not ready within {timeout:.0f} s in tmux")
    return numbers, ready


def floor_seconds() -> float:
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-c", "import numpy, pandas"], check=True)
    return time.perf_counter() - t0


def _load() -> str:
    """The 1, 5 and 15-minute load averages (what else this shared machine runs)."""
    try:
        return " ".join(f"{x:.2f}" for x in os.getloadavg())
    except OSError:
        return "unknown"


def summary(values: list[float]) -> str:
    return f"median {statistics.median(values):7.3f}   worst {max(values):7.3f}"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=5)
    parser.add_argument("--quick", action="store_true", help="2 rounds")
    parser.add_argument("--terminal-only", action="store_true",
                        help="only figure 0 (the real terminal against the floor)")
    args = parser.parse_args()
    if args.quick:
        args.rounds = 2

    print(f"optbench workbench benchmark, {args.rounds} rounds (medians; this machine is "
          f"shared, so compare within one run); load average {_load()} on "
          f"{os.cpu_count()} cores\n")
    if shutil.which("tmux"):
        import compileall
        compileall.compile_dir(ROOT / "optbench", quiet=1)
        floor, shown, ready, ordinary = [], [], [], []
        for _ in range(args.rounds):
            floor.append(floor_seconds())
            n, r = terminal_ready_seconds()
            shown.append(n)
            ready.append(r)
            ordinary.append(terminal_ready_seconds(env="OPTBENCH_EARLY=0")[1])
        f = statistics.median(floor)
        print("0. demo in a real terminal (tmux 120 x 40), new process, wall (s)")
        print(f"   overview numbers on screen {summary(shown)}   "
              f"({statistics.median(shown) / f:.2f}x floor)")
        print(f"   status 'ready' on screen   {summary(ready)}   "
              f"({statistics.median(ready) / f:.2f}x floor)")
        print(f"   floor: import numpy, pandas {summary(floor)}   (same run; load average "
              f"now {_load()})")
        print(f"   'ready' without the early start (OPTBENCH_EARLY=0) {summary(ordinary)}   "
              f"({statistics.median(ordinary) / f:.2f}x floor)")
        figure("workbench ready in a terminal / floor", statistics.median(ready) / f, "x",
               1.8, reference="python -c 'import numpy, pandas', same run")
        figure("workbench numbers in a terminal / floor", statistics.median(shown) / f, "x",
               None, reference="python -c 'import numpy, pandas', same run")
    else:
        print("0. tmux not found: the real-terminal figure is not measured")
    if args.terminal_only:
        return

    tui, cli = [], []
    switches: list[float] = []
    checked, demo_gaps = [], []
    for _ in range(args.rounds):
        r = run_driver(DEMO)
        if r["error"]:
            raise SystemExit(r["error"])
        tui.append(r["first_screen_s"])
        checked.append(r["checked_s"])
        demo_gaps.append(r["max_gap_ms"])
        switches += r["switch_ms"]
        cli.append(cli_compare_seconds(DEMO))
    print("1. demo, launch to the first useful screen (s)")
    print(f"   workbench overview       {summary(tui)}")
    print(f"   optbench compare --json  {summary(cli)}   (reference, same run)")
    print(f"   ratio workbench / compare  {statistics.median(tui) / statistics.median(cli):.2f}")
    print(f"   model check on screen    {summary(checked)}")
    print(f"   longest event-loop gap while computing (ms)  {summary(demo_gaps)}")
    print("2. demo, switching views (ms)")
    print(f"   action to repaint        {summary(switches)}   over {len(switches)} switches")
    figure("workbench view switch, median", statistics.median(switches) * 1e-3, "s", 0.1)

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp) / "DENSE"
        folder.mkdir()
        rows = dense_chain(folder)
        big_tui, big_cli, gaps, big_switch = [], [], [], []
        for _ in range(max(2, args.rounds // 2)):
            r = run_driver(folder)
            if r["error"]:
                raise SystemExit(r["error"])
            big_tui.append(r["first_screen_s"])
            gaps.append(r["max_gap_ms"])
            big_switch += r["switch_ms"]
            big_cli.append(cli_compare_seconds(folder))
        print(f"3. {rows:,}-quote chain ({r['quotes']:,} used)")
        print(f"   workbench overview (s)   {summary(big_tui)}")
        print(f"   optbench compare (s)     {summary(big_cli)}   (reference, same run)")
        print(f"   longest event-loop gap while computing (ms)  {summary(gaps)}")
        print(f"   switching views (ms)     {summary(big_switch)}")


if __name__ == "__main__":
    main()
