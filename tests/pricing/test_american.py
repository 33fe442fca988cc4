"""American exercise: Hull's binomial-tree example, QuantLib's finite-difference
engine over a table of cases, no-arbitrage properties, implied vols."""
from __future__ import annotations

import numpy as np
import pytest

from optbench.pricing.american import (american_implied_vol, american_implied_vol_with_status,
                                       american_price)
from optbench.pricing.bsm import bsm_price
from optbench.pricing.implied import ABOVE_MAX, BAD_INPUT, BELOW_INTRINSIC, EXPIRED, OK


def test_hull_american_put_converges_to_4_28():
    # Hull, Options, Futures, and Other Derivatives, binomial-tree chapter: American put
    # S = K = 50, r = 10%, sigma = 40%, T = 5 months; about 4.28 as the tree is refined
    # (Hull shows 4.49 for 5 steps and 4.29 for 30 steps; from memory)
    assert float(american_price(50, 50, 5 / 12, 0.10, 0.0, 0.40, False)) == \
        pytest.approx(4.28, abs=0.006)
    assert float(american_price(50, 50, 5 / 12, 0.10, 0.0, 0.40, False, steps=400)) == \
        pytest.approx(4.28, abs=0.006)


def _quantlib_american(S, K, t_days, r, q, v, call):
    import QuantLib as ql

    today = ql.Date(15, 3, 2027)
    ql.Settings.instance().evaluationDate = today
    dc = ql.Actual365Fixed()
    expiry = today + int(t_days)
    process = ql.BlackScholesMertonProcess(
        ql.QuoteHandle(ql.SimpleQuote(S)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, q, dc)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, r, dc)),
        ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(), v, dc)))
    option = ql.VanillaOption(ql.PlainVanillaPayoff(ql.Option.Call if call else ql.Option.Put, K),
                              ql.AmericanExercise(today, expiry))
    option.setPricingEngine(ql.FdBlackScholesVanillaEngine(process, 600, 600))
    return option.NPV()


CASES = [  # S, K, calendar days, r, q, sigma, call
    (100, 90, 30, 0.05, 0.00, 0.20, False), (100, 100, 30, 0.05, 0.00, 0.20, False),
    (100, 110, 30, 0.05, 0.00, 0.20, False), (100, 100, 365, 0.05, 0.00, 0.30, False),
    (100, 120, 365, 0.08, 0.00, 0.25, False), (100, 80, 365, 0.08, 0.00, 0.25, False),
    (100, 100, 730, 0.04, 0.02, 0.40, False), (100, 130, 182, 0.06, 0.01, 0.60, False),
    (100, 100, 182, 0.03, 0.06, 0.25, True), (100, 90, 365, 0.03, 0.08, 0.30, True),
    (100, 110, 365, 0.02, 0.05, 0.20, True), (100, 80, 730, 0.05, 0.07, 0.35, True),
    (100, 100, 91, 0.05, 0.00, 0.30, True), (100, 100, 1095, 0.05, 0.03, 0.15, False),
]


@pytest.mark.parametrize("case", CASES)
def test_within_half_a_percent_of_quantlib(case):
    # QuantLib FdBlackScholesVanillaEngine (600 x 600 grid) as the accurate reference
    S, K, days, r, q, v, call = case
    ref = _quantlib_american(S, K, days, r, q, v, call)
    mine = float(american_price(S, K, days / 365.0, r, q, v, call))
    assert mine == pytest.approx(ref, rel=5e-3)


def test_call_without_yield_is_european():
    # Merton (1973): an American call on an asset paying no yield is never exercised early
    K = np.array([80.0, 100.0, 120.0])
    np.testing.assert_allclose(american_price(100, K, 1.0, 0.05, 0.0, 0.3, True),
                               bsm_price(100, K, 1.0, 0.05, 0.0, 0.3, True), rtol=1e-13)


def test_at_least_european_and_intrinsic():
    # no-arbitrage: American >= European and >= immediate exercise (Hull ch. 11)
    rng = np.random.default_rng(2)
    n = 400
    K = rng.uniform(50, 160, n)
    t = rng.uniform(0.01, 2.5, n)
    r = rng.uniform(0.0, 0.1, n)
    q = rng.uniform(0.0, 0.08, n)
    v = rng.uniform(0.05, 0.9, n)
    c = rng.random(n) < 0.5
    a = american_price(100.0, K, t, r, q, v, c)
    e = bsm_price(100.0, K, t, r, q, v, c)
    intrinsic = np.maximum(np.where(c, 100.0 - K, K - 100.0), 0.0)
    assert np.all(a >= e - 1e-12)
    assert np.all(a >= intrinsic - 1e-12)


def test_style_dispatch_from_bsm_price():
    assert float(bsm_price(50, 50, 5 / 12, 0.10, 0.0, 0.40, False, style="american")) == \
        pytest.approx(float(american_price(50, 50, 5 / 12, 0.10, 0.0, 0.40, False)))


def test_implied_vol_round_trip():
    rng = np.random.default_rng(4)
    n = 200
    K = rng.uniform(70, 140, n)
    t = rng.uniform(0.05, 2.0, n)
    v = rng.uniform(0.1, 0.7, n)
    c = rng.random(n) < 0.5
    p = american_price(100.0, K, t, 0.05, 0.02, v, c)
    vol, status = american_implied_vol_with_status(p, 100.0, K, t, 0.05, 0.02, c)
    intrinsic = np.maximum(np.where(c, 100.0 - K, K - 100.0), 0.0)
    identifiable = (p - intrinsic) > 1e-3  # a price at the exercise value names no vol
    assert np.all(status[identifiable] == OK)
    assert np.nanmax(np.abs(vol[identifiable] - v[identifiable])) < 1e-6


def test_implied_vol_against_quantlib_price():
    # vol backed out of QuantLib's American price (FD engine) is the vol QuantLib used,
    # to the accuracy of the two numerical methods
    ref = _quantlib_american(100, 105, 273, 0.06, 0.01, 0.32, False)
    assert american_implied_vol(ref, 100, 105, 273 / 365, 0.06, 0.01, False) == \
        pytest.approx(0.32, abs=2e-3)


def test_american_reason_codes():
    vol, status = american_implied_vol_with_status(
        np.array([5.0, 40.0, 120.0, 5.0, np.nan]), 100.0,
        np.array([100.0, 140.0, 100.0, 100.0, 100.0]),
        np.array([1.0, 1.0, 1.0, 0.0, 1.0]), 0.05, 0.0, np.array([False, False, True, True, True]))
    # 40 < 140 - 100 (immediate exercise); a call above spot; expired; non-finite
    assert list(status[1:]) == [BELOW_INTRINSIC, ABOVE_MAX, EXPIRED, BAD_INPUT]
    assert status[0] == OK and np.all(np.isnan(vol[1:]))
    v, code = american_implied_vol_with_status(4.28, 50, 50, 5 / 12, 0.10, 0.0, False)
    assert isinstance(v, float) and code == OK and v == pytest.approx(0.40, abs=1e-3)


def test_implied_vol_dispatch_and_bad_types():
    from optbench.pricing.implied import implied_vol
    p = float(american_price(100, 110, 0.5, 0.05, 0.0, 0.25, False))
    assert implied_vol(p, 100, 110, 0.5, 0.05, 0.0, False, style="american") == \
        pytest.approx(0.25, abs=1e-6)
    with pytest.raises(TypeError):
        american_price("100", 100, 1.0, 0.05, 0.0, 0.2, True)


from hypothesis import given, settings, strategies as st  # noqa: E402


@settings(max_examples=60, deadline=None)
@given(k=st.floats(0.6, 1.6), t=st.floats(7 / 365, 2.0), v=st.floats(0.08, 0.8),
       r=st.floats(0.0, 0.1), q=st.floats(0.0, 0.08), call=st.booleans())
def test_american_price_rises_with_vol_and_stays_in_bounds(k, t, v, r, q, call):
    # bounds (Hull ch. 11): max(immediate, European) <= American <= S (call) or K (put);
    # the value rises with volatility (checked over a 10% vol bump, beyond tree noise)
    S, K = 100.0, 100.0 * k
    a1 = float(american_price(S, K, t, r, q, v, call))
    a2 = float(american_price(S, K, t, r, q, v * 1.1, call))
    e = float(bsm_price(S, K, t, r, q, v, call))
    assert a1 >= max(e, (S - K) if call else (K - S), 0.0) - 1e-12
    assert a1 <= (S if call else K)
    assert a2 >= a1 - 1e-6 * max(S, K)


def _quantlib_qdfp(S, K, t_days, r, q, v, call):
    """QuantLib's QdFpAmericanEngine with its high-precision scheme: the reference
    American price (fixed-point early-exercise boundary, far finer than optbench's)."""
    import QuantLib as ql

    today = ql.Date(15, 3, 2027)
    ql.Settings.instance().evaluationDate = today
    dc = ql.Actual365Fixed()
    process = ql.BlackScholesMertonProcess(
        ql.QuoteHandle(ql.SimpleQuote(S)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, q, dc)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, r, dc)),
        ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(), v, dc)))
    option = ql.VanillaOption(ql.PlainVanillaPayoff(ql.Option.Call if call else ql.Option.Put, K),
                              ql.AmericanExercise(today, today + int(t_days)))
    option.setPricingEngine(ql.QdFpAmericanEngine(
        process, ql.QdFpAmericanEngine.highPrecisionScheme()))
    return option.NPV()


@pytest.mark.slow
def test_within_1e4_of_quantlib_high_precision_on_a_random_table():
    """210 random dividend-paying puts and calls (7 days to 3 years, strikes e^+-0.5 x
    spot, rates 0-8%, yields 0.5-8%, vols 8-80%) worth at least 1e-3 of spot: the
    default American price is within 1e-4 relative of QuantLib's QdFpAmericanEngine
    (high-precision scheme), and never below the European price."""
    rng = np.random.default_rng(20270315)
    rows = []
    while len(rows) < 210:
        K = 100.0 * np.exp(rng.uniform(-0.5, 0.5))
        days = int(rng.integers(7, 3 * 365))
        r, q = rng.uniform(0.0, 0.08), rng.uniform(0.005, 0.08)
        v, call = rng.uniform(0.08, 0.8), bool(rng.integers(0, 2))
        ref = _quantlib_qdfp(100.0, K, days, r, q, v, call)
        if ref >= 0.1:
            rows.append((K, days, r, q, v, call, ref))
    K, days, r, q, v, call, ref = (np.array(c) for c in zip(*rows))
    call = call.astype(bool)
    t = days / 365.0
    mine = american_price(100.0, K, t, r, q, v, call)
    rel = np.abs(mine / ref - 1)
    assert rel.max() <= 1e-4, (rel.max(), rows[int(np.argmax(rel))])
    euro = bsm_price(100.0, K, t, r, q, v, call)
    assert np.all(mine >= euro - 1e-12 * 100)


@pytest.mark.parametrize("S,K,days,r,q,v,call", [
    (100, 250, 730, 0.01, 0.08, 0.15, True),    # call worth 2e-8 of spot
    (100, 40, 1000, 0.06, 0.0, 0.15, False),    # put worth 2e-7 of spot
    (100, 300, 900, 0.0, 0.09, 0.20, True),
])
def test_tiny_prices_keep_their_early_exercise_premium(S, K, days, r, q, v, call):
    """Far out of the money the price is the European price plus the early-exercise
    premium, not the European price as a floor: the premium agrees with QuantLib's
    QdFpAmericanEngine (high precision) to 1%, the price to 1e-4."""
    t = days / 365.0
    ref = _quantlib_qdfp(S, K, days, r, q, v, call)
    euro = float(bsm_price(S, K, t, r, q, v, call))
    mine = float(american_price(S, K, t, r, q, v, call))
    assert ref > euro * (1 + 1e-3)              # the premium is there
    assert mine == pytest.approx(ref, rel=1e-4)
    assert (mine - euro) == pytest.approx(ref - euro, rel=1e-2)


def test_tree_method_stays_available():
    # Hull's binomial-tree chapter example again, by the tree (method="tree")
    assert float(american_price(50, 50, 5 / 12, 0.10, 0.0, 0.40, False, steps=400,
                                method="tree")) == pytest.approx(4.28, abs=0.006)


def _desk_chain(S=100.0, n_strikes=60):
    """Invented chain: 8 expiries, strikes 50-150 % of spot, calls and puts, a smile."""
    days = np.array([7, 14, 30, 60, 91, 182, 365, 730])
    D, K, C = (a.ravel() for a in np.meshgrid(days, np.linspace(0.5 * S, 1.5 * S, n_strikes),
                                              [True, False], indexing="ij"))
    t = D / 365.0
    k = np.log(K / S)
    return D, K, t, 0.22 - 0.15 * k + 0.25 * k * k + 0.05 / np.sqrt(12.0 * t), C


@pytest.mark.parametrize("r,q", [(0.045, 0.02), (0.02, 0.06), (0.08, 0.0)])
def test_strikes_sharing_a_boundary_table_price_as_alone(r, q, monkeypatch):
    """Strikes of one expiry take their boundaries from one table in volatility; the
    prices agree with each quote priced alone (its own boundary, solved to
    convergence) to 1e-7 relative (optbench's own reference: the same equations)."""
    from optbench.pricing import american as am
    _, K, t, v, c = _desk_chain()
    shared = american_price(100.0, K, t, r, q, v, c)
    monkeypatch.setattr(am, "BOUNDARY_ROUNDS", 200)
    alone = np.empty_like(shared)
    for i in range(K.size):   # one quote per call: nothing shared
        alone[i] = am.american_price(100.0, K[i], t[i], r, q, v[i], c[i])
    big = alone > 1e-3
    assert np.max(np.abs(shared[big] / alone[big] - 1)) < 1e-7
    # the table is only for expiries with many volatilities
    assert am.TABLE_MIN_VOLS > 1


@pytest.mark.slow
def test_desk_chain_within_1e4_of_quantlib_high_precision():
    """A sample of a desk chain (shared boundaries): within 1e-4 relative of QuantLib's
    QdFpAmericanEngine, high-precision scheme, where the price is >= 1e-3 of spot."""
    days, K, t, v, c = _desk_chain()
    mine = american_price(100.0, K, t, 0.045, 0.02, v, c)
    idx = np.random.default_rng(11).choice(K.size, 60, replace=False)
    ref = np.array([_quantlib_qdfp(100.0, float(K[i]), int(days[i]), 0.045, 0.02,
                                   float(v[i]), bool(c[i])) for i in idx])
    big = ref >= 0.1
    assert big.sum() > 30
    assert np.max(np.abs(mine[idx][big] / ref[big] - 1)) <= 1e-4


@pytest.mark.parametrize("r,q", [(0.045, 0.02), (0.02, 0.06)])
def test_desk_chain_implied_vol_round_trip(r, q):
    """Prices of a whole chain invert to the vols that made them (1e-6 where the price
    moves with the volatility: falls by 1e-4 for 1 % less), and every quote carries a
    status (deep in the money the price names no volatility)."""
    _, K, t, v, c = _desk_chain()
    p = american_price(100.0, K, t, r, q, v, c)
    vol, status = american_implied_vol_with_status(p, 100.0, K, t, r, q, c)
    posed = p - american_price(100.0, K, t, r, q, 0.99 * v, c) > 1e-4
    assert np.all(status[posed] == OK)
    assert np.max(np.abs(vol[posed] - v[posed])) < 1e-6
    assert set(np.unique(status)) <= {OK, BELOW_INTRINSIC}
    assert np.all(np.isnan(vol[status != OK]))
