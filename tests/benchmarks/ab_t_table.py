"""The simulation's normal-to-t quantile table (``_normal_to_t_table``) built by this
checkout's quadrature path (``TABLE_BY_QUADRATURE = True``) against a reference
checkout's table, in one process: CPU time of each build alternated per degrees of
freedom (medians of the per-df ratios), whether the float32 ``vals`` and ``slope``
arrays are the same to the last bit (and how many entries differ, by how many float32
units in the last place), and, with ``--rows N``, whole lean screen rows alternated
per underlying (the reference's rows against this checkout's with the quadrature
path on). A development tool: named ``ab_*`` so that ``run_all.py`` leaves it out (it
needs a second checkout).

The reference is a copy of another checkout's ``optbench`` package renamed
``optbench_old`` (``git archive main optbench | tar -x -C /tmp/ref``, the folder
renamed and its imports rewritten, as for ``ab_band_sim.py``); give its parent folder
with ``--ref``. The degrees of freedom: ``--n-grid`` values spread over [2.1, 200]
(geometrically) plus the fitted values of the first ``--n-universe`` underlyings'
screen rows.

Run: .venv/bin/python tests/benchmarks/ab_t_table.py --ref /tmp/ref [--rows 100]
     [--grid] [--skip-tables] [--n-universe 40] [--rows-start N]
"""
from __future__ import annotations

import argparse
import importlib
import math
import os
import statistics
import sys
import time

import numpy as np

UNIVERSE = "/tmp/optbench-bench-universe/n5000-q2000-d2500-s20261201"


def universe_nus(folders) -> list[float]:
    """The degrees of freedom whose tables the screen rows of ``folders`` build."""
    from optbench.screening.rows import ScreenTask, screen_one
    from optbench.volatility import distributions as dist

    seen: list[float] = []
    build = dist._normal_to_t_table

    def spy(nu):
        seen.append(float(nu))
        return build(nu)

    dist._normal_to_t_table = spy
    try:
        for f in folders:
            build.cache_clear()
            screen_one(ScreenTask(folder=f))
    finally:
        dist._normal_to_t_table = build
    return sorted(set(seen))


def ulps32(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Distance in float32 units in the last place (same-sign finite values)."""
    ia = a.view(np.int32).astype(np.int64)
    ib = b.view(np.int32).astype(np.int64)
    ia = np.where(ia < 0, -(ia & 0x7FFFFFFF), ia)
    ib = np.where(ib < 0, -(ib & 0x7FFFFFFF), ib)
    return np.abs(ia - ib)


def tables(a, nus, fitted=()) -> None:
    old_dist = importlib.import_module("optbench_old.volatility.distributions")
    from optbench.volatility import distributions as new_dist

    new_dist.TABLE_BY_QUADRATURE = True
    builds = (old_dist._normal_to_t_table, new_dist._normal_to_t_table)
    for b in builds:
        b.cache_clear()
        b(7.0)                                       # warm (node probabilities)
    t = np.empty((len(nus), a.reps, 2))
    n_diff_vals = n_diff_slope = 0
    worst = 0
    tables_differing = 0
    for i, nu in enumerate(nus):
        out = [None, None]
        for rep in range(a.reps):
            for which in ((0, 1) if (i + rep) % 2 == 0 else (1, 0)):
                builds[which].cache_clear()
                t0 = time.process_time()
                out[which] = builds[which](nu)
                t[i, rep, which] = time.process_time() - t0
        (vo, so), (vn, sn) = out
        dv = int(np.count_nonzero(vo != vn))
        ds = int(np.count_nonzero(so != sn))
        n_diff_vals += dv
        n_diff_slope += ds
        if dv or ds:
            tables_differing += 1
            worst = max(worst, int(ulps32(vo, vn).max()), int(ulps32(so, sn).max()))
            print(f"  nu={nu!r}: {dv} vals and {ds} slopes differ")
    med = np.median(t, axis=1)
    ratio = statistics.median((med[:, 1] / med[:, 0]).tolist())
    print(f"{len(nus)} degrees of freedom x {a.reps} repetitions, table builds (CPU)")
    print(f"old {np.median(med[:, 0]) * 1e3:.3f} ms  new {np.median(med[:, 1]) * 1e3:.3f} ms "
          f"(medians)  median of per-df ratios {ratio:.3f}")
    fit = np.isin(np.asarray(nus), np.asarray(list(fitted)))
    if fit.any():
        r_fit = statistics.median((med[fit, 1] / med[fit, 0]).tolist())
        print(f"the {int(fit.sum())} fitted dfs: old {np.median(med[fit, 0]) * 1e3:.3f} ms  "
              f"new {np.median(med[fit, 1]) * 1e3:.3f} ms  median of ratios {r_fit:.3f}")
    print(f"float32 entries differing: vals {n_diff_vals}, slope {n_diff_slope} of "
          f"{len(nus) * 8192} each, in {tables_differing} tables, at most {worst} ulp")


def rows(a, folders) -> None:
    old_rows = importlib.import_module("optbench_old.screening.rows")
    old_dist = importlib.import_module("optbench_old.volatility.distributions")
    from optbench.screening import rows as new_rows
    from optbench.volatility import distributions as new_dist

    new_dist.TABLE_BY_QUADRATURE = True
    if a.grid:
        from optbench.volatility import forecast as new_forecast
        new_forecast.QUANTILE_GRID_ONE_DF = True
    sys.path.insert(0, os.path.dirname(__file__))
    from ab_band_sim import _rows_equal

    mods = (old_rows, new_rows)
    caches = (old_dist._normal_to_t_table, new_dist._normal_to_t_table)
    for m in mods:
        m.screen_one(m.ScreenTask(folder=folders[0]))
    t = np.empty((len(folders), a.reps, 2))
    equal = 0
    worst = 0.0
    for i, f in enumerate(folders):
        for rep in range(a.reps):
            out = [None, None]
            for which in ((0, 1) if (i + rep) % 2 == 0 else (1, 0)):
                for c in caches:
                    c.cache_clear()               # each underlying has its own nu
                m = mods[which]
                t0 = time.process_time()
                out[which] = m.screen_one(m.ScreenTask(folder=f))
                t[i, rep, which] = time.process_time() - t0
            same = _rows_equal(out[0], out[1])
            equal += same
            if not same:
                worst = max(worst, _max_rel_diff(out[0], out[1]))
    med = np.median(t, axis=1)
    ratio = statistics.median((med[:, 1] / med[:, 0]).tolist())
    print(f"{len(folders)} underlyings x {a.reps} repetitions, whole lean rows (CPU)")
    print(f"old {np.mean(med[:, 0]) * 1e3:.2f} ms  new {np.mean(med[:, 1]) * 1e3:.2f} ms  "
          f"median of per-row ratios {ratio:.4f}  saved "
          f"{np.median(med[:, 0] - med[:, 1]) * 1e3:.2f} ms/row (median of per-row "
          f"differences)  rows equal: {equal} of {len(folders) * a.reps} (largest "
          f"relative difference of the others {worst:.1e})")


def _max_rel_diff(x, y) -> float:
    worst = 0.0
    for r, s in zip(x, y):
        for k in r:
            u, v = r.get(k), s.get(k)
            if isinstance(u, float) and isinstance(v, float) and u != v and u == u:
                worst = max(worst, abs(u - v) / max(abs(u), abs(v)))
            elif not isinstance(u, float) and u != v:
                worst = math.inf
    return worst


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--ref", required=True)
    ap.add_argument("--universe", default=UNIVERSE)
    ap.add_argument("--n-grid", type=int, default=480)
    ap.add_argument("--n-universe", type=int, default=40)
    ap.add_argument("--reps", type=int, default=3)
    ap.add_argument("--rows", type=int, default=0,
                    help="also time this many whole lean screen rows")
    ap.add_argument("--grid", action="store_true",
                    help="rows also with forecast.QUANTILE_GRID_ONE_DF on")
    ap.add_argument("--rows-start", type=int, default=None,
                    help="first row folder (default: after the --n-universe ones)")
    ap.add_argument("--skip-tables", action="store_true")
    a = ap.parse_args()
    sys.path.insert(0, a.ref)
    names = sorted(x for x in os.listdir(a.universe) if x.startswith("SYN"))
    fitted = ([] if a.skip_tables else
              universe_nus([os.path.join(a.universe, x) for x in names[:a.n_universe]]))
    grid = np.geomspace(2.1, 200.0, a.n_grid).tolist()
    if fitted:
        print(f"fitted degrees of freedom of {a.n_universe} rows: {len(fitted)} values in "
              f"[{min(fitted):.3f}, {max(fitted):.3f}]")
    if not a.skip_tables:
        tables(a, sorted(set(grid + fitted)), fitted)
    if a.rows:
        start = a.n_universe if a.rows_start is None else a.rows_start
        rows(a, [os.path.join(a.universe, x) for x in names[start:start + a.rows]])


if __name__ == "__main__":
    main()
