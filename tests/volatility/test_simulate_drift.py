"""The drift of simulated prices: a per-step adjustment of the log return with the
convexity term, r_t = a - sigma_t^2 / 2 + sigma_t z_t, so that E[S_h] = S_0 e^{a h}.

References: E[S_T] = S_0 e^{mu T} for a lognormal price (Hull, *Options, Futures, and
Other Derivatives*, ch. 15); the check is the law of large numbers, with a tolerance of
four standard errors of the simulated mean (estimated from the same paths).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from optbench.analysis.drift import DriftChoice, choose_drift, simulate_terminal
from optbench.errors import InputError
from optbench.volatility.simulate import simulate_paths

# invented parameters of a typical daily equity-index GJR model (decimal returns)
GJR = {"mu": 6e-4, "omega": 2e-6, "alpha": 0.03, "gamma": 0.10, "beta": 0.90, "nu": 6.0}
EGARCH = {"mu": 6e-4, "omega": -0.25, "alpha": 0.12, "gamma": -0.08, "beta": 0.97}


@pytest.mark.parametrize("dist", ["normal", "t"])
def test_expected_terminal_price_matches_the_closed_form(dist):
    r, q, x, tau, h = 0.04, 0.015, 0.03, 0.25, 63
    a = (r - q + x) * tau / h
    sim = simulate_paths("gjr", GJR, dist, 1.5e-4, h, 200_000, seed=5, drift=a)
    growth = np.exp(sim.terminal_return())                     # S_T / S_0
    se = growth.std(ddof=1) / math.sqrt(growth.size)
    closed = math.exp((r - q + x) * tau)                       # Hull ch. 15
    assert abs(growth.mean() - closed) < 4 * se, (growth.mean(), closed, se)
    # the fitted mean would have grown the price by about exp(h mu): not used here
    assert abs(math.exp(h * GJR["mu"]) - closed) > 8 * se


@pytest.mark.parametrize("model,params,dist", [("gjr", GJR, "t"), ("garch", GJR, "normal"),
                                               ("egarch", EGARCH, "normal")])
def test_the_drift_leaves_the_volatility_paths_alone(model, params, dist):
    base = simulate_paths(model, params, dist, 1.5e-4, 40, 500, seed=9)
    for drift in (0.0, 3e-4, -2e-3):
        other = simulate_paths(model, params, dist, 1.5e-4, 40, 500, seed=9, drift=drift)
        np.testing.assert_array_equal(other.variances, base.variances)
        # same shocks: only the drift and the convexity term differ
        np.testing.assert_allclose(other.returns - (drift - 0.5 * other.variances),
                                   base.returns - params["mu"], atol=1e-15)


class _Fit:
    """The few attributes of a fitted model the simulation reads."""
    model, dist, last_variance = "gjr", "normal", 1.5e-4
    params = GJR


def test_each_expiry_grows_at_its_own_rate_and_carry():
    # E[S_T] = S e^{(r - q + x) tau} per expiry, with the expiry's own rate and carry
    choice = choose_drift(excess_return=0.02, rate=0.04, div_yield=0.015)
    assert (choice.rule, choice.source) == ("excess", "caller")
    assert choice.annual == pytest.approx(0.045)
    h = np.array([5, 63, 250])
    tau = np.array([7, 91, 364]) / 365
    rates, carries = np.array([0.04, 0.041, 0.043]), np.array([0.015, 0.016, 0.02])
    draws = simulate_terminal(_Fit(), choice, h, tau, rates, carries, n_paths=100_000,
                              seed=3)
    growth = np.exp(draws.log_return())
    se = growth.std(axis=0, ddof=1) / math.sqrt(growth.shape[0])
    closed = np.exp((rates - carries + 0.02) * tau)
    assert np.all(np.abs(growth.mean(axis=0) - closed) < 4 * se)
    # scaling every daily vol keeps the mean (the convexity term scales with it)
    scaled = np.exp(draws.log_return(1.3))
    se = scaled.std(axis=0, ddof=1) / math.sqrt(scaled.shape[0])
    assert np.all(np.abs(scaled.mean(axis=0) - closed) < 4 * se)


def test_drift_choices_and_their_errors():
    d = choose_drift(rate=0.04, div_yield=0.015)
    assert isinstance(d, DriftChoice) and d.rule == "risk-free" and d.excess_return == 0
    assert d.to_dict()["rule"] == "risk-free" and "no expected excess" in d.text
    meta = choose_drift(rate=0.04, div_yield=0.015, meta_excess=0.05)
    assert (meta.rule, meta.source, meta.annual) == ("excess", "meta", pytest.approx(0.075))
    # the caller beats meta.toml
    assert choose_drift(excess_return=0.0, rate=0.04, div_yield=0.0,
                        meta_excess=0.05).rule == "risk-free"
    fitted = choose_drift("fitted", rate=0.04, div_yield=0.01, fitted_mu=4e-4)
    assert fitted.annual == pytest.approx(252 * 4e-4 - 0.01)
    with pytest.raises(InputError, match="--excess-return"):
        choose_drift("fitted", 0.02, rate=0.04, div_yield=0.0)
    with pytest.raises(InputError, match="--excess-return"):
        choose_drift(excess_return=3.0, rate=0.04, div_yield=0.0)
    with pytest.raises(InputError, match="--drift"):
        choose_drift("sideways", rate=0.04, div_yield=0.0)
    with pytest.raises(InputError, match="meta.toml: excess_return"):
        choose_drift(rate=0.04, div_yield=0.0, meta_excess="lots")
