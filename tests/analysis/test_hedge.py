"""Hedge-cost estimates on the demo chain, recomputed by hand from the chain file.

The chain file is read here with the csv module alone (no optbench code), the legs
are looked up by strike, and contracts, premiums, breakeven and scenarios are
recomputed from their definitions (Hull, *Options, Futures, and Other Derivatives*,
§17.1 portfolio insurance; buyers pay the ask, sellers receive the bid).
"""
from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import pytest

from optbench.analysis.compare import compare
from optbench.analysis.hedge import hedge, hedge_from_comparison
from optbench.analysis.results import CAUTION, HedgeRequest
from optbench.errors import InputError

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"
V = 10_000_000.0


@pytest.fixture(scope="module")
def comparison():
    return compare(DEMO, model="gjr", dist="t")


@pytest.fixture(scope="module")
def quotes():
    """{(expiry, type, strike): (bid, ask)} straight from chain.csv."""
    out = {}
    with open(DEMO / "chain.csv", newline="") as fh:
        for row in csv.DictReader(fh):
            try:       # the demo holds a few deliberately bad rows: skip them
                bid, ask, strike = float(row["bid"]), float(row["ask"]), float(row["strike"])
            except ValueError:
                continue
            out.setdefault((row["expiry"], row["type"].upper()[0], strike), (bid, ask))
    with open(DEMO / "chain.csv", newline="") as fh:
        spot = float(next(csv.DictReader(fh))["underlying_price"])
    return out, spot


def test_protective_put_by_hand(comparison, quotes):
    table, spot = quotes
    est = hedge_from_comparison(comparison, HedgeRequest(V, beta=1.2, floor=0.9, days=91),
                                n_paths=4000, seed=3)
    n = round(1.2 * V / (100 * spot))                      # Hull §17.1: beta * V / (m S)
    assert est.contracts == n
    bid, ask = table[(est.expiry.isoformat(), "P", est.strike)]
    assert est.premium_paid == pytest.approx(n * 100 * ask)
    assert est.premium_mid == pytest.approx(n * 100 * (bid + ask) / 2)
    assert est.cost_pct == pytest.approx(n * 100 * ask / V)
    assert est.cost_pct_annual == pytest.approx(est.cost_pct * 365 / est.calendar_days)
    assert est.overpay == pytest.approx(est.premium_paid - est.expected_payoff)
    # the strike is the listed put nearest 90 % of spot on that expiry
    listed = sorted(k for (e, c, k) in table if e == est.expiry.isoformat() and c == "P")
    assert est.strike == min(listed, key=lambda k: (abs(k - 0.9 * spot), k))
    # the expiry is the one nearest 91 calendar days
    days = [r.calendar_days for r in comparison.expiries]
    assert est.calendar_days == min(days, key=lambda d: abs(d - 91))
    # breakeven: strike less premium per unit
    assert est.breakeven == pytest.approx(est.strike - est.premium_paid / (n * 100))
    assert est.caution == CAUTION


def test_scenarios_by_hand(comparison, quotes):
    est = hedge_from_comparison(comparison, HedgeRequest(V, beta=1.0, floor=0.95, days=49),
                                n_paths=2000, seed=3)
    n, K = est.contracts, est.strike
    moves = [s["move"] for s in est.scenarios]
    assert moves == pytest.approx([-0.30, -0.25, -0.20, -0.15, -0.10, -0.05, 0.0, 0.05, 0.10])
    for s in est.scenarios:
        level = est.spot * (1 + s["move"])
        assert s["unhedged"] == pytest.approx(V * s["move"])
        payoff = n * 100 * max(K - level, 0.0)
        assert s["hedged"] == pytest.approx(V * s["move"] + payoff - est.premium_paid)


def test_put_spread_and_collar_by_hand(comparison, quotes):
    table, spot = quotes
    spread = hedge_from_comparison(
        comparison, HedgeRequest(V, floor=0.95, lower_floor=0.85, structure="put-spread",
                                 days=84), n_paths=2000, seed=3)
    e = spread.expiry.isoformat()
    (b1, a1), (b2, a2) = table[(e, "P", spread.strikes[0])], table[(e, "P", spread.strikes[1])]
    n = spread.contracts
    assert spread.strikes[0] > spread.strikes[1]
    assert spread.premium_paid == pytest.approx(n * 100 * (a1 - b2))
    assert spread.premium_mid == pytest.approx(n * 100 * ((b1 + a1) / 2 - (b2 + a2) / 2))

    collar = hedge_from_comparison(comparison, HedgeRequest(V, floor=0.9, structure="collar",
                                                            days=84), n_paths=2000, seed=3)
    e = collar.expiry.isoformat()
    put_ask = table[(e, "P", collar.strikes[0])][1]
    call_bid = table[(e, "C", collar.strikes[1])][0]
    assert collar.premium_paid == pytest.approx(collar.contracts * 100 * (put_ask - call_bid))
    # near-zero cost: no other listed call above spot gives a smaller net premium
    others = [abs(put_ask - b) for (ee, c, k), (b, a) in table.items()
              if ee == e and c == "C" and k > spot and b > 0]
    assert abs(put_ask - call_bid) == pytest.approx(min(others))
    assert "nearest zero" in collar.collar_note


def test_expected_payoff_and_probability_agree_with_the_simulated_paths(comparison):
    # the expected payoff is the discounted mean payoff over the fitted model's paths
    # with the default drift r - q of the expiry's forward, recomputed here from a
    # simulation with that per-step drift a = (r - q) tau / h (and its -sigma^2/2 term)
    from optbench.volatility.simulate import simulate_paths
    est = hedge_from_comparison(comparison, HedgeRequest(V, floor=0.9, days=84),
                                n_paths=5000, seed=11)
    assert est.drift["rule"] == "risk-free"
    row = comparison.expiry_row(est.expiry)
    fit = comparison.fit
    a = (row.rate - row.carry) * row.t / row.trading_days
    sim = simulate_paths(fit.model, fit.params, fit.dist, fit.last_variance,
                         row.trading_days, 5000, 11, drift=a)
    s_t = est.spot * np.exp(sim.terminal_return())
    pay = est.contracts * 100 * np.maximum(est.strike - s_t, 0.0)
    assert est.expected_payoff == pytest.approx(math.exp(-row.rate * row.t) * pay.mean(),
                                                rel=1e-9)
    assert est.prob_payoff == pytest.approx(np.mean(pay > 0))


def test_fitted_drift_only_when_asked(comparison):
    # --drift fitted: the fitted mean of the log returns, less the carry, as the
    # history's closes are dividend-adjusted
    fitted = compare(DEMO, model="gjr", dist="t", drift="fitted")
    est = hedge_from_comparison(fitted, HedgeRequest(V, floor=0.9, days=84),
                                n_paths=5000, seed=11)
    assert est.drift["rule"] == "fitted"
    row = fitted.expiry_row(est.expiry)
    sim = fitted.fit.simulate(row.trading_days, n_paths=5000, seed=11)
    s_t = est.spot * np.exp(sim.terminal_return() - row.carry * row.t)
    pay = est.contracts * 100 * np.maximum(est.strike - s_t, 0.0)
    assert est.expected_payoff == pytest.approx(math.exp(-row.rate * row.t) * pay.mean(),
                                                rel=1e-9)
    default = hedge_from_comparison(comparison, HedgeRequest(V, floor=0.9, days=84),
                                    n_paths=5000, seed=11)
    assert default.drift["rule"] == "risk-free" and default.drift["excess_return"] == 0.0


def test_hedge_api_and_errors():
    with pytest.raises(InputError, match="--floor"):
        hedge(DEMO, portfolio_value=V, floor=1.5)
    with pytest.raises(InputError, match="--beta"):
        hedge(DEMO, portfolio_value=V, beta="abc")
    with pytest.raises(InputError, match="--portfolio"):
        hedge(DEMO, portfolio_value=-1)


def test_expiry_not_in_chain(comparison):
    with pytest.raises(InputError) as info:
        hedge_from_comparison(comparison, HedgeRequest(V, expiry="2027-01-16"))
    assert info.value.source == "--expiry" and "not an expiry" in info.value.problem


def test_to_dict_has_the_design_keys(comparison):
    d = hedge_from_comparison(comparison, HedgeRequest(V, structure="collar", days=175),
                              n_paths=1000, seed=1).to_dict()
    for key in ("contracts", "strikes", "premium_mid", "premium_paid", "premium_at_forecast",
                "expected_payoff", "overpay", "cost_pct", "cost_pct_annual", "scenarios",
                "caution", "prob_payoff", "breakeven", "annual_roll_cost"):
        assert key in d
    assert {"move", "unhedged", "hedged"} <= set(d["scenarios"][0])


def test_pnl_curve_goes_through_the_scenario_table(comparison):
    est = hedge_from_comparison(comparison, HedgeRequest(V, beta=0.8, structure="collar",
                                                         days=175), n_paths=500, seed=2)
    moves = np.array([s["move"] for s in est.scenarios])
    unhedged, hedged = est.pnl_at(moves)
    np.testing.assert_allclose(hedged, [s["hedged"] for s in est.scenarios])
    np.testing.assert_allclose(unhedged, [s["unhedged"] for s in est.scenarios])


@pytest.fixture(scope="module")
def constant_variance(comparison):
    """The demo compared under a constant-variance model (alpha = beta = 0, normal):
    daily log returns are i.i.d. N(mu, s2), so closed forms exist."""
    from optbench.data.history import load_history
    from optbench.volatility.garch import fix_garch
    returns = load_history(DEMO / "history.csv").returns
    mu, s2 = 2e-4, 1.2e-4
    fixed = fix_garch(returns, {"mu": mu, "omega": s2, "alpha": 0.0, "beta": 0.0},
                      model="garch", dist="normal")
    return compare(DEMO, fit=fixed, n_paths=20_000, seed=21), mu, s2


def test_expected_payoff_matches_the_lognormal_closed_form(constant_variance):
    # reference: vollib.black.black (Black 1976) with the forward of the default drift,
    # E[S_T] = S exp((r - q) tau) with the expiry's rate and carry, and total variance
    # h s2: under a constant vol and no excess return the expected discounted payoff of
    # a put is its Black-Scholes-Merton price (Hull, Options, Futures, and Other
    # Derivatives, ch. 15)
    from vollib.black import black
    comp, mu, s2 = constant_variance
    est = hedge_from_comparison(comp, HedgeRequest(V, floor=0.95, days=84),
                                n_paths=200_000, seed=4)
    row = comp.expiry_row(est.expiry)
    h, tau = row.trading_days, row.t
    forward = est.spot * math.exp((row.rate - row.carry) * tau)
    ref = black("p", forward, est.strike, tau, row.rate, math.sqrt(h * s2 / tau))
    assert est.expected_payoff == pytest.approx(est.contracts * 100 * ref, rel=0.02)
    assert comp.expiry_row(est.expiry).forecast_vol == pytest.approx(math.sqrt(252 * s2))


def test_expected_payoff_with_the_fitted_mean_matches_its_closed_form(constant_variance):
    # reference: vollib.black.black with the forward E[S_T] = S exp(h mu + h s2 / 2 - q tau)
    # (i.i.d. N(mu, s2) log returns, the fitted mean asked for with drift="fitted")
    from optbench.volatility.garch import fix_garch
    from optbench.data.history import load_history
    from vollib.black import black
    comp, mu, s2 = constant_variance
    fixed = fix_garch(load_history(DEMO / "history.csv").returns,
                      {"mu": mu, "omega": s2, "alpha": 0.0, "beta": 0.0},
                      model="garch", dist="normal")
    fitted = compare(DEMO, fit=fixed, n_paths=2_000, seed=21, drift="fitted")
    est = hedge_from_comparison(fitted, HedgeRequest(V, floor=0.95, days=84),
                                n_paths=200_000, seed=4)
    row = fitted.expiry_row(est.expiry)
    h, tau = row.trading_days, row.t
    forward = est.spot * math.exp(h * mu + h * s2 / 2 - row.carry * tau)
    ref = black("p", forward, est.strike, tau, row.rate, math.sqrt(h * s2 / tau))
    assert est.expected_payoff == pytest.approx(est.contracts * 100 * ref, rel=0.02)


def test_probability_realized_above_implied_matches_the_chi_square_law(constant_variance):
    # reference: scipy.stats.ncx2 — the sum of h squared N(mu, s2) returns is s2 times a
    # non-central chi-square with h degrees of freedom and non-centrality h mu^2 / s2
    # with the default drift the simulated daily log return is N(m, s2) with
    # m = (r - q) / 252 - s2 / 2 (the chain's rate and yield; the convexity term)
    from scipy.stats import ncx2
    comp, mu, s2 = constant_variance
    m = (comp.rate - comp.div_yield) / 252 - s2 / 2
    for row in comp.expiries[1:6]:
        h = row.trading_days
        ref = ncx2.sf(row.atm_iv ** 2 * h / 252 / s2, h, h * m ** 2 / s2)
        # 20,000 paths: standard error below 0.0036, the tolerance is about three of them
        assert row.prob_realized_above_iv == pytest.approx(ref, abs=0.01)
