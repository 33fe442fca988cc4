"""American pricing and implied vols of a chain: optbench's vectorised
early-exercise-boundary method against QuantLib's engines called once per quote, in
one run. Accuracy is measured against QuantLib's QdFpAmericanEngine with its
high-precision scheme on a sample.

The chain is what a desk loads: 8 expiries (1 week to 2 years), 188 strikes from 50 %
to 150 % of spot, puts and calls (3,008 quotes), a continuous yield, a smile in the
volatilities. The strikes of one expiry share their early-exercise boundaries (one
table in volatility per expiry). A second chain gives every quote its own expiry (no
sharing: the worst case). Times are medians of wall time and of CPU time (the CPU
figure is the steadier on a shared machine).

    .venv/bin/python tests/benchmarks/bench_american.py [--quick]
"""
from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import numpy as np
import QuantLib as ql

sys.path.insert(0, str(Path(__file__).resolve().parent))
from timing import figure  # noqa: E402

from optbench.pricing.american import (  # noqa: E402
    american_implied_vol_with_status, american_price)

TODAY = ql.Date(15, 3, 2027)


def desk_chain(S: float = 100.0, n_strikes: int = 188):
    """8 expiries x n_strikes strikes (50-150 % of spot) x call/put, smile vols."""
    days = np.array([7, 14, 30, 60, 91, 182, 365, 730])
    D, K, C = (a.ravel() for a in np.meshgrid(days, np.linspace(0.5 * S, 1.5 * S, n_strikes),
                                              [True, False], indexing="ij"))
    t = D / 365.0
    k = np.log(K / S)
    vol = 0.22 - 0.15 * k + 0.25 * k * k + 0.05 / np.sqrt(12.0 * t)
    return D, K, t, vol, C


def _process(S, r, q, v):
    dc = ql.Actual365Fixed()
    return ql.BlackScholesMertonProcess(
        ql.QuoteHandle(ql.SimpleQuote(S)),
        ql.YieldTermStructureHandle(ql.FlatForward(TODAY, q, dc)),
        ql.YieldTermStructureHandle(ql.FlatForward(TODAY, r, dc)),
        ql.BlackVolTermStructureHandle(ql.BlackConstantVol(TODAY, ql.NullCalendar(), v, dc)))


def _option(K, days, call):
    return ql.VanillaOption(ql.PlainVanillaPayoff(ql.Option.Call if call else ql.Option.Put,
                                                  float(K)),
                            ql.AmericanExercise(TODAY, TODAY + int(days)))


def ql_prices(S, K, days, r, q, v, call, scheme):
    """QuantLib QdFpAmericanEngine, one option per call; (prices, seconds per option)."""
    ql.Settings.instance().evaluationDate = TODAY
    out = np.empty(K.size)
    t0 = time.perf_counter()
    for i in range(K.size):
        opt = _option(K[i], days[i], call[i])
        opt.setPricingEngine(ql.QdFpAmericanEngine(_process(S, r, q, float(v[i])), scheme))
        out[i] = opt.NPV()
    return out, (time.perf_counter() - t0) / K.size


def ql_implied_vols(S, K, days, r, q, price, call):
    """QuantLib's VanillaOption.impliedVolatility with QdFp (fast scheme), one quote per
    call; (vols, seconds per quote)."""
    ql.Settings.instance().evaluationDate = TODAY
    out = np.full(K.size, np.nan)
    t0 = time.perf_counter()
    for i in range(K.size):
        opt = _option(K[i], days[i], call[i])
        proc = _process(S, r, q, 0.2)
        opt.setPricingEngine(ql.QdFpAmericanEngine(proc, ql.QdFpAmericanEngine.fastScheme()))
        try:
            out[i] = opt.impliedVolatility(float(price[i]), proc, 1e-8, 200, 1e-3, 5.0)
        except RuntimeError:   # QuantLib signals a failed root search by an exception
            pass
    return out, (time.perf_counter() - t0) / K.size


def timed(fn, runs):
    wall, cpu = [], []
    for _ in range(runs):
        w0, c0 = time.perf_counter(), time.process_time()
        out = fn()
        wall.append(time.perf_counter() - w0)
        cpu.append(time.process_time() - c0)
    return out, statistics.median(wall), statistics.median(cpu)


def run_chain(label, S, K, t, r, q, v, call, runs):
    price, w_p, c_p = timed(lambda: american_price(S, K, t, r, q, v, call), runs)
    (vol, status), w_i, c_i = timed(
        lambda: american_implied_vol_with_status(price, S, K, t, r, q, call), runs)
    ok = status == 0
    print(f"  {label:<34}{K.size:>6,} quotes: price {w_p * 1e3:7.1f} ms (CPU {c_p * 1e3:6.1f}),"
          f" price + invert {(w_p + w_i) * 1e3:7.1f} ms (CPU {(c_p + c_i) * 1e3:6.1f}); "
          f"{ok.sum()} vols, max |vol - true| {np.max(np.abs(vol[ok] - v[ok])):.1e}")
    return price, vol, status, w_p + w_i, c_p + c_i


def main(quick: bool = False) -> None:
    runs = 3 if quick else 7
    S, r, q = 100.0, 0.045, 0.02
    days, K, t, v, call = desk_chain(S)
    rng = np.random.default_rng(1979)
    print(f"American prices and implied vols (boundary method), medians of {runs} runs")
    price, vol, status, wall, cpu = run_chain("desk chain (8 expiries)", S, K, t, r, q, v,
                                              call, runs)
    # the same chain with a cash-like higher yield (calls exercised early too)
    run_chain("desk chain, yield 6 % > rate 4.5 %", S, K, t, r, 0.06, v, call, runs)
    # every quote its own expiry: nothing shared across strikes
    d2 = rng.integers(7, 730, K.size)
    run_chain("own expiry per quote (no sharing)", S, K, d2 / 365.0, r, q, v, call,
              max(3, runs // 2))

    n_ql = 100 if quick else 300
    idx = rng.choice(K.size, n_ql, replace=False)
    ref, hp_per = ql_prices(S, K[idx], days[idx], r, q, v[idx], call[idx],
                            ql.QdFpAmericanEngine.highPrecisionScheme())
    _, fast_per = ql_prices(S, K[idx], days[idx], r, q, v[idx], call[idx],
                            ql.QdFpAmericanEngine.fastScheme())
    n_iv = 30 if quick else 100
    # quotes with time value of at least 1e-3 of spot (nearer intrinsic the price
    # names the volatility poorly, for any solver)
    intrinsic = np.maximum(np.where(call, S - K, K - S), 0.0)
    posed = (status == 0) & (price - intrinsic >= 1e-3 * S)
    iv_idx = idx[posed[idx]][:n_iv]
    ql_vol, ql_iv_per = ql_implied_vols(S, K[iv_idx], days[iv_idx], r, q, price[iv_idx],
                                        call[iv_idx])
    big = ref >= 1e-3 * S
    rel = np.abs(price[idx] / ref - 1)[big]
    print(f"  max rel. difference to QuantLib QdFp high precision (price >= 1e-3 S, "
          f"{big.sum()} sampled quotes): {rel.max():.2e}; median {np.median(rel):.2e}")
    ql_chain = (fast_per + ql_iv_per) * K.size
    print(f"  QuantLib per quote: QdFp high precision {hp_per * 1e6:.0f} us, QdFp fast "
          f"{fast_per * 1e6:.0f} us, impliedVolatility with QdFp fast {ql_iv_per * 1e3:.1f} ms "
          f"({iv_idx.size} quotes with time value >= 1e-3 S; {np.isfinite(ql_vol).sum()} "
          f"solved; |difference to optbench's vols| median "
          f"{np.nanmedian(np.abs(ql_vol - vol[iv_idx])):.0e}, 90th percentile "
          f"{np.nanpercentile(np.abs(ql_vol - vol[iv_idx]), 90):.0e}: QuantLib inverts with "
          f"its own engine choice)")
    print(f"  chain price + invert: optbench {wall:.3f} s wall, {cpu:.3f} s CPU; QuantLib "
          f"QdFp fast, quote by quote, {ql_chain:.1f} s ({ql_chain / wall:.0f}x optbench's "
          f"wall time)")
    figure("American chain price + invert (3,008 quotes, wall)", wall, "s", 0.5,
           reference="QuantLib QdFp fast per quote: %.1f s" % ql_chain)
    figure("American chain price + invert (3,008 quotes, CPU)", cpu, "s", 0.5,
           reference="same run")
    figure("American price vs QuantLib QdFp high precision (max rel.)", rel.max(), "", 1e-4,
           reference="QuantLib QdFpAmericanEngine highPrecisionScheme, sampled quotes")


if __name__ == "__main__":
    main("--quick" in sys.argv[1:])
