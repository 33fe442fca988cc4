"""The pure pieces of the hedge-cost estimates, against hand calculations and vollib."""
from __future__ import annotations

import math

import numpy as np
import pytest

from optbench.analysis.hedge import (SCENARIO_MOVES, annual_roll_cost, breakeven_level,
                                     contracts_for, leg_payoff, nearest_index,
                                     total_variance_curve)
from optbench.analysis.results import HedgeRequest
from optbench.errors import InputError


def test_contracts_hull_portfolio_insurance():
    # Hull, Options, Futures, and Other Derivatives, §17.1 portfolio insurance
    # (from memory): a $500,000 portfolio with beta 1.0 on an index at 1,000 and a
    # multiplier of 100 needs 5 puts; with beta 2.0 it needs 10.
    assert contracts_for(500_000, 1.0, 100, 1000.0) == 5
    assert contracts_for(500_000, 2.0, 100, 1000.0) == 10


def test_contracts_round_to_nearest_and_refuse_zero():
    # beta * V / (m * S) = 1.2 * 10e6 / (100 * 4321.5) = 27.768 -> 28 (hand calculation)
    assert contracts_for(10e6, 1.2, 100, 4321.5) == 28
    with pytest.raises(InputError):
        contracts_for(1_000, 1.0, 100, 4321.5)


def test_leg_payoff_put_spread_and_collar_by_hand():
    levels = np.array([70.0, 85.0, 95.0, 100.0, 120.0])
    # long 95 put, short 85 put: payoff min(max(95-S,0),10)
    spread = leg_payoff(levels, [95.0, 85.0], [False, False], [1.0, -1.0])
    np.testing.assert_allclose(spread, [10.0, 10.0, 0.0, 0.0, 0.0])
    # long 90 put, short 110 call: max(90-S,0) - max(S-110,0)
    collar = leg_payoff(levels, [90.0, 110.0], [False, True], [1.0, -1.0])
    np.testing.assert_allclose(collar, [20.0, 5.0, 0.0, 0.0, -10.0])


def test_breakeven_rules():
    assert breakeven_level(90.0, 2.5) == 87.5
    assert breakeven_level(90.0, -0.4) == 90.0          # collar with a net credit
    assert math.isnan(breakeven_level(95.0, 12.0, spread_width=10.0))


def test_scenario_moves_are_minus_30_to_plus_10_by_5():
    assert SCENARIO_MOVES == (-0.3, -0.25, -0.2, -0.15, -0.1, -0.05, 0.0, 0.05, 0.1)


def test_nearest_index_prefers_lower_strike_on_ties():
    k = np.array([85.0, 90.0, 95.0, 100.0])
    assert nearest_index(k, 92.5) == 1
    assert nearest_index(k, 96.0) == 2
    assert nearest_index(k, 96.0, mask=np.array([True, True, False, True])) == 3


def test_total_variance_interpolates_linearly_and_extends_forward_variance():
    w = total_variance_curve([0.25, 1.0], [0.20, 0.25])
    # hand calculation: w(0.25)=0.01, w(1)=0.0625, linear between
    assert w(0.25) == pytest.approx(0.01)
    assert w(0.625) == pytest.approx(0.01 + 0.375 * (0.0525 / 0.75))
    assert w(2.0) == pytest.approx(0.0625 + 1.0 * (0.0525 / 0.75))
    assert w(0.1) == pytest.approx(0.1 * 0.04)


def test_annual_roll_flat_term_structure_equals_n_times_vollib_price():
    # a flat 20% term structure, no skew, no spread: rolling a 73-day 90% put for a
    # year is 5 purchases at the same Black-Scholes-Merton price (vollib reference)
    from vollib.black_scholes_merton import black_scholes_merton
    S, r, q, cd = 100.0, 0.03, 0.01, 73
    tau = cd / 365
    w = total_variance_curve([tau, 1.0, 2.0], [0.2, 0.2, 0.2])
    cost = annual_roll_cost(spot=S, rate=r, div_yield=q, tau=tau, calendar_days=cd,
                            w_of=w, atm_iv_now=0.2, leg_moneyness=np.array([0.9]),
                            leg_is_call=np.array([False]), leg_signs=np.array([1.0]),
                            leg_iv=np.array([0.2]), leg_half_spread=np.array([0.0]))
    ref = black_scholes_merton("p", S, 90.0, tau, r, 0.2, q)
    assert cost == pytest.approx(5 * ref, rel=1e-9)


def test_annual_roll_weights_the_last_partial_roll():
    S, r, q, cd = 100.0, 0.0, 0.0, 146        # 365/146 = 2.5 rolls
    tau = cd / 365
    w = total_variance_curve([tau], [0.3])
    args = dict(spot=S, rate=r, div_yield=q, tau=tau, w_of=w, atm_iv_now=0.3,
                leg_moneyness=np.array([0.95]), leg_is_call=np.array([False]),
                leg_signs=np.array([1.0]), leg_iv=np.array([0.3]),
                leg_half_spread=np.array([0.05]))
    from vollib.black_scholes_merton import black_scholes_merton
    one = black_scholes_merton("p", S, 95.0, tau, r, 0.3, q) + 0.05
    assert annual_roll_cost(calendar_days=cd, **args) == pytest.approx(2.5 * one, rel=1e-9)


@pytest.mark.parametrize("kwargs, source", [
    (dict(portfolio_value=-5), "--portfolio"),
    (dict(portfolio_value=1e6, floor=1.05), "--floor"),
    (dict(portfolio_value=1e6, beta="abc"), "--beta"),
    (dict(portfolio_value=1e6, structure="strangle"), "--structure"),
    (dict(portfolio_value=1e6, floor=0.9, lower_floor=0.95, structure="put_spread"),
     "--lower-floor"),
    (dict(portfolio_value=1e6, expiry="2026-13-01"), "--expiry"),
])
def test_bad_requests_are_one_line_input_errors(kwargs, source):
    with pytest.raises(InputError) as info:
        HedgeRequest(**kwargs)
    assert info.value.source == source
    assert "\n" not in str(info.value)
