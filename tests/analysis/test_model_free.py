"""Model-free implied variance (Demeterfi, Derman, Kamal & Zou 1999; Britten-Jones &
Neuberger 2000) and its constant-maturity interpolation.

Outside references: QuantLib's ReplicatingVarianceSwapEngine on the same strip, the
worked example of Demeterfi et al. (1999) as carried in QuantLib's test suite
(test-suite/varianceswaps.cpp), and Black-Scholes-Merton prices from vollib, under
which the strip must return the flat vol squared.
"""
from __future__ import annotations

import numpy as np
import pytest
import QuantLib as ql
from hypothesis import given, settings, strategies as st

from vollib.black_scholes_merton import black_scholes_merton as vl_price

from optbench.analysis.model_free import (CONSTANT_MATURITY_DAYS,
                                          constant_maturity_variance,
                                          model_free_variance)
from optbench.errors import InputError


def vollib_strip(S, K, t, r, q, vols):
    vols = np.broadcast_to(vols, K.shape)
    c = np.array([vl_price("c", S, k, t, r, v, q) for k, v in zip(K, vols)])
    p = np.array([vl_price("p", S, k, t, r, v, q) for k, v in zip(K, vols)])
    return c, p


def quantlib_fair_variance(S, r, q, t, K, vols, split):
    """Fair variance from QuantLib's ReplicatingVarianceSwapEngine on strikes K
    (puts at or below ``split``, calls at or above) with the given smile."""
    today = ql.Date(4, 1, 2027)
    ql.Settings.instance().evaluationDate = today
    dc = ql.Actual365Fixed()
    expiry = today + int(round(t * 365))
    m = ql.Matrix(len(K), 1)
    for i, v in enumerate(vols):
        m[i][0] = float(v)
    vol_ts = ql.BlackVolTermStructureHandle(ql.BlackVarianceSurface(
        today, ql.NullCalendar(), [expiry], [float(x) for x in K], m, dc))
    process = ql.BlackScholesMertonProcess(
        ql.QuoteHandle(ql.SimpleQuote(S)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, q, dc)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, r, dc)), vol_ts)
    swap = ql.VarianceSwap(ql.Position.Long, 0.04, 1.0, today, expiry)
    swap.setPricingEngine(ql.ReplicatingVarianceSwapEngine(
        process, 5.0, [float(x) for x in K if x >= split],
        [float(x) for x in K if x <= split]))
    return swap.variance()


@pytest.mark.parametrize("days, dk", [(30, 0.5), (91, 0.5), (91, 1.0), (365, 1.0)])
def test_dense_bsm_strip_gives_the_flat_variance(days, dk):
    # Demeterfi et al. (1999): under BSM with flat vol the strip replicates the log
    # contract, so the model-free variance is sigma^2 up to the discretisation error.
    # The OTM price has a kink of slope D at the forward, so the sum's error is of
    # order dK^2 / (T F^2) (derived from the midpoint rule; checked below).
    S, r, q, vol = 100.0, 0.03, 0.01, 0.25
    t = days / 365
    F, D = S * np.exp((r - q) * t), np.exp(-r * t)
    K = np.arange(20.0, 400.0 + dk / 2, dk)
    c, p = vollib_strip(S, K, t, r, q, vol)
    mf = model_free_variance(K, t, F, D, call_mid=c, put_mid=p)
    assert abs(mf.variance - vol ** 2) < dk ** 2 / (t * F ** 2)
    assert mf.n_strikes == K.size and mf.k0 == K[K <= F].max()
    assert mf.note == "full strip"


def test_discretisation_error_falls_with_the_square_of_the_strike_step():
    S, r, q, vol, t = 100.0, 0.05, 0.0, 0.2, 0.25
    F, D = S * np.exp(r * t), np.exp(-r * t)
    errs = []
    for dk in (1.0, 0.5):
        K = np.arange(20.0, 400.0 + dk / 2, dk)
        c, p = vollib_strip(S, K, t, r, q, vol)
        errs.append(model_free_variance(K, t, F, D, call_mid=c, put_mid=p).variance - vol ** 2)
    assert 3.0 < errs[0] / errs[1] < 5.0          # second order: about 4


@pytest.mark.parametrize("days, dk", [(91, 0.5), (91, 1.0), (365, 1.0)])
def test_matches_quantlib_replicating_variance_swap_engine(days, dk):
    # QuantLib ReplicatingVarianceSwapEngine on the same strikes and flat vol. With a
    # dividend yield this QuantLib version's result moves where the replicated
    # variance should not (observed here), so the comparison uses q = 0.
    S, r, q, vol = 100.0, 0.05, 0.0, 0.25
    t = days / 365
    F, D = S * np.exp((r - q) * t), np.exp(-r * t)
    K = np.arange(20.0, 400.0 + dk / 2, dk)
    c, p = vollib_strip(S, K, t, r, q, vol)
    ours = model_free_variance(K, t, F, D, call_mid=c, put_mid=p).variance
    theirs = quantlib_fair_variance(S, r, q, t, K, np.full(K.size, vol), split=100.0)
    assert ours == pytest.approx(theirs, abs=1e-5)


def test_demeterfi_worked_example_skewed_strip():
    # Demeterfi, Derman, Kamal & Zou (1999) replication example, as in QuantLib's
    # test-suite/varianceswaps.cpp: S = 100, r = 5%, q = 0, T = 0.246575, strikes
    # 50..135 step 5, implied vol 30% at 50 falling one point per 5 of strike to 13%
    # at 135; QuantLib's expected fair variance 0.04189 (tolerance 1e-4 there).
    S, r, q, t = 100.0, 0.05, 0.0, 0.246575
    K = np.arange(50.0, 136.0, 5.0)
    vols = 0.20 - 0.002 * (K - 100.0)
    c, p = vollib_strip(S, K, t, r, q, vols)
    F, D = S * np.exp(r * t), np.exp(-r * t)
    ours = model_free_variance(K, t, F, D, call_mid=c, put_mid=p).variance
    assert ours == pytest.approx(0.04189, abs=1e-4)
    assert ours == pytest.approx(quantlib_fair_variance(S, r, q, t, K, vols, 100.0),
                                 abs=1e-4)
    # the skew lifts the fair variance above the ATM vol squared (0.20^2)
    assert ours > 0.04


def test_truncation_stops_at_two_strikes_without_a_bid():
    # Truncation rule (common practice, documented in docs/methodology.md).
    S, r, q, vol, t = 100.0, 0.02, 0.0, 0.2, 0.1
    F, D = S * np.exp(r * t), np.exp(-r * t)
    K = np.arange(60.0, 141.0, 2.5)
    c, p = vollib_strip(S, K, t, r, q, vol)
    cb, pb = c - 0.02, p - 0.02
    cb[cb < 0.05] = 0.0
    pb[pb < 0.05] = 0.0
    pb[0] = 0.01                       # a stray bid beyond the cut is not used
    mf = model_free_variance(K, t, F, D, call_mid=c, put_mid=p, call_bid=cb, put_bid=pb)
    zero_p = np.flatnonzero((pb <= 0) & (K < F))
    lo_cut = K[zero_p.max()]           # the highest of the put strikes without a bid
    assert mf.strike_low > lo_cut
    assert "put side stopped" in mf.note and "call side stopped" in mf.note
    keep = (K > lo_cut) & ((cb > 0) | (K <= F)) & ((pb > 0) | (K >= F))
    keep &= K < K[(cb <= 0) & (K > F)].min()
    ref = model_free_variance(K[keep], t, F, D, call_mid=c[keep], put_mid=p[keep])
    assert mf.variance == pytest.approx(ref.variance, rel=1e-14)
    assert mf.n_strikes == keep.sum()
    # truncation removes OTM value: the estimate is below the full strip's
    full = model_free_variance(K, t, F, D, call_mid=c, put_mid=p)
    assert mf.variance < full.variance


def test_otm_mid_input_equals_call_put_input():
    S, r, q, vol, t = 100.0, 0.03, 0.01, 0.3, 0.5
    F, D = S * np.exp((r - q) * t), np.exp(-r * t)
    K = np.arange(40.0, 220.0, 2.0)
    c, p = vollib_strip(S, K, t, r, q, vol)
    k0 = K[K <= F].max()
    otm = np.where(K < k0, p, np.where(K > k0, c, 0.5 * (c + p)))
    a = model_free_variance(K, t, F, D, call_mid=c, put_mid=p)
    b = model_free_variance(K[::-1], t, F, D, otm_mid=otm[::-1])   # order is free
    assert a.variance == pytest.approx(b.variance, rel=1e-14)


def test_too_few_strikes_is_nan_with_a_note():
    mf = model_free_variance([95.0, 100.0], 0.2, 100.5, 0.99, call_mid=[6.0, 2.5],
                             put_mid=[0.5, 1.9])
    assert np.isnan(mf.variance) and "at least" in mf.note
    mf = model_free_variance([110.0, 120.0, 130.0], 0.2, 100.0, 0.99,
                             call_mid=[1.0, 0.5, 0.2], put_mid=[10.0, 20.0, 30.0])
    assert np.isnan(mf.variance) and "below the forward" in mf.note


@pytest.mark.parametrize("kwargs", [
    dict(strike=[90.0, 100.0], t=-0.1, forward=100.0, discount=1.0, otm_mid=[1.0, 2.0]),
    dict(strike=[90.0, 90.0, 100.0], t=0.1, forward=100.0, discount=1.0,
         otm_mid=[1.0, 1.0, 2.0]),
    dict(strike=[90.0, 100.0], t=0.1, forward=100.0, discount=1.0, otm_mid=[1.0]),
    dict(strike=["a", "b"], t=0.1, forward=100.0, discount=1.0, otm_mid=[1.0, 2.0]),
    dict(strike=[], t=0.1, forward=100.0, discount=1.0, otm_mid=[]),
    dict(strike=[90.0, 100.0], t=0.1, forward=100.0, discount=1.0),
])
def test_bad_input_is_a_clear_error(kwargs):
    with pytest.raises(InputError, match="model_free_variance"):
        model_free_variance(**kwargs)


@settings(max_examples=20, deadline=None)
@given(vol=st.floats(0.08, 0.8), days=st.integers(20, 730), r=st.floats(0.0, 0.06))
def test_property_flat_vol_strip_recovers_vol(vol, days, r):
    # Demeterfi et al. (1999) again, over random vols, expiries and rates; strikes
    # cover +-7 standard deviations in log-moneyness with 400 steps.
    S, q, t = 100.0, 0.0, days / 365
    F, D = S * np.exp(r * t), np.exp(-r * t)
    sd = vol * np.sqrt(t)
    K = F * np.exp(np.linspace(-7 * sd, 7 * sd, 401))
    c, p = vollib_strip(S, K, t, r, q, vol)
    mf = model_free_variance(K, t, F, D, call_mid=c, put_mid=p)
    assert mf.vol == pytest.approx(vol, rel=2e-3)


# --------------------------------------------------------------------------------
# constant maturities
# --------------------------------------------------------------------------------

def test_constant_maturity_is_linear_in_total_variance():
    # With total variance exactly linear in t, w = 0.001 + 0.04 t, linear
    # interpolation in w is exact: var(tau) = (0.001 + 0.04 tau) / tau.
    days = np.array([9, 37, 65, 100, 191, 282, 373, 555])
    t = days / 365
    var = (0.001 + 0.04 * t) / t
    cm = constant_maturity_variance(t, var)
    tau = np.array(CONSTANT_MATURITY_DAYS) / 365
    np.testing.assert_allclose(cm.variance, (0.001 + 0.04 * tau) / tau, rtol=1e-13)
    assert tuple(cm.days) == CONSTANT_MATURITY_DAYS
    assert cm.notes[0] == "interpolated between 9 and 37 days"


def test_constant_maturity_does_not_extrapolate():
    t = np.array([45, 100, 200]) / 365
    var = np.array([0.04, 0.042, 0.045])
    cm = constant_maturity_variance(t, var)
    assert np.isnan(cm.variance[0]) and "before the first" in cm.notes[0]
    assert np.isnan(cm.variance[-1]) and "after the last" in cm.notes[-1]
    assert np.isfinite(cm.variance[1:4]).all()
    # a target exactly on a listed expiry takes its variance
    cm2 = constant_maturity_variance(t, var, days=(100,))
    assert cm2.variance[0] == pytest.approx(0.042)
    # NaN variances are left out
    cm3 = constant_maturity_variance(np.r_[t, 400 / 365], np.r_[var, np.nan])
    assert np.isnan(cm3.variance[-1])


def test_constant_maturity_notes_calendar_arbitrage_and_bad_input():
    cm = constant_maturity_variance(np.array([20, 40]) / 365, [0.09, 0.02], days=(30,))
    assert "calendar arbitrage" in cm.notes[0]
    with pytest.raises(InputError, match="constant_maturity_variance"):
        constant_maturity_variance([0.1, 0.2], [0.04])
    with pytest.raises(InputError, match="constant_maturity_variance"):
        constant_maturity_variance([0.1, 0.1], [0.04, 0.05])


def test_two_sided_mean_and_max_at_k0_equal_numpy_bit_for_bit():
    # reference: numpy.nanmean and numpy.nanmax of the call and put quote at K0 (what
    # the strip used before); signed zeros and infinities included
    import itertools
    from optbench.analysis.model_free import _nanmax2, _nanmean2
    vals = [np.nan, 0.0, -0.0, 1.5, 2.25, np.inf, -np.inf, 1e-300, 3.3e5, 0.1, 0.2]
    for a, b in itertools.product(vals, vals):
        if np.isnan(a) and np.isnan(b):
            continue
        with np.errstate(all="ignore"):
            mean = np.nanmean(np.array([[a], [b]]), axis=0)[0]
        top = np.nanmax([a, b])
        got_mean, got_top = _nanmean2(a, b), _nanmax2(a, b)
        assert np.array_equal(mean, got_mean, equal_nan=True), (a, b)
        assert np.signbit(mean) == np.signbit(got_mean), (a, b)
        assert np.array_equal(top, got_top) and np.signbit(top) == np.signbit(got_top), (a, b)
