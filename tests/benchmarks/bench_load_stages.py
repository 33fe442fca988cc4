"""The first stages of every comparison and every screen row, in-process (component
figures): loading and validating a scenario (chain, history, meta.toml), the implied
forwards and the bid/mid/ask implied vols of every quote — on the bundled demo and on
synthetic underlyings as ``bench_screen.py`` makes them (~2,000 quotes, ~2,500 days).

Side by side, in the same run: the reference floor of the load, a bare
``pandas.read_csv`` of the same chain and history files. CPU seconds
(``time.process_time``; the wall clock on a shared machine mostly measures the other
work), medians over repeats after one warm-up call.

Run: .venv/bin/python tests/benchmarks/bench_load_stages.py [--repeats 15] [--n 4]
     [--json]   (one JSON line of the medians, for comparing two checkouts)
"""
from __future__ import annotations

import argparse
import json
import statistics
import sys
import tempfile
from pathlib import Path

import pandas as pd
from synthetic_universe import write_universe
from timing import figure, median_cpu  # noqa: E402  (tests/benchmarks)

from optbench.analysis.compare import _quote_vols
from optbench.data.scenario import load_scenario
from optbench.pricing.forwards import implied_forwards

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"


def stages(folder: Path, repeats: int) -> dict[str, float]:
    """Median CPU seconds of each stage on one scenario folder."""
    sc = load_scenario(folder)
    ch = sc.chain
    q = ch.quotes[ch.quotes["t"] > 0].reset_index(drop=True)
    fwd = implied_forwards(q, ch.spot, ch.rate, ch.div_yield)
    chain_file = next(folder / n for n in ("chain.csv", "chain.parquet")
                      if (folder / n).is_file())
    return {
        "load": median_cpu(lambda: load_scenario(folder), repeats),
        "implied forwards": median_cpu(
            lambda: implied_forwards(q, ch.spot, ch.rate, ch.div_yield), repeats),
        "implied vols": median_cpu(lambda: _quote_vols(q, fwd, ch.spot), repeats),
        "read_csv (reference)": median_cpu(
            lambda: (pd.read_csv(chain_file), pd.read_csv(folder / "history.csv")), repeats),
    }


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=15)
    ap.add_argument("--n", type=int, default=4)
    ap.add_argument("--json", action="store_true")
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folders = write_universe(Path(tmp) / "universe", n=a.n)
        demo = stages(DEMO, a.repeats)
        per_row = [stages(Path(f), a.repeats) for f in folders]
    row = {k: statistics.median(r[k] for r in per_row) for k in per_row[0]}
    if a.json:
        print(json.dumps({"demo": demo, "row": row}))
        return
    print(f"CPU ms, medians of {a.repeats} (synthetic row: median over {a.n} underlyings)")
    print(f"  {'stage':24s} {'demo (ZPHX)':>12s} {'synthetic row':>14s}")
    for k in demo:
        print(f"  {k:24s} {1000 * demo[k]:12.2f} {1000 * row[k]:14.2f}")
    floor = row["read_csv (reference)"]
    total = row["load"] + row["implied forwards"] + row["implied vols"]
    figure("load + forwards + implied vols, one synthetic row (CPU)", total, "s", None,
           reference=f"pandas.read_csv of its two files {floor:.4f} s in the same run")
    figure("load + forwards + implied vols, demo (CPU)",
           demo["load"] + demo["implied forwards"] + demo["implied vols"], "s", None,
           reference=f"pandas.read_csv of its two files "
                     f"{demo['read_csv (reference)']:.4f} s in the same run")


if __name__ == "__main__":
    sys.exit(main())
