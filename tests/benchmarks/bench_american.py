"""American pricing and implied vol: optbench's vectorised BBSR tree on a
1,500-quote chain, against QuantLib's engines called once per option, in one run.

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
    days = rng.integers(7, 730, n)
    t = days / 365.0
    K = S * np.exp(rng.uniform(-0.4, 0.4, n))
    v = rng.uniform(0.1, 0.6, n)
    call = rng.random(n) < 0.5

    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        price = american_price(S, K, t, r, q, v, call)
        times.append(time.perf_counter() - t0)
    iv_times = []
    for _ in range(3):
        t0 = time.perf_counter()
        vol, status = american_implied_vol_with_status(price, S, K, t, r, q, call)
        iv_times.append(time.perf_counter() - t0)

    idx = rng.choice(n, ql_sample, replace=False)
    fd, fd_per = _ql_options(S, K[idx], days[idx], r, q, v[idx], call[idx],
                             lambda p: ql.FdBlackScholesVanillaEngine(p, 400, 400))
    bin_, bin_per = _ql_options(S, K[idx], days[idx], r, q, v[idx], call[idx],
                                lambda p: ql.BinomialVanillaEngine(p, "lr", 801))
    ours_per = statistics.median(times) / n
    rel = np.abs(price[idx] / fd - 1)
    big = fd > 0.05
    print(f"American prices of a {n:,}-quote chain (7 days - 2 years, strikes e^±0.4 x spot)")
    print(f"  optbench BBSR tree         {statistics.median(times) * 1e3:8.1f} ms per chain "
          f"({ours_per * 1e6:7.1f} us/option, median of {runs})")
    print(f"  QuantLib FD 400x400        {fd_per * 1e6:8.1f} us/option   ratio "
          f"{fd_per / ours_per:6.1f} x")
    print(f"  QuantLib binomial LR 801   {bin_per * 1e6:8.1f} us/option   ratio "
          f"{bin_per / ours_per:6.1f} x")
    print(f"  max rel. difference to QuantLib FD (price > 0.05): {rel[big].max():.2e}; "
          f"median {np.median(rel[big]):.2e}")
    ok = status == 0
    print(f"  American implied vols of the chain: {statistics.median(iv_times) * 1e3:.1f} ms; "
          f"{ok.sum()} ok, max |vol - true| {np.max(np.abs(vol[ok] - v[ok])):.2e}")


if __name__ == "__main__":
    main()
