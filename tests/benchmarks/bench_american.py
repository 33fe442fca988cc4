"""American pricing and implied vol: optbench's vectorised early-exercise-boundary
method (and its BBSR tree) on a 1,500-quote and a 3,000-quote chain, against
QuantLib's engines called once per option, in one run. Accuracy is measured against
QuantLib's QdFpAmericanEngine with its high-precision scheme on a sample.

    .venv/bin/python tests/benchmarks/bench_american.py
"""
from __future__ import annotations

import statistics
import time

import numpy as np
import QuantLib as ql

from optbench.pricing.american import american_implied_vol_with_status, american_price


def _ql_options(S, K, days, r, q, v, call, engine):
    today = ql.Date(15, 3, 2027)
    ql.Settings.instance().evaluationDate = today
    dc = ql.Actual365Fixed()
    out = np.empty(K.size)
    t0 = time.perf_counter()
    for i in range(K.size):  # QuantLib prices one option per call
        proc = ql.BlackScholesMertonProcess(
            ql.QuoteHandle(ql.SimpleQuote(S)),
            ql.YieldTermStructureHandle(ql.FlatForward(today, q, dc)),
            ql.YieldTermStructureHandle(ql.FlatForward(today, r, dc)),
            ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(),
                                                               float(v[i]), dc)))
        opt = ql.VanillaOption(
            ql.PlainVanillaPayoff(ql.Option.Call if call[i] else ql.Option.Put, float(K[i])),
            ql.AmericanExercise(today, today + int(days[i])))
        opt.setPricingEngine(engine(proc))
        out[i] = opt.NPV()
    return out, (time.perf_counter() - t0) / K.size


def main(n: int = 1500, runs: int = 5, ql_sample: int = 150) -> None:
    rng = np.random.default_rng(1979)
    S, r, q = 100.0, 0.045, 0.02
    days = rng.integers(7, 730, 2 * n)
    t = days / 365.0
    K = S * np.exp(rng.uniform(-0.4, 0.4, 2 * n))
    v = rng.uniform(0.1, 0.6, 2 * n)
    call = rng.random(2 * n) < 0.5

    print(f"American prices and implied vols of a chain (7 days - 2 years, strikes "
          f"e^±0.4 x spot), medians of {runs} runs")
    prices = {}
    for method in ("boundary", "tree"):
        for m in (n, 2 * n):
            sl = slice(0, m)
            times = []
            for _ in range(runs):
                t0 = time.perf_counter()
                price = american_price(S, K[sl], t[sl], r, q, v[sl], call[sl], method=method)
                times.append(time.perf_counter() - t0)
            iv_times = []
            for _ in range(3):
                t0 = time.perf_counter()
                vol, status = american_implied_vol_with_status(price, S, K[sl], t[sl], r, q,
                                                               call[sl], method=method)
                iv_times.append(time.perf_counter() - t0)
            ok = status == 0
            prices[method] = price
            print(f"  {method:<9}{m:>6,} quotes: price {statistics.median(times) * 1e3:8.1f} ms,"
                  f" price + invert {(statistics.median(times) + statistics.median(iv_times)) * 1e3:8.1f}"
                  f" ms; {ok.sum()} vols, max |vol - true| {np.max(np.abs(vol[ok] - v[sl][ok])):.1e}")
    idx = rng.choice(n, ql_sample, replace=False)
    qd, qd_per = _ql_options(S, K[idx], days[idx], r, q, v[idx], call[idx],
                             lambda p: ql.QdFpAmericanEngine(
                                 p, ql.QdFpAmericanEngine.highPrecisionScheme()))
    fd, fd_per = _ql_options(S, K[idx], days[idx], r, q, v[idx], call[idx],
                             lambda p: ql.FdBlackScholesVanillaEngine(p, 400, 400))
    bin_, bin_per = _ql_options(S, K[idx], days[idx], r, q, v[idx], call[idx],
                                lambda p: ql.BinomialVanillaEngine(p, "lr", 801))
    big = qd > 0.1   # prices worth at least 1e-3 of spot
    for method in ("boundary", "tree"):
        rel = np.abs(prices[method][idx] / qd - 1)[big]
        print(f"  {method:<9} max rel. difference to QuantLib QdFp high precision "
              f"(price >= 1e-3 S): {rel.max():.2e}; median {np.median(rel):.2e}")
    print(f"  QuantLib per option: QdFp high precision {qd_per * 1e6:.0f} us, FD 400x400 "
          f"{fd_per * 1e6:.0f} us, binomial LR 801 {bin_per * 1e6:.0f} us")


if __name__ == "__main__":
    main()
