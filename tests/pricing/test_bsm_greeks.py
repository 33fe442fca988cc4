"""Black-Scholes-Merton prices and greeks against textbook values, vollib and finite
differences; properties with hypothesis."""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from optbench.pricing.bsm import black_price, bsm_price
from optbench.pricing.greeks import black_greeks, bsm_greeks


def test_hull_example_15_6_call_and_put():
    # Hull, Options, Futures, and Other Derivatives, Example 15.6: c = 4.76, p = 0.81
    assert float(bsm_price(42, 40, 0.5, 0.10, 0.0, 0.20, True)) == pytest.approx(4.76, abs=5e-3)
    assert float(bsm_price(42, 40, 0.5, 0.10, 0.0, 0.20, False)) == pytest.approx(0.81, abs=5e-3)


def test_haug_generalised_bsm_put():
    # Haug, The Complete Guide to Option Pricing Formulas (2007), generalised
    # Black-Scholes example: S = 75, K = 70, T = 0.5, r = 10%, b = 5% (q = 5%),
    # sigma = 35% -> put 4.0870 (value from memory)
    assert float(bsm_price(75, 70, 0.5, 0.10, 0.05, 0.35, False)) == pytest.approx(4.0870, abs=1e-4)


def test_haug_black76_futures_option():
    # Haug (2007), Black-76 example: F = X = 19, T = 0.75, r = 10%, sigma = 28%
    # -> call = put = 1.7011 (value from memory)
    D = np.exp(-0.10 * 0.75)
    assert float(black_price(19, 19, 0.75, D, 0.28, True)) == pytest.approx(1.7011, abs=1e-4)
    assert float(black_price(19, 19, 0.75, D, 0.28, False)) == pytest.approx(1.7011, abs=1e-4)


def test_hull_chapter_19_greeks():
    # Hull, Options, Futures, and Other Derivatives, ch. 19 running example
    # (S = 49, K = 50, r = 5%, sigma = 20%, T = 20 weeks): delta 0.522 (Ex. 19.1),
    # theta -4.31 per year (Ex. 19.2), gamma 0.066 (Ex. 19.4), vega 12.1 (Ex. 19.6),
    # rho 8.91 (Ex. 19.7); values from memory of the text
    g = bsm_greeks(49, 50, 20 / 52, 0.05, 0.0, 0.20, True)
    assert float(g.delta) == pytest.approx(0.522, abs=5e-4)
    assert float(g.theta_per_year) == pytest.approx(-4.31, abs=5e-3)
    assert float(g.theta_per_day) == pytest.approx(-4.31 / 365, abs=5e-5)
    assert float(g.gamma) == pytest.approx(0.066, abs=5e-4)
    assert float(g.vega) == pytest.approx(12.1, abs=0.05)
    assert float(g.vega_per_vol_point) == pytest.approx(0.121, abs=5e-4)
    assert float(g.rho) == pytest.approx(8.91, abs=5e-3)


def test_greeks_match_vollib_analytical():
    # vollib.black_scholes_merton.greeks.analytical: vega and rho per 1% (x 0.01),
    # theta per calendar day (/365)
    from vollib.black_scholes_merton.greeks import analytical as ref

    rng = np.random.default_rng(7)
    n = 60
    S = rng.uniform(50, 150, n)
    K = rng.uniform(40, 180, n)
    t = rng.uniform(0.02, 3, n)
    r = rng.uniform(-0.01, 0.08, n)
    q = rng.uniform(0.0, 0.05, n)
    v = rng.uniform(0.05, 1.2, n)
    c = rng.random(n) < 0.5
    g = bsm_greeks(S, K, t, r, q, v, c)
    for i in range(n):
        f = "c" if c[i] else "p"
        args = (f, S[i], K[i], t[i], r[i], v[i], q[i])
        assert g.delta[i] == pytest.approx(ref.delta(*args), rel=1e-10, abs=1e-12)
        assert g.gamma[i] == pytest.approx(ref.gamma(*args), rel=1e-10, abs=1e-14)
        assert g.vega_per_vol_point[i] == pytest.approx(ref.vega(*args), rel=1e-10, abs=1e-12)
        assert g.theta_per_day[i] == pytest.approx(ref.theta(*args), rel=1e-10, abs=1e-12)
        assert g.rho_per_point[i] == pytest.approx(ref.rho(*args), rel=1e-10, abs=1e-12)


def test_greeks_match_finite_differences_of_price():
    # central differences of bsm_price (its own formula checked above against Hull)
    S, K, t, r, q, v = 103.0, 97.0, 0.8, 0.035, 0.012, 0.27
    for c in (True, False):
        g = bsm_greeks(S, K, t, r, q, v, c)
        p = lambda **kw: float(bsm_price(kw.get("S", S), K, kw.get("t", t), kw.get("r", r), q,
                                         kw.get("v", v), c))
        h = 1e-4
        assert float(g.delta) == pytest.approx((p(S=S + h) - p(S=S - h)) / (2 * h), rel=1e-7)
        assert float(g.gamma) == pytest.approx(
            (p(S=S + 1e-2) - 2 * p() + p(S=S - 1e-2)) / 1e-4, rel=1e-5)
        assert float(g.vega) == pytest.approx((p(v=v + h) - p(v=v - h)) / (2 * h), rel=1e-7)
        assert float(g.rho) == pytest.approx((p(r=r + h) - p(r=r - h)) / (2 * h), rel=1e-7)
        # theta is minus the derivative in time to expiry
        assert float(g.theta_per_year) == pytest.approx(-(p(t=t + h) - p(t=t - h)) / (2 * h),
                                                        rel=1e-6)


def test_black76_greeks_are_bsm_with_yield_equal_rate():
    # Black (1976): a futures option is the generalised BSM with cost of carry 0
    # (Haug 2007, section 1.1.2)
    g = black_greeks(19, 19, 0.75, 0.10, 0.28, True)
    assert float(g.price) == pytest.approx(1.7011, abs=1e-4)  # Haug example, from memory
    h = 1e-5
    up = float(black_price(19, 19, 0.75, np.exp(-(0.10 + h) * 0.75), 0.28, True))
    dn = float(black_price(19, 19, 0.75, np.exp(-(0.10 - h) * 0.75), 0.28, True))
    assert float(g.rho) == pytest.approx((up - dn) / (2 * h), rel=1e-7)


def test_put_call_parity_holds():
    # Hull ch. 11: c - p = S e^{-qT} - K e^{-rT}
    S, K = 100.0, np.linspace(50, 200, 31)
    t, r, q, v = 1.3, 0.04, 0.02, 0.3
    c = bsm_price(S, K, t, r, q, v, True)
    p = bsm_price(S, K, t, r, q, v, False)
    np.testing.assert_allclose(c - p, S * np.exp(-q * t) - K * np.exp(-r * t), atol=1e-11)


def test_broadcasting_and_scalar_shapes():
    out = bsm_price(100.0, np.array([[90.0], [110.0]]), np.array([0.5, 1.0, 2.0]), 0.03, 0.0,
                    0.2, True)
    assert out.shape == (2, 3)
    g = bsm_greeks(100.0, 100.0, 1.0, 0.03, 0.0, 0.2, True)
    assert np.ndim(g.delta) == 0


def test_expired_and_zero_vol_greeks_are_intrinsic():
    g = bsm_greeks(110.0, 100.0, 0.0, 0.03, 0.0, 0.2, [True, False])
    np.testing.assert_allclose(g.price, [10.0, 0.0])
    np.testing.assert_allclose(g.delta, [1.0, 0.0])
    np.testing.assert_allclose(g.gamma, [0.0, 0.0])


def test_strings_are_rejected():
    with pytest.raises(TypeError):
        bsm_greeks("100", 100, 1.0, 0.03, 0.0, 0.2, True)


@settings(max_examples=150, deadline=None)
@given(S=st.floats(1, 1000), k=st.floats(0.3, 3), t=st.floats(1 / 365, 5),
       r=st.floats(-0.02, 0.15), q=st.floats(0, 0.1), v=st.floats(0.01, 2.0),
       call=st.booleans())
def test_price_rises_with_vol_and_stays_in_bounds(S, k, t, r, q, v, call):
    # no-arbitrage bounds, Hull ch. 11: max(D(F-K),0) <= c <= S e^{-qT};
    # max(D(K-F),0) <= p <= K e^{-rT}; vega >= 0 (Hull ch. 19)
    K = S * k
    F = S * np.exp((r - q) * t)
    D = np.exp(-r * t)
    p1 = float(bsm_price(S, K, t, r, q, v, call))
    p2 = float(bsm_price(S, K, t, r, q, v * 1.05, call))
    lo = D * max((F - K) if call else (K - F), 0.0)
    hi = S * np.exp(-q * t) if call else K * D
    tol = 1e-9 * max(S, K)
    assert lo - tol <= p1 <= hi + tol
    assert p2 >= p1 - tol
    assert float(bsm_greeks(S, K, t, r, q, v, call).vega) >= 0


def test_text_flags_and_numbers_are_rejected_not_misread():
    # numpy reads any non-empty string as True; optbench refuses instead
    with pytest.raises(TypeError, match="is_call"):
        bsm_price(100, 100, 1.0, 0.0, 0.0, 0.2, "put")
    with pytest.raises(TypeError, match="S must be numeric"):
        bsm_price("100", 100, 1.0, 0.0, 0.0, 0.2, True)
    with pytest.raises(ValueError, match="is_call"):
        bsm_price(100, 100, 1.0, 0.0, 0.0, 0.2, [2, 0])
    # 0/1 and object arrays of numbers are fine
    np.testing.assert_allclose(bsm_price(np.array([100.0], dtype=object), 100, 1.0, 0.0, 0.0,
                                         0.2, [1, 0]),
                               bsm_price(100.0, 100, 1.0, 0.0, 0.0, 0.2, [True, False]))


def test_matches_quantlib_analytic_european_engine():
    # QuantLib AnalyticEuropeanEngine: NPV, delta, gamma, vega (per 1.00), rho, and
    # theta per year (QuantLib's theta is per year; thetaPerDay divides by 365)
    import QuantLib as ql

    today = ql.Date(15, 3, 2027)
    ql.Settings.instance().evaluationDate = today
    dc = ql.Actual365Fixed()
    cases = [(100.0, 95.0, 30, 0.03, 0.01, 0.25, True), (100.0, 120.0, 400, 0.05, 0.02, 0.4, False),
             (2500.0, 2500.0, 730, 0.01, 0.03, 0.18, True), (50.0, 40.0, 91, 0.08, 0.0, 0.6, False)]
    for S, K, days, r, q, v, call in cases:
        process = ql.BlackScholesMertonProcess(
            ql.QuoteHandle(ql.SimpleQuote(S)),
            ql.YieldTermStructureHandle(ql.FlatForward(today, q, dc)),
            ql.YieldTermStructureHandle(ql.FlatForward(today, r, dc)),
            ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(), v, dc)))
        option = ql.VanillaOption(
            ql.PlainVanillaPayoff(ql.Option.Call if call else ql.Option.Put, K),
            ql.EuropeanExercise(today + days))
        option.setPricingEngine(ql.AnalyticEuropeanEngine(process))
        g = bsm_greeks(S, K, days / 365.0, r, q, v, call)
        assert float(g.price) == pytest.approx(option.NPV(), rel=1e-12)
        assert float(g.delta) == pytest.approx(option.delta(), rel=1e-11)
        assert float(g.gamma) == pytest.approx(option.gamma(), rel=1e-11)
        assert float(g.vega) == pytest.approx(option.vega(), rel=1e-11)
        assert float(g.rho) == pytest.approx(option.rho(), rel=1e-11)
        assert float(g.theta_per_year) == pytest.approx(option.theta(), rel=1e-10)
        assert float(g.theta_per_day) == pytest.approx(option.thetaPerDay(), rel=1e-10)
