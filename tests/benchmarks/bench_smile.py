"""Speed of the smile fit, the model-free variance and the static-arbitrage flags,
side by side with reference implementations measured in the same run.

- fit_svi on one expiry (40 noisy quotes), on a 10-expiry chain of 100 quotes per
  expiry (the screen's typical underlying) and on a 20-expiry chain of 200 quotes per
  expiry (a 20,000-quote chain after the comparison's cap of 200 out-of-the-money
  quotes per expiry), vega-weighted, against scipy.optimize.least_squares on the same
  five raw SVI parameters and the same weights (one start at the true values: a best
  case for it), with the summed squared error of each;
- model_free_variance on a 400-strike strip against QuantLib's
  ReplicatingVarianceSwapEngine on the same strikes (vols from a flat surface);
- strike_arbitrage + calendar_arbitrage on a 20-expiry chain of 3,200 quotes.

Run: .venv/bin/python tests/benchmarks/bench_smile.py   (prints medians and ratios)
"""
from __future__ import annotations


import numpy as np
import QuantLib as ql
from scipy.optimize import least_squares

from optbench.analysis.arbitrage import calendar_arbitrage, strike_arbitrage
from optbench.analysis.model_free import model_free_variance
from optbench.analysis.smile import fit_svi, fit_svi_many
from optbench.pricing.bsm import bsm_price
from timing import figure, median_time  # noqa: E402  (tests/benchmarks)



def svi_w(k, a, b, rho, m, s):
    return a + b * (rho * (k - m) + np.sqrt((k - m) ** 2 + s * s))


def svi_chain(n_expiries: int, n_quotes: int, seed: int) -> list:
    """Invented vega-weighted noisy SVI smiles, one per expiry: (k, w, weights, t,
    true parameters)."""
    rng = np.random.default_rng(seed)
    out = []
    for j, t in enumerate(np.geomspace(7, 730, n_expiries) / 365):
        sd = 0.2 * np.sqrt(t)
        k = np.sort(rng.uniform(-3.0 * sd, 2.0 * sd, n_quotes))
        params = (0.02 * t, 0.1 * np.sqrt(t), -0.7 + 0.3 * j / n_expiries,
                  0.02 * np.sqrt(t), 0.15 * np.sqrt(t))
        w = svi_w(k, *params) * (1 + 0.01 * rng.standard_normal(n_quotes))
        vega = np.exp(-0.5 * (k / sd) ** 2) + 0.02       # BSM-vega-like shape in k
        out.append((k, w, vega, t, params))
    return out


def bench_svi() -> None:
    bounds = ([-1, 0, -0.999, -3, 1e-4], [1, 10, 0.999, 3, 5])
    rng = np.random.default_rng(11)
    params = (0.01, 0.08, -0.6, 0.02, 0.15)
    k = np.linspace(-0.6, 0.4, 40)
    w = svi_w(k, *params) * (1 + 0.01 * rng.standard_normal(k.size))
    ours = median_time(lambda: fit_svi(k, w, t=0.5), 30)
    ref = median_time(lambda: least_squares(
        lambda p: svi_w(k, *p) - w, x0=params, bounds=bounds), 30)
    fit = fit_svi(k, w, t=0.5)
    r = least_squares(lambda p: svi_w(k, *p) - w, x0=params, bounds=bounds)
    e_ours = float(np.sum((fit.total_variance(k) - w) ** 2))
    e_ref = float(np.sum(r.fun ** 2))
    print(f"fit_svi, 40 quotes:            optbench {ours * 1e3:7.2f} ms   "
          f"scipy least_squares (true start) {ref * 1e3:7.2f} ms   ratio {ref / ours:5.2f}x")
    print(f"  squared error: optbench {e_ours:.6e}   least_squares {e_ref:.6e}   "
          f"rmse_iv {fit.rmse_iv * 100:.4f} vol points")
    for n_exp, n_q, repeat in ((10, 100, 15), (20, 200, 7)):
        chain = svi_chain(n_exp, n_q, seed=5)

        def fit_all():
            return [fit_svi(kk, ww, vv, t=tt) for kk, ww, vv, tt, _ in chain]

        def ref_all():
            return [least_squares(lambda p, kk=kk, ww=ww, sv=np.sqrt(vv / vv.mean()):
                                  sv * (svi_w(kk, *p) - ww), x0=p0, bounds=bounds)
                    for kk, ww, vv, tt, p0 in chain]

        ours = median_time(fit_all, repeat)
        ref = median_time(ref_all, max(3, repeat // 3))
        e_ours = sum(float(np.sum(vv / vv.mean() * (f.total_variance(kk) - ww) ** 2))
                     for f, (kk, ww, vv, _, _) in zip(fit_all(), chain))
        e_ref = sum(float(np.sum(r.fun ** 2)) for r in ref_all())
        print(f"fit_svi, {n_exp} expiries x {n_q} quotes: optbench {ours * 1e3:7.1f} ms "
              f"({ours / n_exp * 1e3:5.2f} ms per expiry)   scipy least_squares (true "
              f"start) {ref * 1e3:7.1f} ms   ratio {ref / ours:5.2f}x")
        print(f"  summed weighted squared error: optbench {e_ours:.6e}   "
              f"least_squares {e_ref:.6e}")
        figure(f"smile fits, {n_exp} expiries x {n_q} quotes, least_squares time / optbench "
               "time", ref / ours, "x", better="higher",
               reference="scipy.optimize.least_squares from the true parameters, same run")
        figure(f"smile fits, {n_exp} expiries x {n_q} quotes, squared error / "
               "least_squares'", e_ours / e_ref, "x",
               reference="scipy.optimize.least_squares from the true parameters, same run")
    # every expiry's smile fitted together (what compare does) against fit_svi one at a
    # time, the same fits bit for bit; 3 expiries is a screen row's
    for n_exp, n_q, repeat in ((3, 100, 21), (10, 100, 15), (20, 200, 7)):
        chain = [c[:4] for c in svi_chain(n_exp, n_q, seed=5)]
        one = median_time(lambda: [fit_svi(kk, ww, vv, t=tt) for kk, ww, vv, tt in chain],
                          repeat)
        many = median_time(lambda: fit_svi_many(chain), repeat)
        same = fit_svi_many(chain) == [fit_svi(kk, ww, vv, t=tt) for kk, ww, vv, tt in chain]
        print(f"fit_svi_many, {n_exp} expiries x {n_q} quotes: {many * 1e3:7.1f} ms   "
              f"fit_svi one at a time {one * 1e3:7.1f} ms   ratio {one / many:5.2f}x   "
              f"identical fits: {same}")


def bench_model_free() -> None:
    S, r, q, vol, days = 100.0, 0.05, 0.0, 0.25, 91
    t = days / 365
    F, D = S * np.exp((r - q) * t), np.exp(-r * t)
    K = np.linspace(20.0, 400.0, 400)
    c = bsm_price(S, K, t, r, q, vol, True)
    p = bsm_price(S, K, t, r, q, vol, False)
    ours = median_time(lambda: model_free_variance(K, t, F, D, call_mid=c, put_mid=p), 50)

    today = ql.Date(4, 1, 2027)
    ql.Settings.instance().evaluationDate = today
    dc = ql.Actual365Fixed()
    process = ql.BlackScholesMertonProcess(
        ql.QuoteHandle(ql.SimpleQuote(S)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, q, dc)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, r, dc)),
        ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(), vol, dc)))
    calls = [float(x) for x in K if x >= 100.0]
    puts = [float(x) for x in K if x <= 100.0]

    def quantlib():
        swap = ql.VarianceSwap(ql.Position.Long, 0.04, 1.0, today, today + days)
        swap.setPricingEngine(ql.ReplicatingVarianceSwapEngine(process, 5.0, calls, puts))
        return swap.variance()

    ref = median_time(quantlib, 20)
    v_ours = model_free_variance(K, t, F, D, call_mid=c, put_mid=p).variance
    print(f"model-free variance, 400 strikes: optbench {ours * 1e3:7.3f} ms   "
          f"QuantLib replicating engine {ref * 1e3:7.3f} ms   ratio {ref / ours:5.1f}x")
    print(f"  variance: optbench {v_ours:.7f}   QuantLib {quantlib():.7f}   "
          f"flat vol^2 {vol ** 2:.7f}")
    figure("model-free variance, 400 strikes, QuantLib time / optbench time", ref / ours, "x",
           better="higher", reference="QuantLib ReplicatingVarianceSwapEngine, same run")


def bench_arbitrage() -> None:
    S, r, q = 100.0, 0.03, 0.01
    ts = np.linspace(0.02, 2.0, 20)
    K = np.linspace(50.0, 200.0, 80)
    T, KK, C = np.meshgrid(ts, K, [True, False], indexing="ij")
    T, KK, C = T.ravel(), KK.ravel(), C.ravel()
    F, D = S * np.exp((r - q) * T), np.exp(-r * T)
    price = bsm_price(S, KK, T, r, q, 0.25, C)
    n = T.size
    ours = median_time(lambda: strike_arbitrage(T, KK, price, C, forward=F, discount=D,
                                                bid=price * 0.99, ask=price * 1.01), 30)
    cal = median_time(lambda: calendar_arbitrage(T, np.log(KK / F), 0.25 ** 2 * T), 30)
    print(f"static-arbitrage flags, {n} quotes: strike checks {ours * 1e3:6.2f} ms "
          f"({ours / n * 1e9:6.0f} ns per quote), calendar {cal * 1e3:6.2f} ms")


if __name__ == "__main__":
    bench_svi()
    bench_model_free()
    bench_arbitrage()
