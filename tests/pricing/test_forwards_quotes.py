"""Implied forwards from put-call parity and per-quote bid/mid/ask vols, on chains
priced by vollib (the outside reference for the prices)."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from vollib.black_scholes_merton import black_scholes_merton as vollib_price

from optbench.pricing.forwards import implied_forwards, parity_pairs
from optbench.pricing.quotes import otm_quotes, quote_implied_vols

SPOT, RATE, YIELD = 2500.0, 0.035, 0.012


def _chain(rate=RATE, div=YIELD, half_spread=0.02, expiries=((14, 0.22), (91, 0.20),
                                                                  (365, 0.19))):
    """Quotes priced with vollib.black_scholes_merton at a skewed vol per strike."""
    rows = []
    for days, atm in expiries:
        t = days / 365.0
        for K in np.arange(2000.0, 3001.0, 50.0):
            vol = atm - 0.25 * np.log(K / SPOT)
            for call in (True, False):
                p = vollib_price("c" if call else "p", SPOT, K, t, rate, vol, div)
                rows.append({"expiry": pd.Timestamp("2027-03-01") + pd.Timedelta(days=days),
                             "strike": K, "is_call": call, "bid": max(p - half_spread, 0.0),
                             "ask": p + half_spread, "mid": p, "t": t, "vol": vol,
                             "style": "european"})
    return pd.DataFrame(rows)


def test_parity_recovers_forward_and_discount():
    # put-call parity, Hull ch. 11: C - P = D (F - K), F = S e^{(r-q)t}, D = e^{-rt}
    q = _chain(half_spread=0.0)
    q["bid"] = q["mid"] * 0.999
    q["ask"] = q["mid"] * 1.001
    fw = implied_forwards(q, SPOT, 0.0, 0.0)  # given rate/yield deliberately wrong
    assert list(fw["source"]) == ["parity"] * 3
    t = fw["t"].to_numpy()
    np.testing.assert_allclose(fw["forward"], SPOT * np.exp((RATE - YIELD) * t), rtol=1e-9)
    long = fw["discount_source"] == "parity"
    assert long.iloc[-1]
    np.testing.assert_allclose(fw.loc[long, "discount"], np.exp(-RATE * t[long]), rtol=1e-9)
    np.testing.assert_allclose(fw.loc[long, "rate"], RATE, atol=1e-8)
    np.testing.assert_allclose(fw.loc[long, "carry"], YIELD, atol=1e-8)


def test_outlier_pair_is_trimmed():
    q = _chain()
    exp0 = q["expiry"].min()
    bad = (q["expiry"] == exp0) & (q["strike"] == 2500.0) & q["is_call"]
    q.loc[bad, ["bid", "ask", "mid"]] += 15.0  # one stale call quote
    fw = implied_forwards(q, SPOT, RATE, YIELD)
    t0 = fw["t"].iloc[0]
    assert fw["forward"].iloc[0] == pytest.approx(SPOT * np.exp((RATE - YIELD) * t0), rel=2e-5)
    assert fw["n_pairs"].iloc[0] < 10


def test_too_few_pairs_falls_back_to_given_rate_and_yield():
    q = _chain()
    exp0 = q["expiry"].min()
    # leave only two two-sided pairs on the first expiry
    drop = (q["expiry"] == exp0) & ~q["strike"].isin([2450.0, 2500.0]) & ~q["is_call"]
    q = q[~drop]
    fw = implied_forwards(q, SPOT, RATE, YIELD)
    row = fw.iloc[0]
    assert row["source"] == "given" and row["n_pairs"] == 0
    assert row["forward"] == pytest.approx(SPOT * np.exp((RATE - YIELD) * row["t"]), rel=1e-14)
    assert fw["source"].iloc[1] == "parity"


def test_american_expiries_use_given_rates_by_default():
    q = _chain()
    q["style"] = "american"
    fw = implied_forwards(q, SPOT, RATE, YIELD)
    assert set(fw["source"]) == {"given"}
    assert set(implied_forwards(q, SPOT, RATE, YIELD, american="parity")["source"]) == {"parity"}


def test_bad_input():
    q = _chain().drop(columns=["bid"])
    with pytest.raises(ValueError, match="bid"):
        implied_forwards(q, SPOT, RATE, YIELD)
    with pytest.raises(ValueError, match="spot"):
        implied_forwards(_chain(), -1.0, RATE, YIELD)


def test_parity_pairs_need_both_sides_quoted():
    q = _chain()
    q.loc[q.index[q["is_call"]][3], "bid"] = 0.0  # a call with no bid is not a usable pair
    two_sided = q[q["bid"] > 0].groupby(["expiry", "strike"])["is_call"].nunique()
    pairs = parity_pairs(q)
    assert len(pairs) == int((two_sided == 2).sum())
    assert len(pairs) < len(q) // 2


def test_quote_vols_recover_the_pricing_vols():
    q = _chain()
    fw = implied_forwards(q, SPOT, RATE, YIELD)
    out = quote_implied_vols(q, fw, SPOT)
    ok = out["status"] == "ok"
    assert ok.mean() > 0.95
    # vollib priced every quote at "vol": the mid vol is that vol (forwards from parity)
    np.testing.assert_allclose(out.loc[ok, "iv_mid"], out.loc[ok, "vol"], atol=2e-6)
    both = ok & (out["status_bid"] == "ok") & (out["status_ask"] == "ok")
    assert np.all(out.loc[both, "iv_bid"] < out.loc[both, "iv_mid"])
    assert np.all(out.loc[both, "iv_mid"] < out.loc[both, "iv_ask"])
    zero_bid = out["bid"] <= 0
    assert np.all(out.loc[zero_bid, "status_bid"] == "below_intrinsic")
    assert np.all(np.isnan(out.loc[zero_bid, "iv_bid"]))


def test_otm_selection():
    q = _chain()
    fw = implied_forwards(q, SPOT, RATE, YIELD)
    out = otm_quotes(quote_implied_vols(q, fw, SPOT))
    assert np.all(np.where(out["is_call"], out["strike"] >= out["forward"],
                           out["strike"] < out["forward"]))
    assert len(out) == len(q) // 2


def test_american_quotes_use_the_tree():
    from optbench.pricing.american import american_price

    q = _chain(expiries=((91, 0.2),))
    q["style"] = "american"
    t = q["t"].to_numpy()
    q["mid"] = american_price(SPOT, q["strike"].to_numpy(), t, RATE, YIELD,
                              q["vol"].to_numpy(), q["is_call"].to_numpy())
    q["bid"], q["ask"] = q["mid"] - 0.05, q["mid"] + 0.05
    fw = implied_forwards(q, SPOT, RATE, YIELD)
    out = quote_implied_vols(q, fw, SPOT)
    ok = out["status"] == "ok"
    assert ok.mean() > 0.9
    np.testing.assert_allclose(out.loc[ok, "iv_mid"], out.loc[ok, "vol"], atol=1e-5)
    with pytest.raises(ValueError, match="spot"):
        quote_implied_vols(q, fw)


def test_missing_forward_is_an_error():
    q = _chain()
    fw = implied_forwards(q, SPOT, RATE, YIELD).iloc[1:]
    with pytest.raises(ValueError, match="no forward"):
        quote_implied_vols(q, fw, SPOT)
