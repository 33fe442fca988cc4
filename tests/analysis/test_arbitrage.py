"""Static-arbitrage flags: vertical spreads, butterflies (Carr & Madan 2005) and
calendar spreads in total variance (Gatheral & Jacquier 2014).

Arbitrage-free inputs are priced by vollib (Black-Scholes-Merton); arbitrageable
inputs are built by hand so that a named spread has a negative cost.
"""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from vollib.black_scholes_merton import black_scholes_merton as vl_price

from optbench.analysis.arbitrage import (ArbitrageFlags, calendar_arbitrage,
                                         strike_arbitrage)
from optbench.errors import InputError

S, R, Q = 100.0, 0.04, 0.01


def svi_iv(k, t):
    """A moderate downward skew, total variance t * w1(k) (rises with t at fixed k)."""
    w1 = 0.02 + 0.1 * (-0.5 * (k - 0.05) + np.sqrt((k - 0.05) ** 2 + 0.2 ** 2))
    return np.sqrt(w1)


def vollib_chain():
    """Calls and puts on four expiries, priced by vollib with the skew above."""
    rows = []
    for t in (0.05, 0.25, 0.5, 1.0):
        F = S * np.exp((R - Q) * t)
        for K in np.arange(60.0, 151.0, 2.5):
            iv = float(svi_iv(np.log(K / F), t))
            for flag in ("c", "p"):
                rows.append((t, K, flag == "c", vl_price(flag, S, K, t, R, iv, Q), F,
                             np.exp(-R * t), iv))
    return [np.array(c) for c in zip(*rows)]


def test_vollib_priced_chain_raises_no_flag():
    # vollib BSM prices of an arbitrage-free smile: every spread costs something.
    t, K, is_call, price, F, D, iv = vollib_chain()
    flags = strike_arbitrage(t, K, price, is_call, forward=F, discount=D)
    assert len(flags) == 0 and not flags.quote_flag.any()
    cal = calendar_arbitrage(t, np.log(K / F), iv ** 2 * t)
    assert len(cal) == 0


def test_hand_made_butterfly_fires():
    # Carr & Madan (2005): C(100) above the chord of C(90) and C(110) -> the
    # 90/100/110 call butterfly pays at least 0 and costs 12 + 1 - 2*7 = -1 < 0.
    K = np.array([90.0, 100.0, 110.0, 120.0])
    c = np.array([12.0, 7.0, 1.0, 0.4])
    flags = strike_arbitrage("2027-03-19", K, c, True, forward=100.0, discount=0.99)
    assert list(flags.kind) == ["butterfly"]
    assert (flags.i[0], flags.j[0], flags.l[0]) == (0, 1, 2)
    assert flags.violation[0] == pytest.approx(7.0 - 0.5 * (12.0 + 1.0))
    assert flags.quote_flag.tolist() == [True, True, True, False]


def test_hand_made_vertical_spreads_fire_and_input_order_does_not_matter():
    # A higher-strike call dearer than a lower one (call spread with negative cost),
    # and a call spread dearer than its discounted width D*(K2-K1).
    D = 0.98
    K = np.array([120.0, 80.0, 100.0, 110.0])        # deliberately unsorted
    c = np.array([1.0, 40.0, 5.0, 5.5])
    flags = strike_arbitrage(0.5, K, c, True, forward=100.0, discount=D)
    got = {(k, float(a), float(b)) for k, a, b in zip(flags.kind, flags.x_low, flags.x_high)}
    assert ("vertical", 100.0, 110.0) in got
    assert ("vertical_bound", 80.0, 100.0) in got
    vb = flags.violation[(flags.kind == "vertical_bound")][0]
    assert vb == pytest.approx(40.0 - 5.0 - D * 20.0)
    # positions refer to the caller's order
    row = np.flatnonzero(flags.kind == "vertical")[0]
    assert (flags.i[row], flags.l[row]) == (2, 3)


def test_puts_are_checked_through_put_call_parity():
    # Put-call parity C = P + D(F - K) (Hull, ch. 11): a put spread worth more than
    # its discounted width is the put side of a vertical breach.
    t, F, D = 0.5, S * np.exp((R - Q) * 0.5), np.exp(-R * 0.5)
    K = np.array([90.0, 100.0, 110.0])
    p = np.array([vl_price("p", S, x, t, R, 0.2, Q) for x in K])
    assert len(strike_arbitrage(t, K, p, False, forward=F, discount=D)) == 0
    p_bad = p.copy()
    p_bad[2] = p[1] + D * 10.0 + 0.5              # 100/110 put spread above its width
    flags = strike_arbitrage(t, K, p_bad, False, forward=F, discount=D)
    assert "vertical" in set(flags.kind)
    p_neg = p.copy()
    p_neg[0] = p[1] + 0.2                          # lower-strike put dearer
    assert "vertical_bound" in set(strike_arbitrage(t, K, p_neg, False, forward=F,
                                                    discount=D).kind)


def test_tolerance_is_tied_to_the_spread():
    # The breach is 0.5 in money; half-spreads of 0.3 on each of three legs give a
    # butterfly tolerance 0.3 + 0.5*0.3 + 0.5*0.3 = 0.6 > 0.5 -> no flag.
    K = np.array([90.0, 100.0, 110.0])
    mid = np.array([12.0, 7.0, 1.0])
    wide = strike_arbitrage(1.0, K, mid, True, forward=100.0, discount=1.0,
                            bid=mid - 0.3, ask=mid + 0.3)
    assert len(wide) == 0
    tight = strike_arbitrage(1.0, K, mid, True, forward=100.0, discount=1.0,
                             bid=mid - 0.1, ask=mid + 0.1)
    assert tight.count("butterfly") == 1
    assert tight.tolerance[0] == pytest.approx(0.2 + 1e-9)


def test_calendar_fires_when_total_variance_falls():
    # Gatheral & Jacquier (2014), Lemma 2.1: w(k, T) must not fall with T.
    # Expiry 1: 30% vol over 0.25y (w = 0.0225); expiry 2: 20% over 0.30y (w = 0.012).
    k1 = np.linspace(-0.2, 0.2, 9)
    k2 = np.linspace(-0.3, 0.3, 13)
    t = np.r_[np.full(9, 0.25), np.full(13, 0.30)]
    k = np.r_[k1, k2]
    w = np.r_[np.full(9, 0.3 ** 2 * 0.25), np.full(13, 0.2 ** 2 * 0.30)]
    cal = calendar_arbitrage(t, k, w)
    assert cal.count("calendar") == 9
    np.testing.assert_allclose(cal.violation, 0.0225 - 0.012)
    assert cal.quote_flag[:9].all()
    # a bid-ask tolerance wider than the breach silences it
    assert len(calendar_arbitrage(t, k, w, w_tol=np.full(22, 0.006))) == 0


def test_combine_and_frame():
    K = np.array([90.0, 100.0, 110.0])
    a = strike_arbitrage(1.0, K, [12.0, 7.0, 1.0], True, forward=100.0, discount=1.0)
    b = strike_arbitrage(1.0, K, [12.0, 12.5, 1.0], True, forward=100.0, discount=1.0)
    both = ArbitrageFlags.combine(a, b)
    assert len(both) == len(a) + len(b)
    assert set(both.to_frame().columns) >= {"kind", "violation", "tolerance"}


def test_bad_input_is_a_clear_error():
    with pytest.raises(InputError, match="arbitrage"):
        strike_arbitrage(1.0, [90, 100], [1.0, 2.0, 3.0], True, forward=100, discount=1)
    with pytest.raises(InputError, match="arbitrage"):
        strike_arbitrage(1.0, ["x", "y"], [1.0, 2.0], True, forward=100, discount=1)
    with pytest.raises(InputError, match="arbitrage"):
        strike_arbitrage(1.0, [90, 100], [1.0, 2.0], True, forward=-1, discount=1)
    assert len(strike_arbitrage(1.0, [], [], True, forward=100, discount=1)) == 0
    with pytest.raises(InputError, match="arbitrage"):
        calendar_arbitrage(["a", "b"], [0.0, 0.0], [0.01, 0.02])
    with pytest.raises(InputError, match="arbitrage"):
        calendar_arbitrage([-0.1, 0.2], [0.0, 0.0], [0.01, 0.02])
    with pytest.raises(InputError, match="arbitrage"):
        calendar_arbitrage([0.1, 0.2], [0.0, 0.0, 0.1], [0.01, 0.02])
    assert len(calendar_arbitrage([], [], [])) == 0


@settings(max_examples=30, deadline=None)
@given(vol=st.floats(0.05, 1.2), t=st.floats(0.01, 3.0), r=st.floats(-0.01, 0.08),
       q=st.floats(0.0, 0.05), call=st.booleans())
def test_property_bsm_prices_are_never_flagged(vol, t, r, q, call):
    # vollib BSM prices on any flat vol satisfy all three strike conditions.
    K = np.linspace(50.0, 200.0, 31)
    p = np.array([vl_price("c" if call else "p", S, x, t, r, vol, q) for x in K])
    F, D = S * np.exp((r - q) * t), np.exp(-r * t)
    assert len(strike_arbitrage(t, K, p, call, forward=F, discount=D, abs_tol=1e-8)) == 0


@settings(max_examples=30, deadline=None)
@given(bump=st.floats(0.05, 2.0), where=st.integers(1, 29))
def test_property_a_bump_above_the_chord_is_a_butterfly(bump, where):
    # Raising one interior price above the chord of its neighbours (equally spaced
    # strikes) by more than the tolerance breaks convexity there.
    K = np.linspace(50.0, 200.0, 31)
    c = np.array([vl_price("c", S, x, 0.5, R, 0.25, Q) for x in K])
    c[where] = 0.5 * (c[where - 1] + c[where + 1]) + bump
    flags = strike_arbitrage(0.5, K, c, True, forward=S * np.exp((R - Q) * 0.5),
                             discount=np.exp(-R * 0.5))
    assert where in set(flags.j[flags.kind == "butterfly"].tolist())
