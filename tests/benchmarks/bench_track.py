"""Speed of ``optbench track`` and of appending to the record store.

Targets (issue 13): the track record of the demo (about 750 dates x 5 tenors) within
5 s wall including the interpreter's start; appending one comparison to the record
store within 50 ms. Printed side by side in the same run (shared, noisy machine):

- the floor every run pays: ``python -c pass`` and ``import numpy, pandas,
  scipy.optimize``;
- ``optbench track --format json`` on the demo (median wall of fresh processes, and
  its CPU seconds);
- the in-process stages: loading, the walk-forward replay (its refits), scoring;
- the reference libraries on the same work: arch fitting GJR-GARCH(1,1)-t on the
  same refit windows as the replay, and statsmodels' OLS with HAC covariance on the
  same per-tenor regressions as optbench's Newey-West;
- appending the demo comparison to a record store (``record_comparison``, with its
  WAL mode, full sync, immediate transaction and checks) against a bare
  ``sqlite3`` ``executemany`` of the same rows into a plain table.

Run: .venv/bin/python tests/benchmarks/bench_track.py [--repeats N]
"""
from __future__ import annotations

import argparse
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from timing import figure, median_time, process_time  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"
PY = sys.executable



def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args()
    n = args.repeats

    print("optbench track on the demo (target: <= 5 s wall including start-up)")
    floor, _ = process_time([PY, "-c", "pass"], n)
    imports, _ = process_time([PY, "-c", "import numpy, pandas, scipy.optimize"], n)
    track_wall, track_cpu = process_time([PY, "-m", "optbench", "track", str(DEMO), "-f", "json"], n)
    print(f"  python -c pass                         {floor:7.3f} s")
    print(f"  import numpy, pandas, scipy.optimize   {imports:7.3f} s")
    print(f"  optbench track -f json (demo)          {track_wall:7.3f} s wall, "
          f"{track_cpu:.3f} s CPU  (median of {n})")
    figure("optbench track on the demo, wall", track_wall, "s", 5.0,
           reference=f"import numpy, pandas, scipy.optimize {imports:.2f} s, same run")

    from optbench.data.history import load_history
    from optbench.data.scenario import read_meta
    from optbench.track.build import tenor_record, track_record
    from optbench.track.ivfile import load_iv_history
    from optbench.track.walkforward import walk_forward

    t0 = time.perf_counter()
    hist = load_history(DEMO)
    iv = load_iv_history(DEMO)
    hol = read_meta(DEMO).get("holidays", ())
    t_load = time.perf_counter() - t0
    obs = iv.frame
    t0 = time.perf_counter()
    wf = walk_forward(hist.returns, hist.dates, obs, holidays=hol)
    t_wf = time.perf_counter() - t0
    t0 = time.perf_counter()
    for t in sorted(set(wf.observations["tenor"])):
        tenor_record(wf.observations, int(t))
    t_score = time.perf_counter() - t0
    n_obs = len(wf.observations)
    n_refits = len(wf.refits)
    print(f"\nin-process stages ({n_obs:,} observations, {n_refits} refits)")
    print(f"  load history + implied-vol file        {t_load:7.3f} s")
    print(f"  walk-forward replay                    {t_wf:7.3f} s "
          f"({1000 * t_wf / n_refits:.1f} ms a refit: fit, band, simulation, filter)")
    print(f"  scoring 5 tenors                       {t_score:7.3f} s")

    # reference: arch on the same refit windows
    try:
        import arch
        idx = wf.refits["n_returns"].to_numpy(int)
        t0 = time.perf_counter()
        for i0 in idx:
            arch.arch_model(hist.returns[:i0] * 100, mean="Constant", vol="GARCH", p=1, o=1,
                            q=1, dist="t").fit(disp="off")
        t_arch = time.perf_counter() - t0
        from optbench.volatility.garch import fit_garch
        t0 = time.perf_counter()
        for i0 in idx:
            fit_garch(hist.returns[:i0], model="gjr", dist="t")
        t_ours = time.perf_counter() - t0
        print(f"\nthe {n_refits} refit fits (GJR-GARCH(1,1)-t):")
        print(f"  arch arch_model(...).fit               {t_arch:7.3f} s")
        print(f"  optbench fit_garch                     {t_ours:7.3f} s   "
              f"ratio {t_arch / t_ours:5.1f}x")
    except ImportError:
        print("  (arch not installed: reference fits skipped)")

    # reference: statsmodels HAC on the same regressions
    try:
        import statsmodels.api as sm
        from optbench.track import stats
        from optbench.track.walkforward import overlap_lags
        o = wf.observations[wf.observations["checked"]]
        groups = [(o[o["tenor"] == t]) for t in sorted(set(o["tenor"]))]
        regs = []
        for g in groups:
            rv2 = g["realized_vol"].to_numpy() ** 2
            x = np.column_stack([g["atm_iv"].to_numpy() ** 2, g["forecast_vol"].to_numpy() ** 2])
            regs.append((rv2, x, overlap_lags(g["date"].to_numpy(), g["expiry"].to_numpy())))

        def ours():
            for y, x, lag in regs:
                stats.ols_newey_west(y, {"a": x[:, 0], "b": x[:, 1]}, lag)

        def ref():
            for y, x, lag in regs:
                sm.OLS(y, sm.add_constant(x)).fit(cov_type="HAC", cov_kwds={"maxlags": lag})

        t_ref = median_time(ref, n)
        t_nw = median_time(ours, n)
        print("\nencompassing regressions with Newey-West errors, 5 tenors:")
        print(f"  statsmodels OLS HAC                    {1000 * t_ref:7.1f} ms")
        print(f"  optbench ols_newey_west                {1000 * t_nw:7.1f} ms   "
              f"ratio {t_ref / t_nw:5.1f}x")
    except ImportError:
        print("  (statsmodels not installed: reference regressions skipped)")

    # appending to the record store
    from optbench.analysis.compare import compare
    from optbench.track.store import EXPIRY_FIELDS, record_comparison
    comparison = compare(DEMO)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "records.sqlite"
        t_append = median_time(lambda: record_comparison(path, comparison), max(n, 9))
        bare = Path(tmp) / "bare.sqlite"
        con = sqlite3.connect(bare)
        con.execute(f"CREATE TABLE e ({', '.join(EXPIRY_FIELDS)})")
        con.close()
        rows = [tuple(float(getattr(e, f)) if isinstance(getattr(e, f), float)
                      else str(getattr(e, f)) for f in EXPIRY_FIELDS)
                for e in comparison.expiries]

        def bare_append():
            c = sqlite3.connect(bare)
            with c:
                c.executemany(f"INSERT INTO e VALUES ({', '.join('?' * len(EXPIRY_FIELDS))})",
                              rows)
            c.close()
        t_bare = median_time(bare_append, max(n, 9))
    figure("append one comparison to the record store", t_append, "s", 0.05,
           reference=f"the same rows written without checks {t_bare * 1e3:.1f} ms")
    print(f"\nappending one comparison ({len(comparison.expiries)} expiries) "
          "(target: <= 50 ms)")
    print(f"  sqlite3 executemany, plain table       {1000 * t_bare:7.1f} ms")
    print(f"  optbench record_comparison             {1000 * t_append:7.1f} ms   "
          f"ratio {t_append / t_bare:5.1f}x the bare insert")


if __name__ == "__main__":
    main()
