"""The forecast band and the terminal simulation of screen rows, the code of this
checkout against another checkout's (the reference), on the same fitted models: CPU
time of each call alternated per underlying in one process, the medians of the
per-row ratios, milliseconds a row saved, and whether every output is the same to
the last bit. A development tool for changes to those two: it is named ``ab_*`` so
that ``run_all.py``, which runs the ``bench_*`` figures, leaves it out (it needs a
second checkout).

The reference is a copy of another checkout's ``optbench`` package renamed
``optbench_old`` (e.g. ``git archive main optbench | tar -x -C /tmp/ref`` then
``mv /tmp/ref/optbench /tmp/ref/optbench_old`` and the imports rewritten to
``optbench_old``); give its parent folder with ``--ref``.

Run: .venv/bin/python tests/benchmarks/ab_band_sim.py --ref /tmp/ref
     [--universe DIR] [--n 60] [--reps 3]
"""
from __future__ import annotations

import argparse
import importlib
import os
import statistics
import sys
import time

import numpy as np


def capture(folders):
    """(fit, band args, sim args) of each folder's screen row (lean row)."""
    from optbench.analysis import compare, drift
    from optbench.screening.rows import ScreenTask, screen_one
    from optbench.volatility.garch import GarchFit

    seen = []
    band0, sim0 = GarchFit.forecast_band, drift.simulate_terminal

    def band(self, *a, **k):
        seen.append(("band", self, a, k))
        return band0(self, *a, **k)

    def sim(fit, *a, **k):
        seen.append(("sim", fit, a, k))
        return sim0(fit, *a, **k)

    GarchFit.forecast_band, compare.simulate_terminal = band, sim
    try:
        out = []
        for f in folders:
            seen.clear()
            screen_one(ScreenTask(folder=f))
            b = [x for x in seen if x[0] == "band"]
            s = [x for x in seen if x[0] == "sim"]
            if b and s:
                out.append((f, b[0], s[0]))
    finally:
        GarchFit.forecast_band, compare.simulate_terminal = band0, sim0
    return out


def same(a, b) -> bool:
    if isinstance(a, tuple):
        return all(same(x, y) for x, y in zip(a, b))
    if hasattr(a, "shock"):
        return all(same(getattr(a, n), getattr(b, n))
                   for n in ("log_drift", "shock", "variance", "realized_vol", "horizons"))
    a, b = np.asarray(a), np.asarray(b)
    return a.shape == b.shape and a.dtype == b.dtype and a.tobytes() == b.tobytes()


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--ref", required=True)
    ap.add_argument("--universe",
                    default="/tmp/optbench-bench-universe/n5000-q2000-d2500-s20261201")
    ap.add_argument("--n", type=int, default=60)
    ap.add_argument("--start", type=int, default=0)
    ap.add_argument("--reps", type=int, default=3)
    ap.add_argument("--whole-row", action="store_true",
                    help="time whole screen rows (screen_one) instead")
    a = ap.parse_args()
    sys.path.insert(0, a.ref)
    if a.whole_row:
        return whole_rows(a)
    old_garch = importlib.import_module("optbench_old.volatility.garch")
    old_drift = importlib.import_module("optbench_old.analysis.drift")
    old_dist = importlib.import_module("optbench_old.volatility.distributions")
    from optbench.analysis import drift as new_drift
    from optbench.volatility import distributions as new_dist
    from optbench.volatility.garch import GarchFit

    names = sorted(x for x in os.listdir(a.universe) if x.startswith("SYN"))
    folders = [os.path.join(a.universe, x) for x in names[a.start:a.start + a.n]]
    rows = capture(folders)
    fns = {
        "band": (old_garch.GarchFit.forecast_band, GarchFit.forecast_band),
        "sim": (old_drift.simulate_terminal, new_drift.simulate_terminal),
    }
    caches = (old_dist._normal_to_t_table, new_dist._normal_to_t_table)
    times = {k: [[], []] for k in fns}
    identical = {k: True for k in fns}
    models = {}
    for _f, band, sim in rows:
        models[band[1].model + "-" + band[1].dist] = models.get(
            band[1].model + "-" + band[1].dist, 0) + 1
        for rep in range(a.reps):
            for key, call in (("band", band), ("sim", sim)):
                _, fit, args, kw = call
                res = [None, None]
                order = (0, 1) if rep % 2 == 0 else (1, 0)
                for which in order:
                    for c in caches:
                        c.cache_clear()     # each underlying has its own nu
                    t0 = time.process_time()
                    res[which] = fns[key][which](fit, *args, **kw)
                    times[key][which].append(time.process_time() - t0)
                if not same(res[0], res[1]):
                    identical[key] = False
    print(f"{len(rows)} underlyings x {a.reps} repetitions, models {models}")
    print(f"{'':6} {'old ms':>8} {'new ms':>8} {'ratio':>7} {'saved ms/row':>13} identical")
    tot = 0.0
    for key in fns:
        o, n = (np.array(x).reshape(len(rows), a.reps) for x in times[key])
        om, nm = np.median(o, axis=1), np.median(n, axis=1)
        ratio = statistics.median((nm / om).tolist())
        saved = float(np.mean(om - nm)) * 1e3
        tot += saved
        print(f"{key:6} {np.mean(om) * 1e3:8.2f} {np.mean(nm) * 1e3:8.2f} {ratio:7.3f} "
              f"{saved:13.2f} {identical[key]}")
    print(f"saved per row (mean of per-row median differences): {tot:.2f} ms")


def whole_rows(a) -> None:
    """Whole lean screen rows, this checkout's and the reference's, alternated per
    underlying: CPU time and whether the rows are equal (NaN equal to NaN)."""
    old_rows = importlib.import_module("optbench_old.screening.rows")
    old_dist = importlib.import_module("optbench_old.volatility.distributions")
    from optbench.screening import rows as new_rows
    from optbench.volatility import distributions as new_dist

    names = sorted(x for x in os.listdir(a.universe) if x.startswith("SYN"))
    folders = [os.path.join(a.universe, x) for x in names[a.start:a.start + a.n]]
    mods = (old_rows, new_rows)
    caches = (old_dist._normal_to_t_table, new_dist._normal_to_t_table)
    for m in mods:                          # warm both (imports, first-use costs)
        m.screen_one(m.ScreenTask(folder=folders[0]))
    t = np.empty((len(folders), a.reps, 2))
    equal = True
    for i, f in enumerate(folders):
        for rep in range(a.reps):
            out = [None, None]
            for which in ((0, 1) if (i + rep) % 2 == 0 else (1, 0)):
                for c in caches:
                    c.cache_clear()
                m = mods[which]
                t0 = time.process_time()
                out[which] = m.screen_one(m.ScreenTask(folder=f))
                t[i, rep, which] = time.process_time() - t0
            equal &= _rows_equal(out[0], out[1])
    med = np.median(t, axis=1)
    ratio = statistics.median((med[:, 1] / med[:, 0]).tolist())
    print(f"{len(folders)} underlyings x {a.reps} repetitions, whole lean rows")
    print(f"old {np.mean(med[:, 0]) * 1e3:.2f} ms  new {np.mean(med[:, 1]) * 1e3:.2f} ms  "
          f"median ratio {ratio:.4f}  saved {np.median(med[:, 0] - med[:, 1]) * 1e3:.2f} "
          f"ms/row (median of per-row differences)  rows equal: {equal}")


def _rows_equal(x, y) -> bool:
    if len(x) != len(y):
        return False
    for r, s in zip(x, y):
        if r.keys() != s.keys():
            return False
        for k in r:
            u, v = r[k], s[k]
            if isinstance(u, float) and isinstance(v, float):
                if not (u == v or (u != u and v != v)):
                    return False
            elif u != v:
                return False
    return True


if __name__ == "__main__":
    main()
