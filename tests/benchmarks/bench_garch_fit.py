"""Speed of optbench's GARCH-family fits against the arch library, same data, same run.

Prints the median wall time of each fit on 5,000 daily returns of arch's bundled
S&P 500 sample (arch.data.sp500), alone and with its robust standard errors read,
and the ratios arch / optbench. The two libraries are timed alternately, repeat by
repeat, so that a change in the machine's load affects both alike. Targets: optbench at
least 5x faster for GARCH-normal and GJR-t, and at least as fast for EGARCH-normal.
Run: .venv/bin/python tests/benchmarks/bench_garch_fit.py
"""
from __future__ import annotations

import statistics
import time
import warnings

import numpy as np
from arch import arch_model
from arch.data import sp500

from optbench.volatility.garch import fit_garch

REPEATS = 21


def median_times(fns, repeats=REPEATS):
    """Median wall time of each function, the functions run in turn every repeat."""
    for fn in fns:
        fn()  # warm-up
    times = [[] for _ in fns]
    for _ in range(repeats):
        for fn, ts in zip(fns, times):
            t0 = time.perf_counter()
            fn()
            ts.append(time.perf_counter() - t0)
    return [statistics.median(ts) for ts in times]


def main() -> None:
    prices = sp500.load()["Adj Close"]
    y = np.diff(np.log(prices.to_numpy()))[-5000:]     # decimal log returns
    y_pct = 100.0 * y                                    # arch's customary units
    cases = [("garch", "normal", dict(vol="GARCH", p=1, q=1, dist="normal")),
             ("gjr", "t", dict(vol="GARCH", p=1, o=1, q=1, dist="studentst")),
             ("egarch", "normal", dict(vol="EGARCH", p=1, o=1, q=1, dist="normal"))]
    print("Both libraries compute the robust covariance on first use, so each is timed")
    print("for the fit alone and for the fit plus reading its standard errors.")
    print(f"{'model':<14}{'optbench':>10}{'arch':>9}{'ratio':>7}{'optbench+se':>13}"
          f"{'arch+se':>9}{'ratio':>7}   (ms)")
    for model, dist, kw in cases:
        am = arch_model(y_pct, mean="Constant", rescale=False, **kw)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ours, ref = median_times([lambda: fit_garch(y, model, dist),
                                      lambda: am.fit(disp="off")])
            ours_se, ref_se = median_times([lambda: fit_garch(y, model, dist).std_errors,
                                            lambda: am.fit(disp="off").std_err])
        print(f"{model + '-' + dist:<14}{ours * 1e3:>10.2f}{ref * 1e3:>9.2f}{ref / ours:>7.2f}"
              f"{ours_se * 1e3:>13.2f}{ref_se * 1e3:>9.2f}{ref_se / ours_se:>7.2f}")


if __name__ == "__main__":
    main()
