"""Validation: each rejection reason, the warnings, the no-arbitrage bounds checked
against textbook examples and reference pricers, and the legitimate quotes kept."""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from optbench.data.chain import load_chain
from optbench.data.validate import REASONS, WARNINGS, no_arbitrage_bounds

HEADER = "underlying,quote_date,underlying_price,expiry,strike,type,bid,ask,volume," \
         "open_interest,style,symbol"
# spot 100 on 2026-11-27, rate 5%, no dividend; one row per reason, by line number
ROWS = {
    "ok":                 "ZPHX,2026-11-27,100,2027-05-28,100,C,7.00,7.40,10,100,european,",
    "bad_symbol":         "ZPHX,2026-11-27,100,,,,7.00,7.40,10,100,european,ZPHX  27XX28C00100000",
    "missing_field":      "ZPHX,2026-11-27,100,2027-05-28,,C,7.00,7.40,10,100,european,",
    "bad_date":           "ZPHX,2026-11-27,100,2027-02-30,100,P,4.00,4.40,10,100,european,",
    "bad_number":         "ZPHX,2026-11-27,100,2027-05-28,10O,P,4.00,4.40,10,100,european,",
    "bad_type":           "ZPHX,2026-11-27,100,2027-05-28,105,X,4.00,4.40,10,100,european,",
    "bad_style":          "ZPHX,2026-11-27,100,2027-05-28,105,P,7.00,7.40,10,100,bermudan,",
    "symbol_mismatch":    "ZPHX,2026-11-27,100,2027-05-28,110,C,3.00,3.40,10,100,european,"
                          "ZPHX  270528C00115000",
    "ok_symbol":          ",2026-11-27,100,,,,3.00,3.40,10,100,european,ZPHX  270528C00110000",
    "other_underlying":   "ZPHXW,2026-11-27,100,2027-05-28,120,C,1.00,1.20,10,100,european,",
    "other_quote_date":   "ZPHX,2026-11-26,100,2027-05-28,125,C,1.00,1.20,10,100,european,",
    "nonpositive_strike": "ZPHX,2026-11-27,100,2027-05-28,0,C,99.0,99.4,10,100,european,",
    # a strike typed with three extra zeros: 1,000x spot, beyond the default factor 10
    "implausible_strike": "ZPHX,2026-11-27,100,2027-05-28,100000,P,5.00,5.10,10,100,european,",
    "expired":            "ZPHX,2026-11-27,100,2026-11-27,95,C,5.00,5.10,10,100,european,",
    "negative_quote":     "ZPHX,2026-11-27,100,2027-05-28,130,C,-0.10,0.40,10,100,european,",
    "crossed":            "ZPHX,2026-11-27,100,2027-05-28,90,P,2.00,1.80,10,100,european,",
    "no_bid":             "ZPHX,2026-11-27,100,2027-05-28,140,C,0,0.10,10,100,european,",
    "duplicate":          "ZPHX,2026-11-27,100,2027-05-28,100,C,7.05,7.35,10,100,european,",
    # a 6-month call struck at 60 is worth at least 100 - 60 e^{-0.05*0.5} = 41.48
    "below_intrinsic":    "ZPHX,2026-11-27,100,2027-05-28,60,C,38.0,39.0,10,100,european,",
    "above_upper_bound":  "ZPHX,2026-11-27,100,2027-05-28,80,C,100.5,101.5,10,100,european,",
    "wide_spread":        "ZPHX,2026-11-27,100,2027-05-28,95,P,1.00,4.00,10,100,european,",
    "stale":              "ZPHX,2026-11-27,100,2027-05-28,85,P,0.80,0.90,0,0,european,",
    "tiny_price":         "ZPHX,2026-11-27,100,2027-05-28,60,P,0.01,0.02,10,100,european,",
    "bad_optional":       "ZPHX,2026-11-27,100,2027-05-28,70,P,0.10,0.12,lots,100,european,",
}


@pytest.fixture(scope="module")
def chain(tmp_path_factory):
    path = tmp_path_factory.mktemp("reasons") / "chain.csv"
    path.write_text("\n".join([HEADER, *ROWS.values()]) + "\n")
    return load_chain(path, rate=0.05)


def _line(name: str) -> int:
    return list(ROWS).index(name) + 2  # header is line 1


def test_every_reason_is_exercised(chain):
    got = dict(zip(chain.rejected["line"], chain.rejected["reason"]))
    for reason in REASONS:
        assert got.get(_line(reason)) == reason, reason
    assert set(chain.quality.rejected) == set(REASONS)


def test_kept_rows_and_warnings(chain):
    kept = dict(zip(chain.quotes["line"], chain.quotes["warnings"]))
    for name in ("ok", "ok_symbol", "stale", "tiny_price", "bad_optional"):
        assert _line(name) in kept, name
    assert kept[_line("stale")] == "stale"
    assert kept[_line("tiny_price")] == "tiny_price"
    assert kept[_line("bad_optional")] == "bad_optional_field"
    assert kept[_line("ok")] == ""
    assert set(chain.quality.warnings) == set(WARNINGS)
    # the symbol filled expiry, strike and type of the row that gave only the symbol
    row = chain.quotes[chain.quotes["line"] == _line("ok_symbol")].iloc[0]
    assert row["strike"] == 110.0 and bool(row["is_call"])
    assert row["expiry"].date().isoformat() == "2027-05-28"


def test_counts_add_up_and_rejected_keeps_raw_fields(chain):
    q = chain.quality
    assert q.rows_in == len(ROWS)
    assert q.rows_in == q.rows_used + sum(q.rejected.values())
    assert len(chain.rejected) == sum(q.rejected.values())
    dup = chain.rejected[chain.rejected["reason"] == "duplicate"].iloc[0]
    assert dup["detail"] == f"same contract as line {_line('ok')}"
    assert str(dup["bid"]) == "7.05"  # the raw input field
    assert chain.rate_source == "caller" and chain.div_yield_source == "default"


def test_max_spread_limit_is_configurable(tmp_path):
    path = tmp_path / "c.csv"
    path.write_text("\n".join([HEADER, ROWS["wide_spread"]]) + "\n")
    # (4 - 1) / 2.5 = 120% of mid: rejected at the default limit (100%), kept at 150%
    assert load_chain(path).quality.rejected == {"wide_spread": 1}
    assert load_chain(path, max_spread=1.5).quality.rows_used == 1
    assert load_chain(path, max_spread=None).quality.rows_used == 1


# ---------------------------------------------------------------- bounds

def test_lower_bounds_match_hull_examples():
    # Hull, Options, Futures, and Other Derivatives, ch. 11 (from memory):
    # European call, S=51, K=50, T=0.5, r=12%: lower bound 51 - 50 e^{-0.06} = 3.91
    lo, hi = no_arbitrage_bounds(51.0, np.array([50.0]), np.array([0.5]), 0.12, 0.0,
                                 np.array([True]), np.array([False]))
    assert round(float(lo[0]), 2) == 3.91 and hi[0] == 51.0
    # European put, S=38, K=40, T=0.25, r=10%: lower bound 40 e^{-0.025} - 38 = 1.01
    lo, hi = no_arbitrage_bounds(38.0, np.array([40.0]), np.array([0.25]), 0.10, 0.0,
                                 np.array([False]), np.array([False]))
    assert round(float(lo[0]), 2) == 1.01
    assert math.isclose(hi[0], 40 * math.exp(-0.025))


@settings(max_examples=200, deadline=None)
@given(S=st.floats(5, 500), K=st.floats(5, 500), t=st.floats(0.01, 3.0),
       r=st.floats(-0.01, 0.10), q=st.floats(0.0, 0.06), sigma=st.floats(0.05, 1.5),
       call=st.booleans())
def test_bsm_prices_lie_within_bounds(S, K, t, r, q, sigma, call):
    # reference pricer: vollib's Black-Scholes-Merton (Haug 2007, §1.1.6)
    from vollib.black_scholes_merton import black_scholes_merton
    price = black_scholes_merton("c" if call else "p", S, K, t, r, sigma, q)
    lo, hi = no_arbitrage_bounds(S, np.array([K]), np.array([t]), r, q,
                                 np.array([call]), np.array([False]))
    assert lo[0] - 1e-9 * S <= price <= hi[0] + 1e-9 * S


def _quantlib_price(S, K, days, r, q, sigma, call, american):
    import QuantLib as ql
    today = ql.Date(27, 11, 2026)
    ql.Settings.instance().evaluationDate = today
    dc = ql.Actual365Fixed()
    payoff = ql.PlainVanillaPayoff(ql.Option.Call if call else ql.Option.Put, K)
    exercise = ql.AmericanExercise(today, today + days) if american \
        else ql.EuropeanExercise(today + days)
    option = ql.VanillaOption(payoff, exercise)
    process = ql.BlackScholesMertonProcess(
        ql.QuoteHandle(ql.SimpleQuote(S)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, q, dc)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, r, dc)),
        ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(),
                                                           sigma, dc)))
    option.setPricingEngine(ql.BinomialVanillaEngine(process, "crr", 800) if american
                            else ql.AnalyticEuropeanEngine(process))
    return option.NPV()


def test_deep_itm_european_put_below_intrinsic_is_kept(tmp_path):
    # reference pricer: QuantLib (analytic European and CRR binomial American engines)
    S, K, days, r, sigma = 50.0, 100.0, 365, 0.05, 0.20
    eu = _quantlib_price(S, K, days, r, 0.0, sigma, False, False)
    am = _quantlib_price(S, K, days, r, 0.0, sigma, False, True)
    assert eu < K - S <= am  # the European put is worth less than its intrinsic value
    rows = [f"2026-11-27,{S},2027-11-27,{K},P,{eu - 0.05:.2f},{eu + 0.05:.2f}"]
    path = tmp_path / "deep.csv"
    path.write_text("quote_date,underlying_price,expiry,strike,type,bid,ask\n" + rows[0] + "\n")
    assert load_chain(path, rate=r).quality.rows_used == 1
    # the same quote on an American put is below its (undiscounted) exercise value
    american = load_chain(path, rate=r, style="american")
    assert american.quality.rejected == {"below_intrinsic": 1}
    # and the American price from QuantLib is accepted as American
    path.write_text("quote_date,underlying_price,expiry,strike,type,bid,ask\n"
                    f"2026-11-27,{S},2027-11-27,{K},P,{am - 0.05:.2f},{am + 0.05:.2f}\n")
    assert load_chain(path, rate=r, style="american").quality.rows_used == 1


def test_dividend_yield_moves_the_call_bound(tmp_path):
    # a deep ITM European call on a dividend payer: S e^{-qt} - K e^{-rt} (Hull ch. 17)
    S, K, days, r, q, sigma = 100.0, 50.0, 730, 0.03, 0.05, 0.2
    price = _quantlib_price(S, K, days, r, q, sigma, True, False)
    path = tmp_path / "div.csv"
    path.write_text("quote_date,underlying_price,expiry,strike,type,bid,ask\n"
                    f"2026-11-27,{S},2028-11-26,{K},C,{price - 0.05:.2f},{price + 0.05:.2f}\n")
    assert load_chain(path, rate=r, div_yield=q).quality.rows_used == 1
    # ignoring the yield the same quote looks below S - K e^{-rt}: the yield matters
    assert load_chain(path, rate=r).quality.rejected == {"below_intrinsic": 1}


def test_first_of_contract_matches_pandas_grouping():
    """The first row of each contract key, NaN equal to NaN, NaT to NaT and -0.0 to
    0.0, against pandas' own grouping of the same columns
    (``DataFrame.groupby(..., dropna=False).ngroup()``, groups numbered by first
    appearance) on random keys; the factorize path (an object key) agrees too."""
    import pandas as pd

    from optbench.data.validate import first_of_contract
    rng = np.random.default_rng(20261204)
    for _ in range(300):
        n = int(rng.integers(1, 50))
        e = np.array(["2026-01-16", "2026-02-20", "NaT"],
                     dtype="datetime64[ns]")[rng.integers(0, 3, n)]
        k = np.array([0.0, -0.0, np.nan, 95.0, 100.0])[rng.integers(0, 5, n)]
        c = rng.integers(0, 2, n).astype(bool)
        m = np.array([100.0, 10.0, np.nan])[rng.integers(0, 3, n)]
        frame = pd.DataFrame({"e": e, "k": k + 0.0, "c": c, "m": m})
        group = frame.groupby(["e", "k", "c", "m"], dropna=False, sort=False).ngroup() \
            .to_numpy()
        first_row = np.array([np.flatnonzero(group == g)[0] for g in group])
        np.testing.assert_array_equal(first_of_contract(e, k, c, m), first_row)
        np.testing.assert_array_equal(first_of_contract(e, k, c, m.astype(object)),
                                      first_row)
