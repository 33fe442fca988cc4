"""American options with cash dividends: optbench's vectorised escrowed-dividend tree
on a 1,000-quote chain against QuantLib's finite-difference engine with the same
dividends (``FdBlackScholesVanillaEngine``, escrowed model, 400 x 400) called once per
option, in one run; medians and the per-option ratio, plus the largest price gap.

    .venv/bin/python tests/benchmarks/bench_american_dividends.py
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
import QuantLib as ql

sys.path.insert(0, str(Path(__file__).resolve().parent))
from timing import figure, median_time  # noqa: E402

from optbench.pricing.american_dividends import (  # noqa: E402
    american_dividend_implied_vol_with_status, american_dividend_price)

DIV_DAYS = [45, 136, 227, 318, 409, 500, 591, 682]


def _ql_prices(S, K, days, r, v, call, amount):
    today = ql.Date(15, 3, 2027)
    ql.Settings.instance().evaluationDate = today
    dc = ql.Actual365Fixed()
    divs = ql.DividendVector([today + d for d in DIV_DAYS], [amount] * len(DIV_DAYS))
    out = np.empty(K.size)
    t0 = time.perf_counter()
    for i in range(K.size):  # QuantLib prices one option per call
        proc = ql.BlackScholesMertonProcess(
            ql.QuoteHandle(ql.SimpleQuote(S)),
            ql.YieldTermStructureHandle(ql.FlatForward(today, 0.0, dc)),
            ql.YieldTermStructureHandle(ql.FlatForward(today, r, dc)),
            ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(),
                                                               float(v[i]), dc)))
        opt = ql.VanillaOption(
            ql.PlainVanillaPayoff(ql.Option.Call if call[i] else ql.Option.Put, float(K[i])),
            ql.AmericanExercise(today, today + int(days[i])))
        opt.setPricingEngine(ql.FdBlackScholesVanillaEngine(
            proc, divs, 400, 400, 0, ql.FdmSchemeDesc.Douglas(), False, -ql.nullDouble(),
            ql.FdBlackScholesVanillaEngine.Escrowed))
        out[i] = opt.NPV()
    return out, (time.perf_counter() - t0) / K.size


def main(n: int = 1000, ql_sample: int = 100) -> None:
    rng = np.random.default_rng(2003)
    S, r, amount = 100.0, 0.04, 0.8
    days = rng.integers(7, 730, n)
    t = days / 365.0
    K = S * np.exp(rng.uniform(-0.3, 0.3, n))
    v = rng.uniform(0.12, 0.5, n)
    call = rng.random(n) < 0.5
    times, amounts = np.array(DIV_DAYS) / 365.0, np.full(len(DIV_DAYS), amount)

    price = american_dividend_price(S, K, t, r, 0.0, v, call, times, amounts)
    ours = median_time(lambda: american_dividend_price(S, K, t, r, 0.0, v, call, times,
                                                       amounts), repeats=5)
    iv_time = median_time(lambda: american_dividend_implied_vol_with_status(
        price, S, K, t, r, 0.0, call, times, amounts), repeats=3)
    c0 = time.process_time()
    american_dividend_implied_vol_with_status(price, S, K, t, r, 0.0, call, times, amounts)
    iv_cpu = time.process_time() - c0
    idx = rng.choice(n, ql_sample, replace=False)
    ref, ql_per = _ql_prices(S, K[idx], days[idx], r, v[idx], call[idx], amount)
    gap = np.abs(price[idx] - ref) / np.maximum(ref, 0.01)
    print(f"{n} American options with {len(DIV_DAYS)} cash dividends")
    print(f"  optbench tree (vectorised):  {ours * 1e3:8.1f} ms the chain, "
          f"{ours / n * 1e6:8.1f} us per option (median of 5)")
    print(f"  QuantLib FD escrowed 400x400: {ql_per * 1e6:8.1f} us per option "
          f"({ql_sample} options)")
    print(f"  ratio QuantLib / optbench per option: {ql_per / (ours / n):.1f}x")
    print(f"  implied vols of the chain: {iv_time:.2f} s (median of 3; CPU {iv_cpu:.2f} s)")
    print(f"  price + invert the chain: {ours + iv_time:.2f} s wall")
    print(f"  largest relative price gap to QuantLib (price >= 0.01): {gap.max():.2e}")
    figure("american_dividends_per_option_speedup", ql_per / (ours / n), "x",
           better="higher", reference="QuantLib FdBlackScholesVanillaEngine escrowed 400x400")
    figure(f"American chain with cash dividends, price + invert ({n:,} quotes, wall)",
           ours + iv_time, "s", 1.0,
           reference="QuantLib FD escrowed 400x400 per quote prices alone: %.0f s"
           % (ql_per * n))


if __name__ == "__main__":
    main()
