"""Sanity gates: inputs that disagree, degenerate histories and impossible quotes give a
clear warning or a one-line error, never a confident answer.

Each "seen" case is rebuilt from the demo scenario with one thing broken. Outside
checks: the spot implied by put-call parity is compared with the spot a chain was
priced at by vollib's Black-Scholes-Merton (put-call parity, Hull, *Options,
Futures, and Other Derivatives*, ch. 11). Tolerances (5 %, a factor of 2, 10
unchanged closes, [1 %, 300 %]) are the module's stated common-practice rules.
"""
from __future__ import annotations

import datetime as _dt
import math
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench.analysis import sanity
from optbench.analysis.compare import _atm_rules, compare
from optbench.data.history import load_history
from optbench.errors import InputError

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"
FAST = {"model": "garch", "dist": "normal", "n_paths": 200}


def _scenario(tmp_path: Path, history: pd.DataFrame | None = None,
              chain: pd.DataFrame | None = None) -> Path:
    folder = tmp_path / "ZPHX"
    shutil.copytree(DEMO, folder)
    if history is not None:
        history.to_csv(folder / "history.csv", index=False)
    if chain is not None:
        chain.to_csv(folder / "chain.csv", index=False)
    return folder


def _history() -> pd.DataFrame:
    return pd.read_csv(DEMO / "history.csv", dtype=str)


def _chain() -> pd.DataFrame:
    """The demo chain without its option symbols (so an edited strike is judged on its
    own, not as a symbol mismatch)."""
    return pd.read_csv(DEMO / "chain.csv", dtype=str).drop(columns=["symbol"])


# ------------------------------------------------------------- prices that disagree
def test_price_rule_tolerances():
    assert sanity.compare_prices(100.0, "a", 104.0, "b", source="x") is None
    text = sanity.compare_prices(100.0, "a", 110.0, "b", source="x")
    assert text and "-9.1%" in text
    with pytest.raises(InputError) as err:
        sanity.compare_prices(100.0, "a", 200.0, "b", source="--spot")
    assert "100.00" in str(err.value) and "200.00" in str(err.value)
    assert str(err.value).startswith("--spot: ")


def test_parity_spot_matches_the_spot_vollib_priced_at():
    from vollib.black_scholes_merton import black_scholes_merton
    spot, r, q = 5206.19, 0.04, 0.015
    rows = []
    for days in (30, 91):
        for k in (4800.0, 5200.0, 5600.0):
            for flag in ("c", "p"):
                price = black_scholes_merton(flag, spot, k, days / 365, r, 0.2, q)
                rows.append({"expiry": pd.Timestamp("2027-01-01") + pd.Timedelta(days=days),
                             "t": days / 365, "strike": k, "is_call": flag == "c",
                             "bid": price - 0.05, "ask": price + 0.05})
    implied = sanity.parity_spot(pd.DataFrame(rows), r, q)
    assert implied == pytest.approx(spot, rel=1e-9)   # Hull ch. 11, C - P = S e^-qt - K e^-rt


def test_spot_override_ten_times_the_file_is_an_error(tmp_path):
    with pytest.raises(InputError) as err:
        compare(DEMO, spot=52061.9, **FAST)
    msg = str(err.value)
    assert msg.startswith("--spot: ") and "52,061.90" in msg and "5,206.19" in msg


def test_spot_override_a_little_off_is_a_warning(tmp_path):
    c = compare(DEMO, spot=5206.19 * 1.08, **FAST)
    assert any("--spot" in w and "spot in the" in w for w in c.warnings)
    assert any("last close" in w for w in c.warnings)


def test_history_last_close_times_100_stops(tmp_path):
    h = _history()
    h.loc[h.index[-1], ["open", "high", "low", "close"]] = \
        (h.iloc[-1][["open", "high", "low", "close"]].astype(float) * 100).astype(str).values
    with pytest.raises(InputError) as err:
        compare(_scenario(tmp_path, h), **FAST)
    assert "history.csv" in str(err.value) and "in one day" in str(err.value)


def test_history_from_another_underlying_is_an_error(tmp_path):
    h = _history()
    for col in ("open", "high", "low", "close"):
        h[col] = (h[col].astype(float) / 10).astype(str)
    with pytest.raises(InputError) as err:
        compare(_scenario(tmp_path, h), **FAST)
    assert "factor of 10" in str(err.value) and "5,206.19" in str(err.value)


def test_history_ending_long_before_the_quotes(tmp_path):
    h = _history().iloc[:-10]           # two weeks stale: a warning
    c = compare(_scenario(tmp_path / "a", h), **FAST)
    assert any("calendar days before the quote date" in w for w in c.warnings)
    h = _history().iloc[:-40]           # two months stale: an error
    with pytest.raises(InputError, match="days before the quote date"):
        compare(_scenario(tmp_path / "b", h), **FAST)


# ----------------------------------------------------------------- degenerate histories
def test_last_300_closes_constant_stops(tmp_path):
    h = _history()
    h.loc[h.index[-300:], ["open", "high", "low", "close"]] = h.iloc[-1]["close"]
    with pytest.raises(InputError, match="stale prices"):
        compare(_scenario(tmp_path, h), **FAST)


def test_closes_of_1e308_stop(tmp_path):
    h = _history()
    h[["open", "high", "low", "close"]] = "1e308"
    with pytest.raises(InputError, match="constant"):
        compare(_scenario(tmp_path, h), **FAST)


def test_a_shorter_stale_stretch_is_a_warning(tmp_path):
    h = _history()
    h.loc[h.index[500:515], ["open", "high", "low", "close"]] = h.iloc[500]["close"]
    c = compare(_scenario(tmp_path, h), **FAST)
    assert any("15 consecutive closes unchanged" in w for w in c.warnings)


def test_too_few_returns_after_cleaning_names_the_drops(tmp_path):
    h = _history()
    h.loc[h.index[:-200], "close"] = "n/a"
    with pytest.raises(InputError) as err:
        compare(_scenario(tmp_path, h), **FAST)
    assert "usable daily returns" in str(err.value) and "bad_close" in str(err.value)


def test_implausible_forecast_gets_no_verdict():
    assert sanity.implausible_forecast(3.5) and sanity.implausible_forecast(0.005)
    assert not sanity.implausible_forecast(0.2)
    assert "outside the plausible range 1% to 300%" in sanity.forecast_flag(
        _dt.date(2027, 1, 1), 24.39)


# ---------------------------------------------------------- history issues travel
def _warnings_mention(c, *needles):
    text = " | ".join(c.warnings)
    return all(n in text for n in needles)


def test_unreadable_adjusted_close_on_two_thirds_travels_to_compare_and_hedge(tmp_path):
    from optbench.analysis.hedge import hedge
    h = _history()
    h["adj_close"] = np.where(np.arange(len(h)) % 3 == 0, h["close"], "n/a")
    c = compare(_scenario(tmp_path, h), **FAST)
    assert _warnings_mention(c, "1020 rows", "bad_close", "lines 3, 4, 6")
    est = hedge(None, comparison=c, portfolio_value=1e7, n_paths=200)
    assert any("1020 rows" in w for w in est.warnings)
    assert "1020 rows" in " ".join(c.to_dict()["warnings"])


def test_year_gap_nan_zero_negative_and_conflicting_dates_travel(tmp_path):
    h = _history()
    h = pd.concat([h.iloc[:200], h.iloc[452:]], ignore_index=True)      # a year's gap
    h.loc[100, "close"] = "nan"
    h.loc[101, "close"] = "0"
    h.loc[102, "close"] = "-5"
    dup = h.iloc[[300]].copy()
    dup["close"] = str(float(dup["close"].iloc[0]) + 1.0)
    h = pd.concat([h.iloc[:301], dup, h.iloc[301:]], ignore_index=True)
    c = compare(_scenario(tmp_path, h), **FAST)
    assert _warnings_mention(c, "bad_close", "zero_close", "negative_close",
                             "conflicting_date", "gaps longer than 7 calendar days")


# ---------------------------------------------------------------- impossible quotes
def test_strike_typed_with_extra_zeros_is_rejected_and_model_free_unmoved(tmp_path):
    base = compare(DEMO, **FAST)
    ch = _chain()
    i = ch.index[(ch["strike"] == "5200.00") & (ch["type"] == "P")][3]
    ch.loc[i, "strike"] = "5200000"
    c = compare(_scenario(tmp_path, chain=ch), **FAST)
    assert c.quality["rejected"].get("implausible_strike") == 1
    for a, b in zip(base.expiries, c.expiries):
        if a.expiry != pd.Timestamp(ch.loc[i, "expiry"]).date():
            assert b.model_free_iv == pytest.approx(a.model_free_iv, rel=1e-12)
        else:   # the row is gone; the rest of its expiry still answers near its old value
            assert abs(b.model_free_iv - a.model_free_iv) < 0.01


def test_strikes_of_1e308_are_rejected(tmp_path):
    ch = _chain()
    ch.loc[ch.index[5:15], "strike"] = "1e308"
    c = compare(_scenario(tmp_path, chain=ch), **FAST)
    assert c.quality["rejected"].get("implausible_strike") == 10
    assert all(not math.isfinite(e.model_free_iv) or e.model_free_iv < 1.0
               for e in c.expiries)


def test_one_strike_per_expiry_gives_no_atm_and_no_verdict(tmp_path):
    ch = _chain()
    k = pd.to_numeric(ch["strike"], errors="coerce")
    # per expiry keep only the lowest-strike put (far below the forward)
    puts = ch[(ch["type"] == "P") & (k < 4800)]
    one = puts.loc[puts.assign(k=k).groupby("expiry")["k"].idxmin()]
    c = compare(_scenario(tmp_path, chain=one), **FAST)
    assert c.expiries
    for e in c.expiries:
        assert math.isnan(e.atm_iv) and e.verdict == "n/a"
        assert e.smile.get("atm_source") == "unavailable"
    assert sum("ATM vol unavailable" in w for w in c.warnings) == len(c.expiries)


def test_smile_atm_outside_bid_ask_falls_back_to_quotes():
    # the example: a smile ATM of 19.29 % against ATM bid-ask 15.84-15.99 %
    k = np.array([-0.05, -0.01, 0.01, 0.05])
    mid = np.array([0.17, 0.16, 0.159, 0.155])
    atm, bid, ask, source, note = _atm_rules(_dt.date(2027, 1, 15), 0.1929, 0.1584,
                                             0.1599, k, mid, 0.1592)
    assert atm == pytest.approx(0.1592) and source == "interpolated quotes"
    assert "19.29%" in note and "15.84-15.99%" in note
    # inside: the smile stands
    atm, *_ = _atm_rules(_dt.date(2027, 1, 15), 0.159, 0.1584, 0.1599, k, mid, 0.1592)
    assert atm == 0.159


def test_demo_atm_always_within_its_bid_ask():
    c = compare(DEMO, **FAST)
    for e in c.expiries:
        if e.smile.get("atm_source") == "smile":
            assert e.atm_iv_bid - 1e-6 <= e.atm_iv <= e.atm_iv_ask + 1e-6


def test_history_loader_counts_every_row(tmp_path):
    h = _history()
    h.loc[[5, 6], "close"] = ["0", "-1"]
    h.loc[7, "date"] = "9999-01-04"
    h.loc[8, "date"] = "1500-01-04"
    path = tmp_path / "h.csv"
    h.to_csv(path, index=False)
    loaded = load_history(path)
    assert loaded.dropped == {"bad_date": 2, "zero_close": 1, "negative_close": 1}
    assert loaded.rows_in == len(loaded.dates) + 4


def test_dense_chain_whose_smile_misses_the_atm_quotes_falls_back(tmp_path):
    """A dense expiry whose vols carry a narrow bump at the money (3 vol points over
    +-1 % of the forward): five SVI parameters cannot follow it, so the fitted ATM vol
    lies below the tight ATM bid-ask vols and the interpolated quotes are used. Prices
    from vollib's Black-Scholes-Merton."""
    from vollib.black_scholes_merton import black_scholes_merton
    hist = pd.read_csv(DEMO / "history.csv")
    asof = _dt.date.fromisoformat(hist["date"].iloc[-1])
    spot, r, q, days = float(hist["close"].iloc[-1]), 0.04, 0.015, 91
    t = days / 365
    fwd = spot * math.exp((r - q) * t)
    rows = []
    for k in np.linspace(0.6, 1.4, 401) * fwd:
        x = math.log(k / fwd)
        vol = 0.16 - 0.1 * x + 0.2 * x * x + 0.03 * math.exp(-(x / 0.01) ** 2)
        for flag in ("c", "p"):
            p = black_scholes_merton(flag, spot, k, t, r, vol, q)
            if p < 0.5:
                continue
            rows.append({"underlying": "ZPHX", "quote_date": asof.isoformat(),
                         "underlying_price": spot,
                         "expiry": (asof + _dt.timedelta(days=days)).isoformat(),
                         "strike": round(k, 2), "type": flag.upper(),
                         "bid": round(p * 0.999, 4), "ask": round(p * 1.001, 4)})
    c = compare(_scenario(tmp_path, chain=pd.DataFrame(rows)), **FAST)
    (e,) = c.expiries
    assert e.smile["atm_source"] == "interpolated quotes"
    assert e.atm_iv_bid <= e.atm_iv <= e.atm_iv_ask
    assert e.atm_iv == pytest.approx(0.19, abs=0.003)     # the bump's top, from the quotes
    assert any("smile fit's ATM vol" in w for w in c.warnings)
