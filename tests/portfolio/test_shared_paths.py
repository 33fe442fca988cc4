"""One simulation serves the hedge estimate, its loss distribution and its menu.

The shared draws must give the figures each reader got from its own simulation: the
hedge estimate to the last bit (the same additions in the same order), the joint
paths to rounding (1e-12), and both must agree with the terminal log return built by
hand from the simulated days, :math:`X_h = a\\tau + \\sum\\sigma_i z_i -
\\tfrac12\\sum\\sigma_i^2` (Glasserman, *Monte Carlo Methods in Financial
Engineering*, 2003, §3.2, the discretised log price).
"""
from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from optbench.analysis.drift import _sums_at_horizons, simulate_terminal
from optbench.analysis.hedge import (_drift_of, hedge_expiry, hedge_from_comparison,
                                     simulate_hedge_paths)
from optbench.analysis.portfolio import portfolio_hedge, simulate_joint
from optbench.analysis.portfolio.plan import horizon_market
from optbench.analysis.results import HedgeRequest


def test_sums_at_horizons_are_the_cumulative_sums_bit_for_bit():
    rng = np.random.default_rng(3)
    r = rng.normal(0, 0.01, size=(40, 500))
    v = rng.uniform(1e-5, 4e-4, size=(40, 500))
    h = np.array([7, 1, 40, 7, 22])          # unsorted, repeated, first and last day
    s, var, sq = _sums_at_horizons(r, v, 0.0002, 1.0, h)
    assert np.array_equal(s, np.cumsum(r - 0.0002 + 0.5 * v, axis=0)[h - 1].T)
    assert np.array_equal(var, np.cumsum(v, axis=0)[h - 1].T)
    assert np.array_equal(sq, np.cumsum(r * r, axis=0)[h - 1].T)


def test_a_column_is_its_expiry_simulated_alone(comparison):
    fit, choice = comparison.fit, _drift_of(comparison)
    long = simulate_terminal(fit, choice, [10, 63, 130], [0.04, 0.25, 0.5],
                             [0.04, 0.041, 0.042], [0.015, 0.014, 0.013],
                             n_paths=3000, seed=11)
    alone = simulate_terminal(fit, choice, [63], [0.25], [0.041], [0.014], n_paths=3000,
                              seed=11)
    col = long.column_for(63, 0.25, 0.041, 0.014)
    assert col == 1 and long.column_for(63, 0.25, 0.040, 0.014) is None
    assert np.array_equal(long.log_return(1.0, col), alone.log_return(1.0, 0))
    assert np.array_equal(long.realized_vol[:, col], alone.realized_vol[:, 0])
    # by hand from the simulated days (module docstring)
    sim = fit.simulate(130, n_paths=3000, seed=11)
    mu = float(fit.params.get("mu", 0.0) or 0.0)
    by_hand = ((0.041 - 0.014) * 0.25 + np.cumsum(sim.returns - mu, axis=1)[:, 62]
               - 0.5 * np.cumsum(sim.variances, axis=1)[:, 62])
    np.testing.assert_allclose(long.log_return(1.0, col), by_hand, atol=1e-12)


@pytest.mark.parametrize("structure", ["put", "collar"])
def test_the_estimate_from_shared_draws_is_its_own(comparison, structure):
    req = HedgeRequest(5e6, floor=0.9, days=120, structure=structure)
    own = hedge_from_comparison(comparison, req, n_paths=4000, seed=8)
    row = hedge_expiry(comparison, req)
    td = np.array(sorted({row.trading_days, 20, 200}))
    t, r, q = horizon_market(comparison, td, row)
    draws = simulate_hedge_paths(comparison, td, t, r, q, n_paths=4000, seed=8)
    shared = hedge_from_comparison(comparison, req, n_paths=4000, seed=8, draws=draws)
    assert dataclasses.asdict(shared) == dataclasses.asdict(own)
    # draws with another number of paths are not used: the hedge simulates its own
    fewer = simulate_hedge_paths(comparison, td, t, r, q, n_paths=1000, seed=8)
    assert hedge_from_comparison(comparison, req, n_paths=4000, seed=8,
                                 draws=fewer).expected_payoff == own.expected_payoff


@pytest.mark.parametrize("drift", ["carry", None, 0.05])
def test_joint_paths_from_shared_draws(comparison, demo_fit, drift):
    td = np.array([21, 63, 126])
    t, r, q = np.array([30, 91, 182]) / 365, np.array([0.04, 0.041, 0.042]), \
        np.array([0.015, 0.014, 0.013])
    own = simulate_joint(comparison.fit, demo_fit.beta.residuals, 0.9, td, t, rates=r,
                         carries=q, drift=drift, excess_return=0.01, n_paths=5000, seed=4)
    draws = simulate_hedge_paths(comparison, td, t, r, q, n_paths=5000, seed=4)
    shared = simulate_joint(comparison.fit, demo_fit.beta.residuals, 0.9, td, t, rates=r,
                            carries=q, drift=drift, excess_return=0.01, n_paths=5000,
                            seed=4, underlying=draws)
    np.testing.assert_allclose(shared.index, own.index, rtol=0, atol=1e-12)
    assert np.array_equal(shared.residual, own.residual)
    assert shared.drift_rule == own.drift_rule
    with pytest.raises(ValueError):
        simulate_joint(comparison.fit, None, 1.0, td[:2], t[:2], rates=r[:2],
                       carries=q[:2], n_paths=5000, seed=4, underlying=draws)


def test_portfolio_hedge_simulates_the_underlying_once(comparison, demo_fit, monkeypatch):
    import optbench.volatility.simulate as simulate
    calls = []
    real = simulate.day_blocks    # behind simulate_paths and simulate_terminal alike

    def counted(*args, **kwargs):
        calls.append(args[4])                 # the horizon simulated
        return real(*args, **kwargs)

    monkeypatch.setattr(simulate, "day_blocks", counted)
    ph = portfolio_hedge(comparison, HedgeRequest(1.0, floor=0.9, days=90),
                         portfolio=demo_fit, menu=True, n_paths=3000, seed=4)
    assert len(calls) == 1 and calls[0] == max(ph.menu.frame["trading_days"].max(),
                                               ph.estimate.trading_days)
    monkeypatch.setattr(simulate, "simulate_paths", real)
    # the same figures as a hedge estimate simulated on its own
    own = hedge_from_comparison(comparison, ph.estimate.request, n_paths=3000, seed=4)
    assert ph.estimate.expected_payoff == own.expected_payoff
    assert ph.estimate.prob_payoff == own.prob_payoff
