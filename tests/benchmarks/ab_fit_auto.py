"""The screen's ``auto`` model fit (GARCH, GJR and EGARCH with Student-t innovations
and a constant mean, the lowest BIC kept), the code of this checkout against another
checkout's (the reference), on the histories of a synthetic universe: CPU time of
each fit alternated per underlying in one process, the median of the per-underlying
ratios, the evaluations of the likelihood per model, and the largest differences in
log-likelihood and parameters between the two. A development tool for changes to
the estimator: it is named ``ab_*`` so that ``run_all.py``, which runs the
``bench_*`` figures, leaves it out (it needs a second checkout).

The reference is a copy of another checkout's ``optbench`` package renamed
``optbench_old`` (e.g. ``git archive main optbench | tar -x -C /tmp/ref`` then
``mv /tmp/ref/optbench /tmp/ref/optbench_old`` and the imports rewritten to
``optbench_old``); give its parent folder with ``--ref``.

Run: .venv/bin/python tests/benchmarks/ab_fit_auto.py --ref /tmp/ref
     [--universe DIR] [--n 120] [--reps 3]
"""
from __future__ import annotations

import argparse
import collections
import importlib
import os
import statistics
import sys
import time

import numpy as np


def histories(universe: str, n: int, start: int) -> list[tuple[str, np.ndarray]]:
    """The returns each screen row fits: the history up to the chain's date, for
    ``n`` underlyings spread evenly over the universe."""
    from optbench.analysis.compare import _history_upto
    from optbench.data.scenario import load_scenario

    names = sorted(x for x in os.listdir(universe) if x.startswith("SYN"))
    pick = np.linspace(start, len(names) - 1, n).astype(int)
    out = []
    for i in pick:
        sc = load_scenario(os.path.join(universe, names[i]))
        h = _history_upto(sc.history, sc.chain.asof, [])
        out.append((names[i], np.asarray(h.returns, dtype=float)))
    return out


def counted(garch_module):
    """Wrap the package's likelihood calls to count them per model, and its single
    fits to keep each candidate's log-likelihood and parameters."""
    counts = collections.Counter()
    fits = {}
    P = garch_module._Problem

    def wrap(name):
        f0 = getattr(P, name)

        def f(self, *a, **k):
            counts[self.spec.name] += 1
            return f0(self, *a, **k)
        setattr(P, name, f)
    for name in ("objective_grad", "objective", "start_curvature"):
        wrap(name)
    est0 = garch_module._estimate

    def est(y, model, *a, **k):
        f, prob = est0(y, model, *a, **k)
        if not k.get("quick"):
            fits[model] = (f.loglik, dict(f.params),
                           bool(f.optimality and f.optimality["passed"]), prob)
        return f, prob
    garch_module._estimate = est
    return counts, fits


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--ref", required=True)
    ap.add_argument("--universe",
                    default="/tmp/optbench-bench-universe/n5000-q2000-d2500-s20261201")
    ap.add_argument("--n", type=int, default=120)
    ap.add_argument("--start", type=int, default=0)
    ap.add_argument("--reps", type=int, default=3)
    a = ap.parse_args()
    sys.path.insert(0, a.ref)
    old = importlib.import_module("optbench_old.volatility.garch")
    from optbench.volatility import garch as new

    series = histories(a.universe, a.n, a.start)
    fit = (old.fit_garch, new.fit_garch)
    times = [[], []]
    for _name, y in series:
        for rep in range(a.reps):
            per = [0.0, 0.0]
            for which in ((0, 1) if rep % 2 == 0 else (1, 0)):
                t0 = time.process_time()
                fit[which](y, "auto", "t", "constant")
                per[which] = time.process_time() - t0
            times[0].append(per[0])
            times[1].append(per[1])
    o = np.array(times[0]).reshape(len(series), a.reps)
    n = np.array(times[1]).reshape(len(series), a.reps)
    om, nm = np.median(o, axis=1), np.median(n, axis=1)
    print(f"{len(series)} underlyings x {a.reps} repetitions (CPU, alternated)")
    print(f"ms per auto fit: old {np.median(om) * 1e3:.2f}, new {np.median(nm) * 1e3:.2f} "
          f"(medians); mean old {np.mean(om) * 1e3:.2f}, new {np.mean(nm) * 1e3:.2f}; "
          f"median per-underlying ratio new/old {statistics.median((nm / om).tolist()):.3f}; "
          f"mean saved {np.mean(om - nm) * 1e3:.2f} ms")

    # evaluations and outcomes (a separate pass, counters on)
    c_old, f_old = counted(old)
    c_new, f_new = counted(new)
    worst_ll, worst_par, chosen_diff, kkt_fail = 0.0, 0.0, 0, 0
    for _name, y in series:
        f_old.clear()
        f_new.clear()
        a_old = old.fit_garch(y, "auto", "t", "constant")
        a_new = new.fit_garch(y, "auto", "t", "constant")
        chosen_diff += a_old.model != a_new.model
        for m, (ll, p, _ok, prob) in f_old.items():
            if prob is not None or m not in f_new:
                continue
            ll_n, p_n, ok_n, _ = f_new[m]
            kkt_fail += not ok_n
            worst_ll = min(worst_ll, ll_n - ll)
            worst_par = max(worst_par, max(abs(p_n[k] - p[k]) / max(abs(p[k]), 1e-3)
                                           for k in p))
    k = len(series)
    print("likelihood evaluations per auto fit (objective, objective+gradient, start "
          "curvature):")
    for m in ("garch", "gjr", "egarch"):
        print(f"  {m:7} old {c_old[m] / k:6.2f}  new {c_new[m] / k:6.2f}")
    print(f"chosen model differs: {chosen_diff}; KKT check failed (new): {kkt_fail}; "
          f"largest log-likelihood drop new - old: {worst_ll:.3g}; largest parameter "
          f"change (relative, |p| >= 1e-3): {worst_par:.3g}")


if __name__ == "__main__":
    main()
