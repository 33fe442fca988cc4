"""A synthetic screening universe for the benchmarks: invented underlyings SYN0001…,
each with a GJR-t price history and a long-layout option chain priced by
Black-Scholes-Merton on a skewed smile. Invented data, for timing only.

Run: .venv/bin/python tests/benchmarks/synthetic_universe.py OUT [--n 500]
     [--quotes 2000] [--days 2500]
"""
from __future__ import annotations

import argparse
import datetime as _dt
from pathlib import Path

import numpy as np
import pandas as pd

from optbench.pricing.bsm import bsm_price

ASOF = _dt.date(2026, 11, 27)
RATE, DIV_YIELD = 0.04, 0.015


def _histories(rng: np.random.Generator, n: int, days: int) -> np.ndarray:
    """Closing prices (n, days+1) from GJR-GARCH(1,1) with t(6) innovations."""
    omega, alpha, gamma, beta, nu = 2e-6, 0.03, 0.09, 0.90, 6.0
    level = rng.uniform(0.7, 1.6, size=n)          # each underlying its own vol level
    var = omega * level / (1 - alpha - gamma / 2 - beta) * np.ones(n)
    z = rng.standard_t(nu, size=(days, n)) / np.sqrt(nu / (nu - 2))
    logp = np.empty((days + 1, n))
    logp[0] = np.log(rng.uniform(20, 3000, size=n))
    for d in range(days):
        eps = np.sqrt(var) * z[d]
        logp[d + 1] = logp[d] + 0.0002 + eps
        var = omega * level + (alpha + gamma * (eps < 0)) * eps ** 2 + beta * var
    return np.exp(logp).T


def _dates(days: int) -> pd.DatetimeIndex:
    return pd.bdate_range(end=pd.Timestamp(ASOF), periods=days + 1)


def _chain(rng: np.random.Generator, code: str, spot: float, vol: float,
           n_quotes: int) -> pd.DataFrame:
    n_exp = 10
    n_strikes = max(2, n_quotes // (2 * n_exp))
    days = np.array([7, 14, 30, 49, 91, 126, 182, 273, 365, 730])[:n_exp]
    expiries = [ASOF + _dt.timedelta(days=int(d)) for d in days]
    t = days / 365.0
    width = np.maximum(0.12, 3.0 * vol * np.sqrt(t))
    k = np.linspace(-1.0, 0.6, n_strikes)[None, :] * width[:, None]     # log-moneyness
    fwd = spot * np.exp((RATE - DIV_YIELD) * t)[:, None]
    strikes = np.round(fwd * np.exp(k), 2)
    premium = rng.normal(0.02, 0.02)
    iv = (vol + premium) * (1 - 0.8 * k + 1.5 * k ** 2)
    iv = np.clip(iv, 0.05, 2.0)
    tt = np.broadcast_to(t[:, None], strikes.shape)
    rows = []
    for is_call, kind in ((True, "C"), (False, "P")):
        mid = bsm_price(spot, strikes, tt, RATE, DIV_YIELD, iv, is_call)
        half = np.maximum(0.01, 0.02 * mid + 0.005)
        keep = mid > 0.05
        e = np.broadcast_to(np.array(expiries, dtype=object)[:, None], strikes.shape)
        rows.append(pd.DataFrame({
            "expiry": [d.isoformat() for d in e[keep]], "strike": strikes[keep],
            "type": kind, "bid": np.round(mid[keep] - half[keep], 2),
            "ask": np.round(mid[keep] + half[keep], 2),
            "volume": rng.integers(0, 500, keep.sum()),
            "open_interest": rng.integers(0, 5000, keep.sum())}))
    chain = pd.concat(rows, ignore_index=True)
    chain.insert(0, "underlying", code)
    chain.insert(1, "quote_date", ASOF.isoformat())
    chain.insert(2, "underlying_price", round(spot, 2))
    return chain


def write_universe(out: Path, n: int = 500, n_quotes: int = 2000, days: int = 2500,
                   seed: int = 20261201) -> list[Path]:
    """Write ``n`` scenario folders under ``out``; returns their paths."""
    rng = np.random.default_rng(seed)
    closes = _histories(rng, n, days)
    dates = _dates(days).strftime("%Y-%m-%d")
    folders = []
    for i in range(n):
        code = f"SYN{i + 1:04d}"
        folder = out / code
        folder.mkdir(parents=True, exist_ok=True)
        close = closes[i]
        returns = np.diff(np.log(close[-253:]))
        vol = float(np.std(returns) * np.sqrt(252))
        pd.DataFrame({"date": dates, "close": np.round(close, 4)}).to_csv(
            folder / "history.csv", index=False)
        _chain(rng, code, float(close[-1]), vol, n_quotes).to_csv(
            folder / "chain.csv", index=False)
        (folder / "meta.toml").write_text(
            f'name = "Synthetic {code}"\ncode = "{code}"\nrate = {RATE}\n'
            f'div_yield = {DIV_YIELD}\nnote = "Invented benchmark data."\n')
        folders.append(folder)
    return folders


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path)
    parser.add_argument("--n", type=int, default=500)
    parser.add_argument("--quotes", type=int, default=2000)
    parser.add_argument("--days", type=int, default=2500)
    a = parser.parse_args()
    write_universe(a.out, a.n, a.quotes, a.days)
    print(f"wrote {a.n} scenario folders under {a.out}")
