"""Speed of optbench's path simulation against the arch library, same run.

100,000 paths x 63 trading days of GJR-t from a fitted state. optbench vectorises
over paths (one Python loop over days); arch's model.simulate draws one path per
call, so its figure is timed on 1,000 paths and scaled to 100,000 (stated in the
output). Target: optbench <= 0.25 s.

Then the simulation behind one comparison (a component figure, in-process): the
Student-t quantile table of the t draws (4,097 nodes) against scipy.special.stdtrit
on the same nodes, and the terminal draws of 8 expiries (503 days x 2,000 paths,
the demo's size, table built each time) against the same simulation written day by
day (the plain reference of tests/volatility/test_simulate_reference.py), with a
check that both give the same floats.
Run: .venv/bin/python tests/benchmarks/bench_simulate.py
"""
from __future__ import annotations


import numpy as np
from arch import arch_model
from arch.univariate import StudentsT

from optbench.volatility.simulate import simulate_paths
from timing import figure, median_cpu, median_time  # noqa: E402  (tests/benchmarks)

DEMO_DAYS = np.array([5, 20, 45, 70, 130, 260, 380, 503])
DEMO_PATHS = 2000

PARAMS = dict(mu=3e-4, omega=1.5e-6, alpha=0.02, gamma=0.15, beta=0.9, nu=7.0)
N_PATHS, HORIZON = 100_000, 63



def main() -> None:
    ours = median_time(lambda: simulate_paths("gjr", PARAMS, "t", 1.2e-4, HORIZON, N_PATHS,
                                              seed=1), 7)
    am = arch_model(None, mean="Constant", vol="GARCH", p=1, o=1, q=1, rescale=False)
    am.distribution = StudentsT(seed=np.random.default_rng(1))
    pct = [100 * PARAMS["mu"], 1e4 * PARAMS["omega"], PARAMS["alpha"], PARAMS["gamma"],
           PARAMS["beta"], PARAMS["nu"]]
    n_ref = 1000
    ref = median_time(lambda: [am.simulate(pct, HORIZON, burn=0) for _ in range(n_ref)], 3)
    ref_scaled = ref * N_PATHS / n_ref
    print(f"GJR-t, {N_PATHS:,} paths x {HORIZON} days")
    print(f"optbench simulate_paths: {ours:.3f} s (median of 7; target <= 0.25 s)")
    print(f"arch model.simulate:     {ref_scaled:.1f} s (1,000 single paths, scaled x100)")
    print(f"ratio arch / optbench:   {ref_scaled / ours:.0f}")
    figure("100k paths x 63 days GJR-t", ours, "s", 0.25,
           reference=f"arch simulate scaled {ref_scaled:.1f} s")
    comparison_simulation()


def _day_by_day_terminal(fit, daily, h):
    """The reference: the t table from the general quantile solver (``stdtrit``), the
    normals transformed as whole arrays, the days simulated and the terminal sums
    added one day at a time."""
    import math

    from optbench.pricing.special import ndtr, stdtrit

    p, n, horizon, nu = fit.params, DEMO_PATHS, int(h.max()), fit.params["nu"]
    grid = np.linspace(-8.0, 0.0, 4097)
    left = stdtrit(nu, ndtr(grid)) * math.sqrt((nu - 2.0) / nu)
    vals = np.concatenate([left, -left[-2::-1]])
    vals[4096] = 0.0
    value, slope = vals[:-1].astype(np.float32), np.diff(vals).astype(np.float32)
    x = np.random.default_rng(7).standard_normal((horizon, n), dtype=np.float32)
    pos = np.clip((x + np.float32(8.0)) * np.float32(512.0), np.float32(0.0),
                  np.float32(8192 - 1e-3))
    i = pos.astype(np.int32)
    z = slope[i] * (pos - i).astype(np.float32) + value[i]
    s2 = np.full(n, fit.last_variance)
    acc = np.zeros((3, n))
    out = {}
    for t in range(horizon):
        r = (np.sqrt(s2) * z[t] + daily) - 0.5 * s2
        acc[0] += (r - daily) + 0.5 * s2
        acc[1] += s2
        acc[2] += r * r
        zt = z[t]
        neg = np.minimum(zt, np.float32(0.0))
        m = zt * zt * np.float32(p["alpha"]) + neg * neg * np.float32(p["gamma"])
        s2 = s2 * (m + np.float32(p["beta"])) + p["omega"]
        if t + 1 in h:
            out[t + 1] = acc.copy()
    return np.stack([out[k] for k in h], axis=2)      # (3, paths, expiries)


def comparison_simulation() -> None:
    import scipy.special as sc

    from optbench.analysis.drift import choose_drift, simulate_terminal
    from optbench.pricing.special import ndtr, stdtrit_one_df
    from optbench.volatility import distributions

    class Fit:
        model, dist, last_variance = "gjr", "t", 1.2e-4
        params = dict(PARAMS, nu=5.87)

    x = np.linspace(-8.0, 0.0, 4097)
    p = ndtr(x)
    ours_tab = median_cpu(lambda: stdtrit_one_df(Fit.params["nu"], p), 15)
    ref_tab = median_cpu(lambda: sc.stdtrit(Fit.params["nu"], p), 15)
    choice = choose_drift(rate=0.04, div_yield=0.015)
    daily = choice.annual / 252.0

    def terminal():
        distributions._normal_to_t_table.cache_clear()
        return simulate_terminal(Fit, choice, DEMO_DAYS, DEMO_DAYS / 252.0, 0.04, 0.015,
                                 n_paths=DEMO_PATHS, seed=7)

    def reference():
        return _day_by_day_terminal(Fit, daily, DEMO_DAYS)

    ours_sim = median_cpu(terminal, 9)
    ref_sim = median_cpu(reference, 9)
    got, want = terminal(), reference()
    same = (np.array_equal(got.shock, want[0]) and np.array_equal(got.variance, want[1])
            and np.array_equal(got.realized_vol, np.sqrt(252.0 / DEMO_DAYS * want[2])))
    print("the simulation behind one comparison (component figures, in-process, median "
          "CPU seconds)")
    print(f"t quantile table, 4,097 nodes: optbench {1e3 * ours_tab:.1f} ms, "
          f"scipy.special.stdtrit {1e3 * ref_tab:.1f} ms (ratio {ref_tab / ours_tab:.1f})")
    print(f"terminal draws, 8 expiries, {DEMO_DAYS.max()} days x {DEMO_PATHS:,} paths: "
          f"optbench {1e3 * ours_sim:.1f} ms, day by day with the general solver's "
          f"table {1e3 * ref_sim:.1f} ms "
          f"(ratio {ref_sim / ours_sim:.1f}); same floats: {same}")
    figure("t quantile table (4,097 nodes)", ours_tab, "s", None,
           reference=f"scipy.special.stdtrit {ref_tab:.4f} s")
    figure("terminal draws, demo size", ours_sim, "s", None,
           reference=f"day-by-day simulation {ref_sim:.3f} s, same floats: {same}")


if __name__ == "__main__":
    main()
