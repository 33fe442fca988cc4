"""Speed and optimum of optbench's GARCH-family fits against the arch library, same
data, same run.

Data: arch's bundled datasets (the arch library's ``arch.data``): ``sp500`` (last
5,000 daily returns), ``nasdaq``, ``wti`` and ``vix``; daily log returns of the
adjusted close (sp500, nasdaq) or the close column (wti, vix), missing prices dropped.
Models: GARCH-normal, GJR-t and EGARCH-t with a constant mean. The two libraries are
timed alternately, round by round, in one process, so that a change in the machine's
load affects both alike; each figure is a median over the rounds.

Printed per dataset: optbench's and arch's median time, the ratio arch / optbench and
the log-likelihood difference optbench - arch (arch's percent-return likelihood
converted to decimal returns by ``+ n ln 100``); then per model the median ratio over
the four datasets. Targets: median ratio >= 4 for GARCH and GJR, >= 3 for EGARCH, and
no fit below arch's log-likelihood by more than 1e-6.
Run: .venv/bin/python tests/benchmarks/bench_garch_fit.py [rounds]
"""
from __future__ import annotations

import math
import statistics
import sys
import time
import warnings

from pathlib import Path

import numpy as np
from arch import arch_model

from optbench.volatility.garch import fit_garch

sys.path.insert(0, str(Path(__file__).resolve().parent))
from timing import figure  # noqa: E402  (tests/benchmarks)

ROUNDS = 15
CASES = [("garch", "normal", dict(vol="GARCH", p=1, q=1, dist="normal")),
         ("gjr", "t", dict(vol="GARCH", p=1, o=1, q=1, dist="studentst")),
         ("egarch", "t", dict(vol="EGARCH", p=1, o=1, q=1, dist="studentst"))]
TARGET = {"garch": 4.0, "gjr": 4.0, "egarch": 3.0}


def dataset_returns() -> dict:
    from arch.data import nasdaq, sp500, vix, wti

    out = {}
    for name, mod in (("sp500", sp500), ("nasdaq", nasdaq), ("wti", wti), ("vix", vix)):
        d = mod.load()
        col = "Adj Close" if "Adj Close" in d.columns else d.columns[0]
        y = np.diff(np.log(d[col].dropna().to_numpy(dtype=float)))
        out[name] = y[-5000:] if name == "sp500" else y
    return out


def alternate(fns, rounds):
    """Median wall and median CPU (process) time of each function, the functions run
    in turn every round. CPU time is the steadier figure on a shared machine: it
    leaves out the time the process waits for a core."""
    for fn in fns:
        fn()  # warm-up
    times = [[] for _ in fns]
    cpus = [[] for _ in fns]
    for _ in range(rounds):
        for fn, ts, cs in zip(fns, times, cpus):
            c0 = time.process_time()
            t0 = time.perf_counter()
            fn()
            ts.append(time.perf_counter() - t0)
            cs.append(time.process_time() - c0)
    return ([statistics.median(ts) for ts in times],
            [statistics.median(cs) for cs in cpus])


def main(rounds: int = ROUNDS) -> None:
    data = dataset_returns()
    print(f"median of {rounds} alternating rounds per cell; ratio = arch / optbench "
          "(wall; CPU = process time)")
    print(f"{'model':<13}{'dataset':<8}{'n':>6}{'optbench ms':>13}{'arch ms':>9}"
          f"{'ratio':>7}{'CPU ratio':>10}{'loglik - arch':>15}")
    worst_ll = math.inf
    for model, dist, kw in CASES:
        ratios, cpu_ratios = [], []
        for name, y in data.items():
            am = arch_model(100.0 * y, mean="Constant", rescale=False, **kw)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                ref = am.fit(disp="off")
                ours = fit_garch(y, model, dist)
                (t_ours, t_ref), (c_ours, c_ref) = alternate(
                    [lambda: fit_garch(y, model, dist), lambda: am.fit(disp="off")], rounds)
            dll = ours.loglik - (ref.loglikelihood + y.size * math.log(100.0))
            worst_ll = min(worst_ll, dll)
            ratios.append(t_ref / t_ours)
            cpu_ratios.append(c_ref / c_ours)
            print(f"{model + '-' + dist:<13}{name:<8}{y.size:>6}{t_ours * 1e3:>13.2f}"
                  f"{t_ref * 1e3:>9.2f}{t_ref / t_ours:>7.2f}{c_ref / c_ours:>10.2f}"
                  f"{dll:>15.2e}"
                  + ("" if ours.converged and ours.model == model else
                     f"  ({ours.model}, {ours.fallback_reason})"))
        med = statistics.median(ratios)
        print(f"{model + '-' + dist:<13}median ratio {med:.2f} wall, "
              f"{statistics.median(cpu_ratios):.2f} CPU (target >= {TARGET[model]:g})\n")
        figure(f"{model}-{dist} fit, arch time / optbench time (CPU, median of 4 datasets)",
               statistics.median(cpu_ratios), "x", TARGET[model], better="higher",
               reference="arch's fit on sp500, nasdaq, wti and vix, same run")
    print(f"worst log-likelihood difference optbench - arch: {worst_ll:.2e} "
          "(target >= -1e-6)")
    figure("fit log-likelihood, optbench minus arch, worst of all fits", worst_ll, "",
           -1e-6, better="higher", reference="arch's optimum on the same data, same run")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else ROUNDS)
