"""Helpers for the loader tests: write the same quotes in every supported layout.

The quotes are generated inside each test (random, seeded or drawn by hypothesis);
nothing here is a stored expected result.
"""
from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pandas as pd

from optbench.data.occ import format_occ

ASOF = "2026-11-27"
ROOT = "ZPHX"


def long_frame(quotes: pd.DataFrame, spot: float) -> pd.DataFrame:
    """Canonical long layout with the DESIGN.md column names."""
    return pd.DataFrame({
        "underlying": ROOT, "quote_date": ASOF, "underlying_price": spot,
        "expiry": quotes["expiry"].dt.strftime("%Y-%m-%d"),
        "strike": quotes["strike"], "type": np.where(quotes["is_call"], "C", "P"),
        "bid": quotes["bid"], "ask": quotes["ask"], "volume": quotes["volume"],
        "open_interest": quotes["open_interest"],
    })


def write_layouts(quotes: pd.DataFrame, spot: float, folder: Path) -> dict[str, Path]:
    """Write ``quotes`` (expiry, strike, is_call, bid, ask, volume, open_interest;
    every (expiry, strike) with both a call and a put) in each supported layout."""
    out: dict[str, Path] = {}
    base = long_frame(quotes, spot)

    out["long"] = folder / "long.csv"
    base.to_csv(out["long"], index=False)

    variant = pd.DataFrame({
        "QuoteDate": pd.to_datetime(base["quote_date"]).dt.strftime("%m/%d/%Y"),
        "Expiration": quotes["expiry"].dt.strftime("%d-%b-%Y"),
        "Call/Put": np.where(quotes["is_call"], "call", "Put"),
        "Strike Price": base["strike"], "Bid": base["bid"], "Ask": base["ask"],
        "OpenInterest": base["open_interest"], "Volume": base["volume"],
        "UnderlyingPrice": spot, "Underlying Symbol": ROOT,
    })
    out["variant"] = folder / "variant.csv"
    with out["variant"].open("w", newline="") as fh:
        fh.write("Option chain export\n\n")  # a title line above the header
        variant.to_csv(fh, index=False)

    calls = quotes[quotes["is_call"]].set_index(["expiry", "strike"])
    puts = quotes[~quotes["is_call"]].set_index(["expiry", "strike"])
    joined = calls.merge(puts, left_index=True, right_index=True, how="outer",
                         suffixes=("_c", "_p")).reset_index()
    wide = pd.DataFrame({
        "Quote Date": ASOF, "Underlying Price": spot,
        "Expiry": joined["expiry"].dt.strftime("%Y%m%d"),
        "Call Bid": joined["bid_c"], "Call Ask": joined["ask_c"],
        "Call Volume": joined["volume_c"], "Call Open Interest": joined["open_interest_c"],
        "Strike": joined["strike"],
        "Put Bid": joined["bid_p"], "Put Ask": joined["ask_p"],
        "Put Volume": joined["volume_p"], "Put Open Interest": joined["open_interest_p"],
    })
    out["wide"] = folder / "wide.csv"
    wide.to_csv(out["wide"], index=False)

    occ = pd.DataFrame({
        "symbol": format_occ(ROOT, quotes["expiry"].to_numpy(), quotes["is_call"].to_numpy(),
                             quotes["strike"].to_numpy(), pad=True),
        "bid": base["bid"], "ask": base["ask"], "volume": base["volume"],
        "open_interest": base["open_interest"], "underlying_price": spot,
        "quote_date": ASOF,
    })
    occ.loc[occ.index[::2], "symbol"] = format_occ(
        ROOT, quotes["expiry"].to_numpy()[::2], quotes["is_call"].to_numpy()[::2],
        quotes["strike"].to_numpy()[::2], pad=False)  # half unpadded
    out["occ"] = folder / "occ.csv"
    occ.to_csv(out["occ"], index=False)

    out["parquet"] = folder / "chain.parquet"
    base.to_parquet(out["parquet"], index=False)

    out["semicolon"] = folder / "semicolon.csv"
    with out["semicolon"].open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, delimiter=";")
        w.writerow(base.columns)
        for row in base.itertuples(index=False):  # test fixture writer, not the loader
            w.writerow([str(v).replace(".", ",") if isinstance(v, float) else v
                        for v in row])
    return out


def random_quotes(rng: np.random.Generator, spot: float = 100.0,
                  n_exp: int = 3, n_k: int = 6) -> pd.DataFrame:
    """Calls and puts on a strike grid, prices with random noise (some rejectable)."""
    exps = pd.Timestamp(ASOF) + pd.to_timedelta(np.sort(rng.choice(
        np.arange(1, 700), n_exp, replace=False)), unit="D")
    ks = np.sort(rng.choice(np.arange(50, 200), n_k, replace=False)).astype(float)
    e, k, c = np.meshgrid(exps, ks, [True, False], indexing="ij")
    e, k, c = e.ravel(), k.ravel(), c.ravel()
    intrinsic = np.where(c, np.maximum(spot - k, 0), np.maximum(k - spot, 0))
    mid = intrinsic + rng.uniform(0.0, 8.0, k.size)
    half = rng.uniform(0.0, 1.5, k.size)
    return pd.DataFrame({
        "expiry": pd.to_datetime(e), "strike": k, "is_call": c,
        "bid": np.round(np.maximum(mid - half, 0.0), 2),
        "ask": np.round(mid + half, 2),
        "volume": rng.integers(0, 3, k.size), "open_interest": rng.integers(0, 3, k.size),
    })
