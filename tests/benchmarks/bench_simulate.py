"""Speed of optbench's path simulation against the arch library, same run.

100,000 paths x 63 trading days of GJR-t from a fitted state. optbench vectorises
over paths (one Python loop over days); arch's model.simulate draws one path per
call, so its figure is timed on 1,000 paths and scaled to 100,000 (stated in the
output). Target: optbench <= 0.25 s. Run: .venv/bin/python tests/benchmarks/bench_simulate.py
"""
from __future__ import annotations


import numpy as np
from arch import arch_model
from arch.univariate import StudentsT

from optbench.volatility.simulate import simulate_paths
from timing import figure, median_time  # noqa: E402  (tests/benchmarks)

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


if __name__ == "__main__":
    main()
