"""Where the time of one screen row goes: a synthetic universe (as bench_screen.py
makes: ~2,000 quotes and ~2,500 days per underlying), ``screen_one`` profiled per
underlying, cumulative seconds of each stage (medians over underlyings), and the
cost of writing the rows — side by side in the same run for the full-cost row
(``full=True``: the hedge simulated again per tenor), the lean row (the default) and
the lean row with a warm fit cache (the model filtered from cached parameters).

Stages (cumulative time of the named function; nested stages are not double
counted in "other"): load (scenario files), implied vols, smile fits, model fits
(every ``auto`` candidate), forecast and bands, simulation (terminal draws), hedge
estimate, write (rows to CSV, timed apart).

Run: .venv/bin/python tests/benchmarks/profile_screen_row.py [--n 4] [--quick]
"""
from __future__ import annotations

import argparse
import cProfile
import pstats
import statistics
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd
from synthetic_universe import write_universe
from timing import figure  # noqa: E402  (tests/benchmarks)

from optbench.screening.rows import ScreenTask, screen_one

#: stage -> (module path fragment, function name); the cumulative time of each
STAGES = {
    "load": ("data/scenario.py", "load_scenario"),
    "implied forwards": ("pricing/forwards.py", "implied_forwards"),
    "implied vols": ("analysis/compare.py", "_quote_vols"),
    "smile fits": ("analysis/smile.py", "fit_svi_many"),
    "model fits": ("volatility/garch.py", "fit_garch"),
    "cached fit (filter)": ("volatility/garch.py", "fix_garch"),
    "forecast": ("volatility/garch.py", "forecast_vol"),
    "forecast bands": ("volatility/garch.py", "forecast_band"),
    "out-of-sample check": ("analysis/compare.py", "_backtest"),
    "model-free vols": ("analysis/compare.py", "_model_free_vols"),
    "arbitrage checks": ("analysis/arbitrage.py", "strike_arbitrage"),
    "simulation": ("analysis/drift.py", "simulate_terminal"),
    "hedge": ("analysis/hedge.py", "hedge_from_comparison"),
}


def stage_seconds(stats: pstats.Stats) -> dict[str, float]:
    out = {k: 0.0 for k in STAGES}
    for (file, _line, func), (_cc, _nc, _tt, ct, callers) in stats.stats.items():
        for stage, (frag, name) in STAGES.items():
            if func == name and file.replace("\\", "/").endswith(frag):
                # count only calls from outside the function itself (no recursion)
                out[stage] += ct
    return out


def profile_row(folder, **task) -> tuple[dict, float, list[dict]]:
    """Stage seconds, total seconds and rows of one underlying, profiled; the
    t-quantile table of the simulation is cleared first (it is cached per degrees of
    freedom, and each underlying has its own)."""
    from optbench.volatility.distributions import _normal_to_t_table
    _normal_to_t_table.cache_clear()
    # CPU seconds, not wall: on a shared machine the wall clock mostly measures the
    # other work
    pr = cProfile.Profile(time.process_time)
    t0 = time.process_time()
    pr.enable()
    rows = screen_one(ScreenTask(folder=str(folder), **task))
    pr.disable()
    return stage_seconds(pstats.Stats(pr)), time.process_time() - t0, rows


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=4)
    ap.add_argument("--quick", action="store_true")
    a = ap.parse_args()
    n = 2 if a.quick else a.n
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp) / "universe"
        write_universe(root, n=n)
        cache = str(Path(tmp) / "fit-cache")
        folders = sorted(p for p in root.iterdir() if p.is_dir())
        screen_one(ScreenTask(folder=str(folders[0])))      # warm up imports
        modes = {"full": {"full": True}, "lean": {},
                 "lean, cached fit": {"fit_cache": cache}}
        for folder in folders:                               # fill the fit cache
            screen_one(ScreenTask(folder=str(folder), fit_cache=cache))
        results = {m: ([], [], []) for m in modes}
        for folder in folders:            # modes interleaved: load changes hit all alike
            for mode, task in modes.items():
                stages, total, rows = profile_row(folder, **task)
                results[mode][0].append(stages)
                results[mode][1].append(total)
                results[mode][2].extend(rows)
        rows_all = results["lean"][2]
        t0 = time.perf_counter()
        pd.DataFrame(rows_all).to_csv(Path(tmp) / "screen.csv", index=False)
        write_s = (time.perf_counter() - t0) / len(folders)
    print(f"one underlying of the synthetic universe ({n} underlyings, profiled, CPU "
          "seconds; cProfile adds overhead, so read shares, not absolute seconds)")
    print(f"  {'stage':20s} " + "".join(f"{m:>24s}" for m in modes))
    totals = {m: statistics.median(results[m][1]) for m in modes}
    print(f"  {'total screen_one':20s} " + "".join(
        f"{totals[m]:12.3f} s (100 %)" + " " * 0 for m in modes))
    for stage in STAGES:
        cells = []
        for m in modes:
            sec = statistics.median(p[stage] for p in results[m][0])
            cells.append(f"{sec:12.4f} s {100 * sec / totals[m]:5.1f} %")
        print(f"  {stage:20s} " + "".join(f"{c:>24s}" for c in cells))
    print(f"  {'write (CSV)':20s} {write_s:12.4f} s {100 * write_s / totals['lean']:5.1f} %")
    figure("screen: one underlying, profiled (lean row)", totals["lean"], "s", None,
           reference=f"full-cost row {totals['full']:.3f} s in the same run; stage "
                     "breakdown in docs/screening.md")


if __name__ == "__main__":
    sys.exit(main())
