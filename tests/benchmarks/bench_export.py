"""Time and memory of the XLSX exports of a 200,000-quote chain.

Target: the workbook of a 200,000-row chain (``compare``'s per-strike sheet, and
``check``'s rejected rows) written in under 30 s with its peak memory within 5× the
input file's size. Printed side by side in the same run, because this machine is
shared and noisy:

- the input: rows and CSV size of the invented chain (a skewed smile priced with
  optbench's BSM on the demo's history; about one row in ten broken so that ``check``
  has rows to reject);
- optbench's streamed workbooks: ``comparison_xlsx`` (every strike row) and
  ``chain_xlsx`` (every rejected row), median wall seconds of several runs, and the
  peak of Python allocations during one export (``tracemalloc``, numpy included) as a
  multiple of the input size;
- the reference on the same per-strike table: ``pandas.DataFrame.to_excel`` with
  openpyxl, timed and measured on a slice (default 20,000 rows, ``--reference-rows``)
  and scaled linearly to the full table (time) — say ``--reference-rows 0`` for the
  whole table, which takes minutes.

Run: .venv/bin/python tests/benchmarks/bench_export.py [--rows 200000] [--repeats 3]
"""
from __future__ import annotations

import argparse
import datetime as _dt
import io
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))
from timing import figure, median_time  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"


def big_chain(folder: Path, rows: int) -> Path:
    """An invented chain of about ``rows`` quotes (40 expiries) with one row in ten
    broken (crossed quotes, missing bid, text in a number) on the demo's history."""
    from optbench.pricing.bsm import bsm_price
    hist = pd.read_csv(DEMO / "history.csv")
    asof = _dt.date.fromisoformat(hist["date"].iloc[-1])
    spot = float(hist["close"].iloc[-1])
    n_exp = 40
    n_strikes = -(-rows // (2 * n_exp))
    days = np.unique(np.geomspace(7, 730, n_exp).round().astype(int))
    days = np.unique(np.concatenate([days, np.arange(1, n_exp + 1) * 19]))[:n_exp]
    strikes = np.linspace(0.3, 2.0, n_strikes) * spot
    D, K, C = np.meshgrid(days, strikes, [True, False], indexing="ij")
    D, K, C = D.ravel()[:rows], K.ravel()[:rows], C.ravel()[:rows]
    t = D / 365
    k = np.log(K / spot)
    vol = 0.18 - 0.12 * k + 0.25 * k ** 2
    price = bsm_price(spot, K, t, 0.04, 0.015, vol, C)
    half = np.maximum(0.01, 0.01 * price)
    bid = np.maximum(price - half, 0.01).round(4).astype(str).astype(object)
    ask = (price + half).round(4).astype(str).astype(object)
    broken = np.arange(rows) % 10 == 3
    bid[broken] = np.where(np.arange(broken.sum()) % 2, "", "=1+2")
    expiry = (np.datetime64(asof) + D.astype("timedelta64[D]")).astype(str)
    frame = pd.DataFrame({
        "underlying": "ZPHX", "quote_date": asof.isoformat(), "underlying_price": spot,
        "expiry": expiry, "strike": K.round(2), "type": np.where(C, "C", "P"),
        "bid": bid, "ask": ask, "volume": 10, "open_interest": 100})
    folder.mkdir(parents=True, exist_ok=True)
    frame.to_csv(folder / "chain.csv", index=False)
    (folder / "history.csv").write_bytes((DEMO / "history.csv").read_bytes())
    (folder / "meta.toml").write_bytes((DEMO / "meta.toml").read_bytes())
    return folder


def peak_mb(fn) -> float:
    """Peak traced Python allocations (MB) during ``fn()``."""
    tracemalloc.start()
    tracemalloc.reset_peak()
    try:
        fn()
        return tracemalloc.get_traced_memory()[1] / 1e6
    finally:
        tracemalloc.stop()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=200_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--reference-rows", type=int, default=20_000,
                        help="rows of the pandas.to_excel reference (0: the whole table)")
    opts = parser.parse_args()

    from optbench.analysis.compare import compare
    from optbench.commands.check import _expiries
    from optbench.data.chain import load_chain
    from optbench.data.scenario import read_meta
    from optbench.report.xlsx import chain_xlsx, comparison_xlsx

    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        folder = big_chain(tmp / "BIG", opts.rows)
        size_mb = (folder / "chain.csv").stat().st_size / 1e6
        t0 = time.perf_counter()
        comparison = compare(folder, model="gjr", dist="t", n_paths=500)
        t_compare = time.perf_counter() - t0
        meta = read_meta(folder)
        chain = load_chain(folder / "chain.csv", meta=meta, holidays=meta.get("holidays", ()))
        n_strikes = len(comparison.strike_frame())
        n_rejected = len(chain.rejected)
        print(f"input: {opts.rows:,} rows, {size_mb:.1f} MB CSV; compare used "
              f"{n_strikes:,} quotes, check rejects {n_rejected:,} "
              f"(comparison itself {t_compare:.1f} s, not part of the export)")

        out = tmp / "out.xlsx"
        t_cmp = median_time(lambda: comparison_xlsx(comparison, out), repeats=opts.repeats,
                            warm_up=False)
        size_cmp = out.stat().st_size / 1e6
        m_cmp = peak_mb(lambda: comparison_xlsx(comparison, out))
        expiries = _expiries(chain)
        t_chk = median_time(lambda: chain_xlsx(chain, expiries, out), repeats=opts.repeats,
                            warm_up=False)
        m_chk = peak_mb(lambda: chain_xlsx(chain, expiries, out))

        frame = comparison.strike_frame()
        n_ref = len(frame) if opts.reference_rows <= 0 else min(opts.reference_rows, len(frame))
        part = frame.iloc[:n_ref]
        ref = tmp / "ref.xlsx"
        t0 = time.perf_counter()
        part.to_excel(ref, index=False, engine="openpyxl")
        t_ref = time.perf_counter() - t0
        m_ref = peak_mb(lambda: part.to_excel(ref, index=False, engine="openpyxl"))
        scale = len(frame) / n_ref
        t_ref_full = t_ref * scale

        print()
        print(f"{'export':44s} {'rows':>9s} {'median s':>9s} {'peak MB':>8s} "
              f"{'x input':>8s}")
        print(f"{'optbench compare workbook (every strike)':44s} {n_strikes:9,d} "
              f"{t_cmp:9.2f} {m_cmp:8.1f} {m_cmp / size_mb:8.2f}   file {size_cmp:.1f} MB")
        print(f"{'optbench check workbook (rejected rows)':44s} {n_rejected:9,d} "
              f"{t_chk:9.2f} {m_chk:8.1f} {m_chk / size_mb:8.2f}")
        label = "pandas.to_excel (openpyxl), " + ("whole table" if scale == 1 else
                                                  f"{n_ref:,} rows")
        print(f"{label:44s} {n_ref:9,d} {t_ref:9.2f} {m_ref:8.1f} {m_ref / size_mb:8.2f}")
        if scale != 1:
            print(f"{'  scaled to the whole per-strike table':44s} {len(frame):9,d} "
                  f"{t_ref_full:9.2f} {'':>8s} {'':>8s}   (time scaled linearly; its "
                  "memory grows with the rows)")
        print()
        print(f"ratio, reference time / optbench time (whole table): {t_ref_full / t_cmp:.1f}x")
        print(f"targets: under 30 s -> {'met' if t_cmp < 30 else 'NOT met'}; peak within 5x "
              f"input ({5 * size_mb:.0f} MB) -> {'met' if m_cmp < 5 * size_mb else 'NOT met'}")
        figure(f"XLSX workbook of a {n_strikes:,}-row per-strike table", t_cmp, "s", 30.0,
               reference=f"pandas.to_excel {t_ref_full:.1f} s (scaled), same run")
        figure("XLSX workbook peak memory, multiple of the input CSV", m_cmp / size_mb, "x",
               5.0, reference=f"pandas.to_excel {m_ref / size_mb:.2f}x on {n_ref:,} rows")
        # the reread that the tests do on small tables, here on the big one's first rows
        head = pd.read_excel(io.BytesIO(out.read_bytes()), nrows=5)
        assert list(head.columns)[:3] == ["line", "reason", "detail"]


if __name__ == "__main__":
    main()
