"""Speed of the protection menu on the demo portfolio.

Target (portfolio insurance): ``optbench hedge --holdings ... --menu`` on the demo —
about 8 expiries x 9 floors x 3 structures on 20,000 joint paths — within 2 s wall
including the interpreter's start. Printed side by side in the same run, because
this machine is shared and noisy:

- the floor every run pays: ``python -c pass``;
- ``optbench compare --format json`` on the demo (the comparison the hedge starts from);
- ``optbench hedge --holdings ... --menu --format json`` with the default expiry range
  (30-366 days: 4 demo expiries) and with every demo expiry (``--menu-days 1:800``:
  8 expiries x 9 floors x 3 structures = 216 choices);
- in process: the menu stage alone (joint simulation + every row), against building
  the same rows one by one with the single-hedge path (``hedge_from_comparison`` per
  row, each with its own simulation, and the ES by a full sort), timed on a sample of
  rows and scaled, and their ratio.

Run: .venv/bin/python tests/benchmarks/bench_menu.py [--repeats N]
"""
from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from timing import CPU, figure, median_time, wall  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"
PY = sys.executable


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=5)
    n = ap.parse_args().repeats
    ob = [PY, "-m", "optbench"]
    hedge = ob + ["hedge", str(DEMO), "--holdings", str(DEMO / "holdings.csv"), "--menu",
                  "--paths", "20000", "--format", "json"]
    cmds = [("python -c pass", [PY, "-c", "pass"]),
            ("optbench compare (demo)", ob + ["compare", str(DEMO), "--format", "json"]),
            ("optbench hedge --menu (30-366 days)", hedge),
            ("optbench hedge --menu --menu-days 1:800", hedge + ["--menu-days", "1:800"])]
    print(f"median of {n} fresh processes (target: hedge --menu <= 2 s wall)")
    print(f"  {'':<42} {'wall':>9} {'cpu':>9}")
    times = {}
    for name, cmd in cmds:
        t = times[name] = wall(cmd, n)
        print(f"  {name:<42} {t:7.3f} s {CPU[' '.join(cmd)]:7.3f} s")
    figure("optbench hedge --menu on the demo, wall", times["optbench hedge --menu (30-366 days)"],
           "s", 2.0, reference=f"python -c pass {times['python -c pass']:.2f} s, same run")

    from optbench.analysis.compare import compare
    from optbench.analysis.hedge import hedge_from_comparison, leg_payoff
    from optbench.analysis.portfolio import fit_portfolio, portfolio_hedge
    from optbench.analysis.results import HedgeRequest
    from optbench.data.holdings import load_holdings, load_price_panel
    c = compare(DEMO, n_paths=2000, seed=7)
    h = load_holdings(DEMO / "holdings.csv")
    pf = fit_portfolio(c.history["date"].to_numpy(), c.history["ret"].to_numpy(), holdings=h,
                       panel=load_price_panel(DEMO / "holdings_history.csv", h.symbols))
    req = HedgeRequest(1.0, floor=0.9, days=91)
    t_menu = median_time(lambda: portfolio_hedge(c, req, portfolio=pf, menu=True,
                                                 menu_days=(1, 800), n_paths=20000),
                         repeats=max(3, n // 2))
    ph = portfolio_hedge(c, req, portfolio=pf, menu=True, menu_days=(1, 800), n_paths=20000)
    menu = ph.menu.frame
    sample = menu.iloc[:: max(1, len(menu) // 12)]

    def one_by_one():
        for r in sample.itertuples():
            e = hedge_from_comparison(c, HedgeRequest(pf.value, beta=pf.beta.beta,
                                                      floor=r.floor, expiry=r.expiry,
                                                      structure=r.structure), n_paths=20000)
            sim = c.fit.simulate(e.trading_days, n_paths=20000, seed=1).returns.sum(axis=1)
            s_t = e.spot * np.exp(sim)
            k = np.array([leg.strike for leg in e.legs])
            cc = np.array([leg.type == "C" for leg in e.legs])
            s = np.array([1.0 if leg.side == "buy" else -1.0 for leg in e.legs])
            pnl = pf.value * np.expm1(pf.beta.beta * sim) + leg_payoff(s_t, k, cc, s) * \
                e.contracts * e.multiplier - e.premium_paid
            np.sort(pnl)[:200].mean()
    t_one = median_time(one_by_one, repeats=3) * len(menu) / len(sample)
    print(f"in process, {len(menu)} menu rows ({menu['expiry'].nunique()} expiries), 20,000 "
          "joint paths")
    print(f"  optbench menu (vectorised, one simulation)  {t_menu:7.3f} s")
    print(f"  row by row with the single-hedge path       {t_one:7.3f} s  (scaled from "
          f"{len(sample)} rows)")
    print(f"  ratio                                       {t_one / t_menu:7.1f} x")


if __name__ == "__main__":
    main()
