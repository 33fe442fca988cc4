"""Cash dividends: the escrowed-dividend forward and European price, the American tree
with dividends at their ex-dates and its implied vol, the parity-forward check.

References named beside each check: QuantLib 1.44 (``AnalyticDividendEuropeanEngine``,
the escrowed model; ``FdBlackScholesVanillaEngine`` with a dividend schedule and
``CashDividendModel.Escrowed``) and Hull's known-dividend European call.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from optbench.pricing.american_dividends import (american_dividend_implied_vol_with_status,
                                                 american_dividend_price)
from optbench.pricing.bsm import bsm_price
from optbench.pricing.cash_dividends import (escrowed_european_price, escrowed_forward,
                                             pv_dividends)
from optbench.pricing.forwards import forward_disagreements, implied_forwards
from optbench.pricing.implied import BAD_INPUT, OK

ql = pytest.importorskip("QuantLib")

TODAY = ql.Date(15, 6, 2026)
# (S, K, days, r, sigma, is_call, ex-dividend days, amounts)
CASES = [
    (100.0, 100.0, 182, 0.05, 0.25, True, [60, 150], [2.0, 2.0]),
    (100.0, 100.0, 182, 0.05, 0.25, False, [60, 150], [2.0, 2.0]),
    (100.0, 90.0, 365, 0.03, 0.30, True, [90, 270], [3.0, 3.0]),
    (100.0, 110.0, 365, 0.03, 0.30, False, [90, 270], [3.0, 3.0]),
    (50.0, 45.0, 120, 0.04, 0.20, True, [100], [1.5]),
    (80.0, 85.0, 300, 0.06, 0.35, False, [30, 120, 210], [1.0, 1.0, 1.0]),
]


def _quantlib(S, K, days, r, sigma, is_call, div_days, amounts, american):
    """QuantLib's value of the option: the analytic escrowed-dividend European engine,
    or the finite-difference engine (800 x 800) with the escrowed cash-dividend model."""
    ql.Settings.instance().evaluationDate = TODAY
    dc = ql.Actual365Fixed()
    expiry = TODAY + days
    payoff = ql.PlainVanillaPayoff(ql.Option.Call if is_call else ql.Option.Put, K)
    exercise = ql.AmericanExercise(TODAY, expiry) if american else ql.EuropeanExercise(expiry)
    option = ql.VanillaOption(payoff, exercise)
    process = ql.BlackScholesMertonProcess(
        ql.QuoteHandle(ql.SimpleQuote(S)),
        ql.YieldTermStructureHandle(ql.FlatForward(TODAY, 0.0, dc)),
        ql.YieldTermStructureHandle(ql.FlatForward(TODAY, r, dc)),
        ql.BlackVolTermStructureHandle(ql.BlackConstantVol(TODAY, ql.NullCalendar(), sigma,
                                                           dc)))
    divs = ql.DividendVector([TODAY + d for d in div_days], list(amounts))
    if american:
        engine = ql.FdBlackScholesVanillaEngine(
            process, divs, 800, 800, 0, ql.FdmSchemeDesc.Douglas(), False,
            -ql.nullDouble(), ql.FdBlackScholesVanillaEngine.Escrowed)
    else:
        engine = ql.AnalyticDividendEuropeanEngine(process, divs)
    option.setPricingEngine(engine)
    return option.NPV()


def test_hull_known_dividend_european_call():
    # Hull, Options, Futures, and Other Derivatives, European call with known
    # dividends (numbers from memory): S = K = 40, r = 9 %, sigma = 30 %, T = 6 months,
    # 0.50 ex in two and five months: PV of dividends 0.9742, call 3.67.
    t = np.array([2 / 12, 5 / 12])
    assert float(pv_dividends(0.5, 0.09, t, [0.5, 0.5])) == pytest.approx(0.9742, abs=5e-5), \
        "Hull known-dividend example: PV of dividends 0.9742"
    price = float(escrowed_european_price(40, 40, 0.5, 0.09, 0.0, 0.30, True, t, [0.5, 0.5]))
    assert round(price, 2) == 3.67, "Hull known-dividend example: call 3.67"


@pytest.mark.parametrize("case", CASES)
def test_european_matches_quantlib_analytic_dividend_engine(case):
    S, K, days, r, sigma, is_call, div_days, amounts = case
    ours = float(escrowed_european_price(S, K, days / 365, r, 0.0, sigma, is_call,
                                         np.array(div_days) / 365, amounts))
    ref = _quantlib(*case, american=False)
    assert ours == pytest.approx(ref, rel=1e-10), "QuantLib AnalyticDividendEuropeanEngine"


def test_american_matches_quantlib_fd_escrowed_engine_vectorised():
    # every case of one schedule in one vectorised call; QuantLib
    # FdBlackScholesVanillaEngine, CashDividendModel.Escrowed, 800 x 800 grid
    for div_days, amounts in {(tuple(c[6]), tuple(c[7])) for c in CASES}:
        group = [c for c in CASES if tuple(c[6]) == div_days]
        S, K, days, r, sig, calls = (np.array([c[i] for c in group]) for i in range(6))
        ours = american_dividend_price(S, K, days / 365, r, 0.0, sig, calls.astype(bool),
                                       np.array(div_days) / 365, amounts)
        for c, v in zip(group, ours):
            ref = _quantlib(*c, american=True)
            assert v == pytest.approx(ref, rel=2e-3, abs=1e-2), \
                f"QuantLib FdBlackScholesVanillaEngine (escrowed) for {c}"


def test_american_with_dividends_is_worth_more_than_european_and_call_exercises_early():
    t, amounts = np.array([60, 150]) / 365, [2.0, 2.0]
    euro = escrowed_european_price(100, 90, 0.5, 0.05, 0.0, 0.25, True, t, amounts)
    amer = american_dividend_price(100, 90, 0.5, 0.05, 0.0, 0.25, True, t, amounts)
    # Merton (1973): without dividends an American call is worth the European one;
    # a dividend makes early exercise just before the ex-date pay for in-the-money calls
    assert amer > euro + 0.05
    # without any dividend in its life the tree gives the ordinary American price
    no_div = american_dividend_price(100, 100, 0.1, 0.05, 0.0, 0.25, False, [0.5], [2.0])
    assert float(no_div) == pytest.approx(float(bsm_price(100, 100, 0.1, 0.05, 0.0, 0.25,
                                                          False, style="american")),
                                          rel=2e-3)


def test_american_implied_vol_round_trip_and_bad_input():
    t, amounts = np.array([60, 150]) / 365, [2.0, 2.0]
    K = np.array([80.0, 95.0, 100.0, 105.0, 120.0])
    calls = np.array([False, False, True, True, True])
    sig = np.array([0.35, 0.28, 0.25, 0.23, 0.22])
    price = american_dividend_price(100.0, K, 0.5, 0.05, 0.0, sig, calls, t, amounts)
    vol, status = american_dividend_implied_vol_with_status(price, 100.0, K, 0.5, 0.05, 0.0,
                                                            calls, t, amounts)
    assert (status == OK).all()
    np.testing.assert_allclose(vol, sig, atol=1e-6)
    # dividends worth more than spot: no volatility
    _, code = american_dividend_implied_vol_with_status(5.0, 3.0, 3.0, 0.5, 0.05, 0.0, True,
                                                        t, [2.0, 2.0])
    assert code == BAD_INPUT


def _parity_quotes(S, r, t, strikes, forward):
    """Two-sided European quotes satisfying put-call parity on ``forward``."""
    D = np.exp(-r * t)
    rows = []
    for K in strikes:
        c = float(bsm_price(S, K, t, r, 0.0, 0.2, True)) + 0.0
        p = c - D * (forward - K)
        for is_call, mid in ((True, c), (False, p)):
            rows.append({"expiry": pd.Timestamp("2027-06-15"), "strike": K,
                         "is_call": is_call, "bid": mid - 0.05, "ask": mid + 0.05, "t": t})
    return pd.DataFrame(rows)


def test_forwards_use_the_dividend_forward_and_flag_disagreement():
    S, r, t = 100.0, 0.04, 0.5
    times, amounts = np.array([0.25]), np.array([3.0])
    F_div = float(escrowed_forward(S, t, r, 0.0, times, amounts))
    # no parity pairs: the carry forward is the escrowed-dividend forward
    empty = _parity_quotes(S, r, t, [100.0], F_div).iloc[:1]
    given = implied_forwards(empty, S, r, 0.0, dividends=(times, amounts))
    assert given["forward"].iloc[0] == pytest.approx((S - 3 * np.exp(-r * 0.25))
                                                     * np.exp(r * t)), "Hull: (S - PV) e^{rt}"
    assert given["cash_carry"].iloc[0] == 0.0
    # parity quotes on the dividend forward agree; quotes without the dividend do not
    agree = implied_forwards(_parity_quotes(S, r, t, np.arange(90.0, 111.0, 2.5), F_div), S,
                             r, 0.0, dividends=(times, amounts))
    assert agree["source"].iloc[0] == "parity"
    assert agree["forward"].iloc[0] == pytest.approx(F_div, rel=1e-6)
    assert abs(agree["cash_carry"].iloc[0]) < 1e-5
    assert forward_disagreements(agree) == []
    F_plain = S * np.exp(r * t)
    off = implied_forwards(_parity_quotes(S, r, t, np.arange(90.0, 111.0, 2.5), F_plain), S,
                           r, 0.0, dividends=(times, amounts))
    lines = forward_disagreements(off)
    assert len(lines) == 1 and "2027-06-15" in lines[0] and "dividend-schedule forward" in lines[0]


def test_ex_dates_after_expiry_or_before_quote_date_do_not_count():
    assert float(pv_dividends(0.5, 0.05, [0.75, -0.1, 0.0], [1.0, 1.0, 1.0])) == 0.0
    # an ex-date on the expiry day counts (it falls before the end-of-day expiry)
    assert float(pv_dividends(0.5, 0.0, [0.5], [1.0])) == 1.0
