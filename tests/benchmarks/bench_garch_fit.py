"""Speed of optbench's GARCH-family fits against the arch library, same data, same run.

Prints the median wall time of each fit on 5,000 daily returns of arch's bundled
S&P 500 sample (arch.data.sp500), alone and with its robust standard errors read,
and the ratios arch / optbench. Target: optbench at least 4x faster for GARCH-normal and
GJR-t. Run: .venv/bin/python tests/benchmarks/bench_garch_fit.py
"""
from __future__ import annotations

import statistics
import time
import warnings

import numpy as np
from arch import arch_model
from arch.data import sp500

from optbench.volatility.garch import fit_garch

REPEATS = 15


def median_time(fn, repeats=REPEATS):
    fn()  # warm-up
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


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
        ours = median_time(lambda: fit_garch(y, model, dist))
        ours_se = median_time(lambda: fit_garch(y, model, dist).std_errors)
        am = arch_model(y_pct, mean="Constant", rescale=False, **kw)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ref = median_time(lambda: am.fit(disp="off"))
            ref_se = median_time(lambda: am.fit(disp="off").std_err)
        print(f"{model + '-' + dist:<14}{ours * 1e3:>10.2f}{ref * 1e3:>9.2f}{ref / ours:>7.2f}"
              f"{ours_se * 1e3:>13.2f}{ref_se * 1e3:>9.2f}{ref_se / ours_se:>7.2f}")


if __name__ == "__main__":
    main()
