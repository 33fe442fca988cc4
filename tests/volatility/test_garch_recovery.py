"""Parameter recovery: fit long series simulated by the arch library from known
parameters (arch.univariate.arch_model(...).simulate, an independent simulator),
20,000 days each, fixed seeds."""
from __future__ import annotations

import math

import numpy as np
import pytest
from arch import arch_model
from arch.univariate import Normal, StudentsT

from optbench.volatility.garch import fit_garch

N = 20_000


def _simulate_pct(vol_kw, params, seed):
    am = arch_model(None, mean="Constant", rescale=False, **vol_kw)
    dist = Normal if vol_kw["dist"] == "normal" else StudentsT
    am.distribution = dist(seed=np.random.default_rng(seed))   # arch's seeded draws
    sim = am.simulate(params, N, burn=500)
    return sim["data"].to_numpy()


@pytest.mark.parametrize("model,dist,vol_kw,true", [
    ("garch", "normal", dict(vol="GARCH", p=1, q=1, dist="normal"),
     dict(mu=0.04, omega=0.02, alpha=0.08, beta=0.90)),
    ("gjr", "t", dict(vol="GARCH", p=1, o=1, q=1, dist="studentst"),
     dict(mu=0.03, omega=0.015, alpha=0.03, gamma=0.12, beta=0.89, nu=7.0)),
])
def test_recovers_simulated_parameters(model, dist, vol_kw, true):
    y_pct = _simulate_pct(vol_kw, list(true.values()), seed=2024)
    fit = fit_garch(y_pct / 100, model, dist)
    assert fit.converged and fit.model == model
    est = dict(fit.params)
    est["mu"] *= 100          # back to the percent units of the simulation
    est["omega"] *= 1e4
    for k, v in true.items():
        se = fit.std_errors[k] * {"mu": 100, "omega": 1e4}.get(k, 1)
        # within 4 robust standard errors of the truth
        assert abs(est[k] - v) < 4 * se, (k, est[k], v, se)
    # persistence is pinned down tightly on 20,000 days
    true_p = true["alpha"] + true.get("gamma", 0) / 2 + true["beta"]
    assert fit.persistence == pytest.approx(true_p, abs=0.01)
    assert math.isfinite(fit.long_run_vol)
