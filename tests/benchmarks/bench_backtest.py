"""Speed of realized-vol estimators and of the out-of-sample check against reference
libraries, same data, same run.

1. Rolling close-to-close realized vol (21-day window, 5,000 days): optbench
   against pandas' ``rolling(21).std()``.
2. The out-of-sample check of a GJR-t model on arch's bundled S&P 500 sample
   (arch.data.sp500; 2,000 returns to fit, the rest held out, 1/5/21-day
   forecasts from every origin): optbench's ``backtest`` against the same steps
   done with arch — fit, ``fix`` the parameters on the whole series, analytic
   ``forecast(horizon=21, start=split)``.

Prints medians (ms) and the ratio reference / optbench.
Run: .venv/bin/python tests/benchmarks/bench_backtest.py
"""
from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
from arch import arch_model
from arch.data import sp500

from optbench.volatility.backtest import backtest
from optbench.volatility.realized import close_to_close
from timing import figure, median_time  # noqa: E402  (tests/benchmarks)



def main() -> None:
    prices = sp500.load()["Adj Close"]
    close = prices.to_numpy()
    dates = prices.index.to_numpy().astype("datetime64[D]")
    y = np.diff(np.log(close))
    n_fit = 2000

    c5k = close[-5001:]
    ours = median_time(lambda: close_to_close(c5k, 21), repeats=25)
    s = pd.Series(np.log(c5k))
    ref = median_time(lambda: s.diff().rolling(21).std() * np.sqrt(252), repeats=25)
    print(f"{'task':<34}{'optbench ms':>13}{'ref ms':>10}{'ref/optbench':>14}")
    print(f"{'rolling 21d close-to-close':<34}{ours * 1e3:>13.2f}{ref * 1e3:>10.2f}"
          f"{ref / ours:>14.2f}   (pandas)")

    split = dates[n_fit]   # return n_fit - 1 is dated dates[n_fit]
    ours = median_time(lambda: backtest(y, split, model="gjr", dist="t", dates=dates))

    def with_arch():
        am = arch_model(100 * y[:n_fit], mean="Constant", vol="GARCH", p=1, o=1, q=1,
                        dist="t", rescale=False)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = am.fit(disp="off")
        full = arch_model(100 * y, mean="Constant", vol="GARCH", p=1, o=1, q=1, dist="t",
                          rescale=False).fix(res.params)
        full.forecast(horizon=21, start=n_fit - 1, reindex=False, method="analytic")
    ref = median_time(with_arch)
    print(f"{'GJR-t backtest, ' + str(y.size - n_fit) + ' days out':<34}{ours * 1e3:>13.2f}"
          f"{ref * 1e3:>10.2f}{ref / ours:>14.2f}   (arch: fit + fix + forecast only)")
    figure("GJR-t backtest vs arch", ref / ours, "x", None, better="higher",
           reference="arch fit + fix + forecast")


if __name__ == "__main__":
    main()
