"""Where the time of one screen row goes: a synthetic universe (as bench_screen.py
makes: ~2,000 quotes and ~2,500 days per underlying), ``screen_one`` profiled per
underlying, cumulative seconds of each stage (medians over underlyings), and the
cost of writing the rows.

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
    "smile fits": ("analysis/smile.py", "fit_svi"),
    "model fits": ("volatility/garch.py", "fit_garch"),
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


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=4)
    ap.add_argument("--quick", action="store_true")
    a = ap.parse_args()
    n = 2 if a.quick else a.n
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        write_universe(root, n=n)
        folders = sorted(p for p in root.iterdir() if p.is_dir())
        screen_one(ScreenTask(folder=str(folders[0])))      # warm up imports
        per, totals, rows_all = [], [], []
        for folder in folders:
            pr = cProfile.Profile()
            t0 = time.perf_counter()
            pr.enable()
            rows = screen_one(ScreenTask(folder=str(folder)))
            pr.disable()
            totals.append(time.perf_counter() - t0)
            rows_all += rows
            per.append(stage_seconds(pstats.Stats(pr)))
        t0 = time.perf_counter()
        pd.DataFrame(rows_all).to_csv(root / "screen.csv", index=False)
        write_s = (time.perf_counter() - t0) / len(folders)
    total = statistics.median(totals)
    print(f"one underlying of the synthetic universe ({n} underlyings, profiled; "
          "cProfile adds overhead, so read shares, not absolute seconds)")
    print(f"  total screen_one     {total:7.3f} s  (median)")
    for stage in STAGES:
        s = statistics.median(p[stage] for p in per)
        print(f"  {stage:20s} {s:7.4f} s  {100 * s / total:5.1f} %")
    print(f"  {'write (CSV)':20s} {write_s:7.3f} s  {100 * write_s / total:5.1f} %")
    figure("screen: one underlying, profiled", total, "s", None,
           reference="stage breakdown in docs/screening.md")


if __name__ == "__main__":
    sys.exit(main())
