"""Simulation of fitted models, and the innovation draws it uses.

References: scipy.stats.t (Student-t quantiles and moments) for the unit-variance t
draws; the closed-form GARCH/GJR variance forecast (checked against arch in
test_forecast.py) for the mean simulated variance per day.
"""
from __future__ import annotations

import numpy as np
import pytest
from arch.data import sp500

from optbench.volatility.distributions import std_t_draws
from optbench.volatility.garch import fix_garch
from optbench.volatility.simulate import simulate_paths


@pytest.fixture(scope="module")
def returns():
    # arch.data.sp500: daily S&P 500 prices bundled with the arch package
    return np.diff(np.log(sp500.load()["Adj Close"].to_numpy()))


def test_unit_variance_t_draws_match_scipy():
    from scipy import stats  # reference only; not imported by optbench's core

    nu = 6.0
    z = std_t_draws(np.random.default_rng(11), nu, 400_000)
    scale = np.sqrt((nu - 2) / nu)
    x = np.array([-4.0, -2.5, -1.0, 0.0, 0.5, 2.0, 3.5])
    cdf = stats.t.cdf(x / scale, nu)
    emp = (z[:, None] <= x).mean(axis=0)
    # within 4.5 binomial standard errors at every point
    assert np.all(np.abs(emp - cdf) < 4.5 * np.sqrt(cdf * (1 - cdf) / z.size))
    assert np.var(z) == pytest.approx(1.0, abs=0.02)


def test_gjr_t_mean_simulated_variance_equals_forecast(returns):
    fit = fix_garch(returns, dict(mu=3e-4, omega=1.5e-6, alpha=0.02, gamma=0.15, beta=0.9,
                                  nu=7.0), "gjr", "t")
    paths = fit.simulate(63, 100_000, seed=4)
    assert paths.returns.shape == (100_000, 63) == paths.variances.shape
    assert np.all(paths.variances[:, 0] == fit.last_variance)
    # within 4.5 Monte Carlo standard errors on every day
    se = paths.variances.std(axis=0) / np.sqrt(paths.n_paths)
    err = np.abs(paths.variances.mean(axis=0) - fit.forecast_variance(63))
    assert np.all(err <= 4.5 * se + 1e-15)
    # daily returns: mean mu, variance = expected variance (unit-variance shocks)
    np.testing.assert_allclose(paths.returns.var(axis=0)[[0, 20, 62]],
                               fit.forecast_variance(63)[[0, 20, 62]], rtol=0.03)


def test_realized_vol_and_terminal_return_definitions(returns):
    fit = fix_garch(returns, dict(mu=4e-4, omega=2e-6, alpha=0.09, beta=0.89),
                    "garch", "normal")
    paths = fit.simulate(21, 2000, seed=9)
    r = paths.returns
    np.testing.assert_allclose(paths.realized_vol(),
                               np.sqrt(252 / 21 * (r ** 2).sum(axis=1)), rtol=1e-12)
    np.testing.assert_allclose(paths.terminal_return(), r.sum(axis=1), rtol=1e-12)
    # E[realized variance] over the horizon = the forecast's average variance
    assert np.mean(paths.realized_vol() ** 2) == pytest.approx(
        fit.forecast_vol(21) ** 2 + 252 * 4e-4 ** 2, rel=0.05)


def test_seed_reproduces_paths():
    p = dict(mu=0.0, omega=1e-6, alpha=0.05, gamma=0.1, beta=0.9, nu=8.0)
    a = simulate_paths("gjr", p, "t", 1e-4, 10, 50, seed=1).returns
    b = simulate_paths("gjr", p, "t", 1e-4, 10, 50, seed=1).returns
    c = simulate_paths("gjr", p, "t", 1e-4, 10, 50, seed=2).returns
    assert np.array_equal(a, b) and not np.array_equal(a, c)


def test_fast_t_draws_match_scipy():
    """The tabulated quantile transform used by the simulator (scipy.stats.t reference)."""
    from scipy import stats

    from optbench.volatility.distributions import std_t_draws_fast

    nu = 5.0
    z = std_t_draws_fast(np.random.default_rng(12), nu, 400_000).astype(float)
    scale = np.sqrt((nu - 2) / nu)
    x = np.array([-5.0, -2.5, -1.0, 0.0, 0.5, 2.0, 4.0])
    cdf = stats.t.cdf(x / scale, nu)
    emp = (z[:, None] <= x).mean(axis=0)
    assert np.all(np.abs(emp - cdf) < 4.5 * np.sqrt(cdf * (1 - cdf) / z.size))
    # the map itself, node by node, against scipy's t quantiles of normal probabilities
    from optbench.volatility.distributions import _normal_to_t_table
    vals, _ = _normal_to_t_table(nu)
    xs = np.linspace(-8, 8, vals.size + 1)[:-1]
    lo = xs < 0
    ref = stats.t.ppf(stats.norm.cdf(xs[lo]), nu) * scale
    np.testing.assert_allclose(vals[lo], ref, rtol=1e-6)
