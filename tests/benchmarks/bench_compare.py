"""Speed of ``optbench compare``: the bundled demo and a 20,000-quote chain.

Targets: ``optbench compare`` on the demo within 1.4x the start-up floor every Python
tool here pays, ``python -c "import numpy, pandas"``, whole process (and within 1.5 s
wall including the interpreter's start), and within 2 s for a 20,000-quote chain.
Printed side by side in the same run, because this machine is shared and noisy:

- the floor: ``python -c pass`` and ``python -c "import numpy, pandas"`` (no optbench
  code, nothing else: scipy is optbench's own cost and counts against it);
- ``optbench compare --format json`` on the demo and on the 20,000-quote chain, and
  the default terminal table on the large chain (medians of several runs, wall clock,
  new interpreter each time);
- the in-process stages of one comparison of the large chain;
- the reference library on the same job: vollib's scalar implied vol of the same
  20,000 mids (timed on a 2,000-quote sample and scaled), against optbench's
  vectorised bid/mid/ask vols, and their ratio.

Run: .venv/bin/python tests/benchmarks/bench_compare.py [--repeats N]
"""
from __future__ import annotations

import argparse
import datetime as _dt
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd
from timing import CPU, figure, wall  # noqa: E402  (tests/benchmarks)

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"
PY = sys.executable


def big_chain(folder: Path, n_expiries: int = 20, n_strikes: int = 620) -> Path:
    """A 20,000-quote chain on the demo's history: an invented skewed smile priced
    with optbench's BSM, bid/ask around it (no real market)."""
    from optbench.pricing.bsm import bsm_price
    hist = pd.read_csv(DEMO / "history.csv")
    asof = _dt.date.fromisoformat(hist["date"].iloc[-1])
    spot = float(hist["close"].iloc[-1])
    days = np.unique(np.geomspace(7, 730, n_expiries).round().astype(int))
    while days.size < n_expiries:
        days = np.unique(np.append(days, days.max() + 7 * (n_expiries - days.size)))
    strikes = np.linspace(0.5, 1.5, n_strikes) * spot
    D, K, C = np.meshgrid(days, strikes, [True, False], indexing="ij")
    D, K, C = D.ravel(), K.ravel(), C.ravel()
    t = D / 365
    k = np.log(K / spot)
    vol = 0.18 - 0.12 * k + 0.25 * k ** 2
    price = bsm_price(spot, K, t, 0.04, 0.015, vol, C)
    half = np.maximum(0.01, 0.01 * price)
    frame = pd.DataFrame({
        "underlying": "ZPHX", "quote_date": asof.isoformat(), "underlying_price": spot,
        "expiry": [(asof + _dt.timedelta(days=int(d))).isoformat() for d in D],
        "strike": K.round(2), "type": np.where(C, "C", "P"),
        "bid": np.maximum(price - half, 0.0).round(4), "ask": (price + half).round(4)})
    frame = frame[frame["bid"] > 0].head(20_000)
    folder.mkdir(parents=True, exist_ok=True)
    frame.to_csv(folder / "chain.csv", index=False)
    hist.to_csv(folder / "history.csv", index=False)
    (folder / "meta.toml").write_text((DEMO / "meta.toml").read_text())
    return folder


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args()
    n = args.repeats
    with tempfile.TemporaryDirectory() as tmp:
        big = big_chain(Path(tmp) / "BIG")
        n_quotes = len(pd.read_csv(big / "chain.csv"))
        print(f"medians of {n} runs, seconds (wall; CPU in brackets: on a loaded "
              "machine wall exceeds CPU)")
        base = wall([PY, "-c", "pass"], n)
        floor = wall([PY, "-c", "import numpy, pandas"], n)
        demo = wall([PY, "-m", "optbench", "compare", str(DEMO), "--format", "json"], n)
        demo_gjr = wall([PY, "-m", "optbench", "compare", str(DEMO), "--model", "gjr",
                         "--format", "json"], n)
        large = wall([PY, "-m", "optbench", "compare", str(big), "--format", "json"], n)
        large_table = wall([PY, "-m", "optbench", "compare", str(big)], n)
        cpu = iter(CPU.values())
        print(f"{'python -c pass':<44}{base:8.2f} [{next(cpu):5.2f}]")
        floor_cpu = next(cpu)
        print(f"{'floor: import numpy, pandas':<44}{floor:8.2f} [{floor_cpu:5.2f}]")
        cpus = dict(zip(("demo", "demo_gjr", "large", "large_table"), cpu))
        for label, secs, key, target in (
                ("optbench compare demo (model auto)", demo, "demo", "1.4x floor, 1.5 s"),
                ("optbench compare demo (--model gjr)", demo_gjr, "demo_gjr",
                 "1.4x floor, 1.5 s"),
                (f"compare {n_quotes:,} quotes, JSON (auto)", large, "large", "2.0 s"),
                (f"compare {n_quotes:,} quotes, table (auto)", large_table, "large_table",
                 "2.0 s")):
            print(f"{label:<44}{secs:8.2f} [{cpus[key]:5.2f}]   {secs / floor:4.2f}x floor "
                  f"[{cpus[key] / floor_cpu:4.2f}x]   target {target}   over the floor "
                  f"{secs - floor:5.2f}")
        ref = f"import numpy, pandas ({floor:.2f} s wall, {floor_cpu:.2f} s CPU)"
        for name, secs, key, target in (
                ("compare demo (auto) / floor", demo, "demo", 1.4),
                ("compare demo (--model gjr) / floor", demo_gjr, "demo_gjr", 1.4),
                (f"compare {n_quotes:,} quotes JSON / floor", large, "large", None),
                (f"compare {n_quotes:,} quotes table / floor", large_table, "large_table",
                 None)):
            figure(f"{name}, wall", secs / floor, "x", target, reference=ref)
            figure(f"{name}, CPU", cpus[key] / floor_cpu, "x", target, reference=ref)
        figure("compare demo (auto), wall", demo, "s", 1.5)
        figure(f"compare {n_quotes:,} quotes JSON, wall", large, "s", 2.0)
        figure(f"compare {n_quotes:,} quotes table, wall", large_table, "s", 2.0)

        from optbench.analysis.compare import compare
        stamps = []
        t0 = time.perf_counter()
        c = compare(big, progress=lambda s: stamps.append((time.perf_counter(), s)))
        stamps.append((time.perf_counter(), "done"))
        print("\nin-process stages, large chain:")
        prev_t, prev_s = t0, "start"
        for ts, s in stamps:
            print(f"  {prev_s:<44}{ts - prev_t:8.3f}")
            prev_t, prev_s = ts, s

        # reference: vollib's scalar implied vol on the same mids
        from vollib.black_scholes_merton.implied_volatility import implied_volatility
        from optbench.pricing.implied import black_implied_vol_with_status
        q = c.strike_frame()
        sample = q.sample(2000, random_state=1) if len(q) > 2000 else q
        t_fn = np.array([(e.date() - c.asof).days / 365 for e in sample["expiry"]])
        t1 = time.perf_counter()
        for (_, rec), tt in zip(sample.iterrows(), t_fn):
            try:
                implied_volatility(rec["mid"], c.spot, rec["strike"], tt, c.rate, c.div_yield,
                                   "c" if rec["is_call"] else "p")
            except Exception:   # vollib raises below intrinsic
                pass
        vollib_s = (time.perf_counter() - t1) * len(q) / len(sample)
        tq = np.array([(e.date() - c.asof).days / 365 for e in q["expiry"]])
        F = c.spot * np.exp((c.rate - c.div_yield) * tq)
        Dd = np.exp(-c.rate * tq)
        prices = q[["bid", "mid", "ask"]].to_numpy(float).T
        ours = []
        for _ in range(5):
            t2 = time.perf_counter()
            black_implied_vol_with_status(prices, F, q["strike"].to_numpy(float), tq, Dd,
                                          q["is_call"].to_numpy(bool))
            ours.append(time.perf_counter() - t2)
        ours_s = statistics.median(ours)
        print(f"\nimplied vols of {len(q):,} quotes")
        print(f"  vollib, mids only (scalar loop, scaled)   {vollib_s:8.3f}")
        print(f"  optbench, bid+mid+ask (vectorised)        {ours_s:8.3f}")
        print(f"  ratio vollib / optbench (3x the vols)     {vollib_s / ours_s:8.1f}")


if __name__ == "__main__":
    main()
