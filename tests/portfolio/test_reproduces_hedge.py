"""A portfolio that is exactly beta x the index reproduces today's hedge figures, and
the hedged payoff at expiry equals the legs' payoff formulas on a grid."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from optbench.analysis.hedge import hedge_from_comparison
from optbench.analysis.portfolio import fit_portfolio, portfolio_hedge
from optbench.analysis.results import HedgeRequest
from optbench.data.holdings import PricePanel

V, BETA = 25_000_000.0, 1.3


@pytest.fixture(scope="module")
def exact_fit(comparison):
    d = comparison.history["date"].to_numpy()
    r = comparison.history["ret"].to_numpy()
    panel = PricePanel(source="exact.csv", closes=pd.DataFrame(
        {"PORTFOLIO": 1e7 * np.exp(BETA * np.cumsum(r))}, index=pd.DatetimeIndex(d)))
    return fit_portfolio(d, r, value_history=panel, portfolio_value=V)


@pytest.mark.parametrize("structure", ["put", "put_spread", "collar"])
def test_exact_beta_portfolio_reproduces_the_typed_beta_hedge(comparison, exact_fit, structure):
    typed = hedge_from_comparison(comparison, HedgeRequest(V, beta=BETA, floor=0.9, days=180,
                                                           structure=structure),
                                  n_paths=4000, seed=3)
    # the single hedge's own drift rule: with a drift choice on the estimate, the
    # comparison's (read by portfolio_hedge's default); without one, the fitted mean,
    # which takes the chain's rate and yield where the menu takes each expiry's own
    legacy = getattr(typed, "drift", None) is None
    tol = 1e-3 if legacy else 1e-9
    ph = portfolio_hedge(comparison, HedgeRequest(1.0, floor=0.9, days=180,
                                                  structure=structure),
                         portfolio=exact_fit, menu=True, drift=None if legacy else "carry",
                         n_paths=4000, seed=3)
    e = ph.estimate
    assert e.contracts == typed.contracts
    assert [leg.strike for leg in e.legs] == [leg.strike for leg in typed.legs]
    for key in ("premium_mid", "premium_paid", "premium_at_forecast", "expected_payoff",
                "overpay", "breakeven", "annual_roll_cost"):   # the estimate itself: exact
        assert getattr(e, key) == pytest.approx(getattr(typed, key), rel=1e-9), key
    for a, b in zip(e.scenarios, typed.scenarios):
        assert a["hedged"] == pytest.approx(b["hedged"]) and a["unhedged"] == pytest.approx(
            b["unhedged"])
    # the menu row with the same expiry, floor and structure agrees to the unit
    m = ph.menu.frame
    row = m[(m["expiry"] == e.expiry) & (m["structure"] == structure) & (m["floor"] == 0.9)]
    assert len(row) == 1
    assert row["premium_paid"].iloc[0] == pytest.approx(typed.premium_paid, abs=1e-6)
    assert row["expected_payoff"].iloc[0] == pytest.approx(typed.expected_payoff, rel=tol)
    # the default scenario grid is the scenario table
    grid = ph.scenario_grid
    assert grid["hedged"].tolist() == pytest.approx([s["hedged"] for s in typed.scenarios])
    # no basis risk: hedged P&L on every path is at least the floor's loss less premium
    assert ph.loss.residual_method == "none"


def _by_hand(S, legs):
    """Payoff of the legs at S from the textbook formulas (Hull, Options, Futures, and
    Other Derivatives, ch. 12: put max(K - S, 0), call max(S - K, 0))."""
    total = np.zeros_like(S)
    for leg in legs:
        intrinsic = np.maximum(S - leg.strike, 0) if leg.type == "C" else np.maximum(
            leg.strike - S, 0)
        total += leg.quantity * 100.0 * intrinsic
    return total


@pytest.mark.parametrize("structure", ["put", "put_spread", "collar"])
def test_hedged_payoff_on_a_grid_matches_leg_formulas(comparison, structure):
    from optbench.analysis.portfolio.scenarios import scenario_grid
    est = hedge_from_comparison(comparison, HedgeRequest(V, beta=BETA, floor=0.95, days=90,
                                                         structure=structure), n_paths=500)
    moves = np.linspace(-0.5, 0.3, 33)
    grid = scenario_grid(est, moves)
    S = est.spot * (1 + moves)
    unhedged = V * BETA * moves
    expect = unhedged + _by_hand(S, est.legs) - est.premium_paid
    np.testing.assert_allclose(grid["hedged"], expect, rtol=0, atol=1e-6)
    np.testing.assert_allclose(grid["unhedged"], unhedged, atol=1e-6)
