"""The comparison against outside references.

- A chain priced at one flat vol by vollib (Black-Scholes-Merton with a dividend
  yield) must come back at that vol on every expiry and strike.
- The forecasts must equal what the arch package gives for the reported parameters
  held fixed (arch's ``fix`` with the same backcast convention).
- The verdicts must follow the stated rule, and the variance premium its definition.
"""
from __future__ import annotations

import datetime as _dt
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench.analysis.compare import compare

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"

FLAT_VOL = 0.25
SPOT, RATE, DIV = 100.0, 0.03, 0.01


@pytest.fixture(scope="module")
def demo():
    return compare(DEMO, model="gjr", dist="t")


def _scaled_to(history: pd.DataFrame, spot: float) -> pd.DataFrame:
    """The demo history's prices scaled to end at ``spot`` (same returns), so the
    chain's spot and the history's last close agree as the sanity gates require."""
    out = history.copy()
    factor = spot / float(out["close"].iloc[-1])
    for col in ("open", "high", "low", "close"):
        if col in out.columns:
            out[col] = out[col] * factor
    return out


@pytest.fixture(scope="module")
def flat_chain(tmp_path_factory):
    """A chain priced by vollib at 25 % on four expiries, with the demo history."""
    from vollib.black_scholes_merton import black_scholes_merton

    history = pd.read_csv(DEMO / "history.csv")
    asof = _dt.date.fromisoformat(history["date"].iloc[-1])
    rows = []
    for days in (30, 91, 182, 365):
        expiry = asof + _dt.timedelta(days=days)
        t = days / 365
        for strike in np.arange(60.0, 145.0, 2.5):
            for flag in ("c", "p"):
                price = black_scholes_merton(flag, SPOT, strike, t, RATE, FLAT_VOL, DIV)
                if price < 0.05:
                    continue
                half = max(0.01, 0.005 * price)
                rows.append({"underlying": "TEST", "quote_date": asof.isoformat(),
                             "underlying_price": SPOT, "expiry": expiry.isoformat(),
                             "strike": strike, "type": flag.upper(),
                             "bid": price - half, "ask": price + half})
    folder = tmp_path_factory.mktemp("flat")
    pd.DataFrame(rows).to_csv(folder / "chain.csv", index=False, float_format="%.12g")
    _scaled_to(history, SPOT).to_csv(folder / "history.csv", index=False)
    return folder


@pytest.fixture(scope="module")
def flat(flat_chain):
    return compare(flat_chain / "chain.csv", flat_chain / "history.csv", rate=RATE,
                   div_yield=DIV, model="garch", dist="normal", n_paths=500)


def test_flat_vollib_chain_comes_back_at_its_vol_on_every_expiry(flat):
    # reference: vollib.black_scholes_merton priced every quote at 25 %
    assert len(flat.expiries) == 4
    for row in flat.expiries:
        assert row.atm_iv == pytest.approx(FLAT_VOL, abs=1e-6)
        assert row.iv_25d_put == pytest.approx(FLAT_VOL, abs=1e-6)
        assert row.iv_25d_call == pytest.approx(FLAT_VOL, abs=1e-6)
        assert row.iv_90 == pytest.approx(FLAT_VOL, abs=1e-6)
        assert row.iv_95 == pytest.approx(FLAT_VOL, abs=1e-6)
        assert abs(row.rr_25d) < 1e-6
        # ATM bid/ask vols straddle the mid
        assert row.atm_iv_bid < row.atm_iv < row.atm_iv_ask
        # forward by parity = S e^{(r-q)t} of the pricing inputs (Hull ch. 11)
        assert row.forward == pytest.approx(SPOT * math.exp((RATE - DIV) * row.t), rel=1e-6)
        # model-free variance of a flat-vol strip is the flat variance, less the
        # strip's discretisation and truncation (Demeterfi et al. 1999): within 1 vol pt
        assert row.model_free_iv == pytest.approx(FLAT_VOL, abs=0.01)


def test_flat_vollib_chain_every_strike_mid_vol(flat):
    strikes = flat.strike_frame()
    # out-of-the-money quotes (the ones the smile uses) come back at 25 % to 1e-7;
    # deep in-the-money quotes carry the parity forward's rounding in their tiny time
    # value, so they are held to quotes with a vega of at least 1 cent per vol point
    otm = np.where(strikes["is_call"], strikes["moneyness"] >= 1, strikes["moneyness"] <= 1)
    assert np.allclose(strikes.loc[otm, "iv_mid"], FLAT_VOL, atol=1e-7)
    itm = ~otm & (strikes["vega_per_vol_point"] > 0.01)
    assert itm.sum() > 10
    assert np.allclose(strikes.loc[itm, "iv_mid"], FLAT_VOL, atol=1e-4)
    # a bid below intrinsic (deep in the money) has no vol; every other bid vol lies
    # below the mid vol and every ask vol above it
    has_bid = np.isfinite(strikes["iv_bid"])
    assert has_bid[otm].all()
    fits = otm | itm
    sel = has_bid & fits
    assert (strikes.loc[sel, "iv_bid"] < strikes.loc[sel, "iv_mid"]).all()
    assert (strikes.loc[fits, "iv_ask"] > strikes.loc[fits, "iv_mid"]).all()


def test_price_at_forecast_matches_vollib(flat):
    # reference: vollib.black_scholes_merton at each expiry's forecast vol
    from vollib.black_scholes_merton import black_scholes_merton
    frame = flat.strike_frame().iloc[::17]
    for rec in frame.itertuples():
        t = (rec.expiry.date() - flat.asof).days / 365
        ref = black_scholes_merton("c" if rec.is_call else "p", SPOT, rec.strike, t, RATE,
                                   rec.forecast_vol, DIV)
        assert rec.price_at_forecast == pytest.approx(ref, rel=1e-6, abs=1e-9)
        assert rec.edge_per_contract == pytest.approx((rec.mid - ref) * 100, rel=1e-5,
                                                      abs=1e-6)


def _arch_forecast(comparison, returns, vol_kind):
    """Annualised average forecast vol to each expiry from arch with fixed parameters."""
    from arch import arch_model
    p = comparison.model.params
    scale = 100.0                        # arch works in percent returns
    if vol_kind == "gjr":
        am = arch_model(returns * scale, mean="Constant", vol="GARCH", p=1, o=1, q=1,
                        dist="t")
        fixed = [p["mu"] * scale, p["omega"] * scale ** 2, p["alpha"], p["gamma"],
                 p["beta"], p["nu"]]
    else:
        am = arch_model(returns * scale, mean="Constant", vol="GARCH", p=1, q=1,
                        dist="normal")
        fixed = [p["mu"] * scale, p["omega"] * scale ** 2, p["alpha"], p["beta"]]
    res = am.fix(fixed)
    h = max(r.trading_days for r in comparison.expiries)
    var = res.forecast(horizon=h, reindex=False).variance.to_numpy()[-1] / scale ** 2
    return np.array([math.sqrt(252 * var[:r.trading_days].mean())
                     for r in comparison.expiries]), res


def test_forecasts_equal_arch_with_parameters_held(demo):
    # reference: arch (Sheppard), arch_model(...).fix(params).forecast(horizon)
    from optbench.data.history import load_history
    returns = load_history(DEMO / "history.csv").returns
    ref, res = _arch_forecast(demo, returns, "gjr")
    ours = np.array([r.forecast_vol for r in demo.expiries])
    np.testing.assert_allclose(ours, ref, rtol=1e-6)
    # the in-sample conditional vol the figures use is arch's too
    np.testing.assert_allclose(demo.history["sigma"].to_numpy(),
                               res.conditional_volatility / 100.0, rtol=1e-6)
    # and the log-likelihood of the decimal returns: arch's on percent returns plus
    # the Jacobian n*ln(100)
    assert demo.model.loglik == pytest.approx(res.loglikelihood + len(returns) * math.log(100),
                                              rel=1e-8)


def test_verdicts_follow_the_stated_rule(demo):
    assert "rich" in demo.verdict_rule and "cheap" in demo.verdict_rule
    seen = set()
    for row in demo.expiries:
        assert row.forecast_low <= row.forecast_vol <= row.forecast_high
        want = ("rich" if row.atm_iv > row.forecast_high else
                "cheap" if row.atm_iv < row.forecast_low else "fair")
        assert row.verdict == want
        seen.add(row.verdict)
        # Bollerslev, Tauchen & Zhou (2009): VRP = implied variance - expected variance
        assert row.variance_premium == pytest.approx(row.atm_iv ** 2 - row.forecast_vol ** 2)
        assert row.iv_minus_forecast == pytest.approx(row.atm_iv - row.forecast_vol)
        assert 0.0 <= row.prob_realized_above_iv <= 1.0
        assert 0.0 <= row.cone_percentile <= 1.0
    # the demo is built so that implied sits above the forecast mostly and below once
    assert "rich" in seen and "cheap" in seen


def test_probability_realized_above_implied_falls_with_implied(demo):
    # a higher implied vol must be exceeded less often by the same simulated paths
    from optbench.volatility.simulate import simulate_paths
    fit = demo.fit
    row = demo.expiries[3]
    sim = simulate_paths(fit.model, fit.params, fit.dist, fit.last_variance,
                         row.trading_days, demo.n_paths, demo.seed,
                         drift=demo.drift.annual / 252)
    rv = sim.realized_vol()
    assert np.mean(rv > row.atm_iv) == pytest.approx(row.prob_realized_above_iv, abs=0.03)
    assert np.mean(rv > row.atm_iv + 0.05) < row.prob_realized_above_iv


def test_realized_vol_is_close_to_close_over_the_horizon(demo):
    # close-to-close realized vol, sample standard deviation annualised with 252
    # (common practice), recomputed by hand from the history file
    close = pd.read_csv(DEMO / "history.csv")["close"].to_numpy(float)
    r = np.diff(np.log(close))
    row = demo.expiries[4]
    w = max(row.trading_days, 5)
    assert row.realized_vol == pytest.approx(np.std(r[-w:], ddof=1) * math.sqrt(252), rel=1e-9)


def test_quality_and_strike_tables_cover_every_used_quote(demo):
    q = demo.quality
    assert q["rows_in"] == q["rows_used"] + sum(q["rejected"].values())
    assert sum(r.n_quotes for r in demo.expiries) == len(demo.strike_frame())
    assert len(demo.strike_frame()) <= q["rows_used"]


def test_expiry_not_in_chain_is_one_line_error(demo):
    from optbench.errors import InputError
    with pytest.raises(InputError) as info:
        demo.strike_frame("2031-01-17")
    assert "not an expiry" in str(info.value) and "\n" not in str(info.value)


@pytest.fixture(scope="module")
def american_chain(tmp_path_factory):
    """American puts and calls priced by QuantLib (finite differences) at 30 %."""
    import QuantLib as ql
    history = pd.read_csv(DEMO / "history.csv")
    asof = _dt.date.fromisoformat(history["date"].iloc[-1])
    today = ql.Date(asof.day, asof.month, asof.year)
    ql.Settings.instance().evaluationDate = today
    spot, rate, div, vol = 100.0, 0.05, 0.02, 0.30
    dc = ql.Actual365Fixed()
    process = ql.BlackScholesMertonProcess(
        ql.QuoteHandle(ql.SimpleQuote(spot)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, div, dc, ql.Continuous)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, rate, dc, ql.Continuous)),
        ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(), vol, dc)))
    engine = ql.FdBlackScholesVanillaEngine(process, 400, 400)
    rows = []
    for days in (61, 182):
        expiry = asof + _dt.timedelta(days=days)
        ex = ql.AmericanExercise(today, today + days)
        for strike in np.arange(80.0, 122.5, 5.0):
            for kind, flag in ((ql.Option.Call, "C"), (ql.Option.Put, "P")):
                opt = ql.VanillaOption(ql.PlainVanillaPayoff(kind, float(strike)), ex)
                opt.setPricingEngine(engine)
                p = opt.NPV()
                rows.append({"underlying": "TESTA", "quote_date": asof.isoformat(),
                             "underlying_price": spot, "expiry": expiry.isoformat(),
                             "strike": strike, "type": flag, "bid": p - 0.01,
                             "ask": p + 0.01, "style": "american"})
    folder = tmp_path_factory.mktemp("american")
    pd.DataFrame(rows).to_csv(folder / "chain.csv", index=False, float_format="%.12g")
    _scaled_to(history, spot).to_csv(folder / "history.csv", index=False)

    def price(strike, days, is_call, sigma):
        proc = ql.BlackScholesMertonProcess(
            ql.QuoteHandle(ql.SimpleQuote(spot)),
            ql.YieldTermStructureHandle(ql.FlatForward(today, div, dc, ql.Continuous)),
            ql.YieldTermStructureHandle(ql.FlatForward(today, rate, dc, ql.Continuous)),
            ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(),
                                                               sigma, dc)))
        kind = ql.Option.Call if is_call else ql.Option.Put
        opt = ql.VanillaOption(ql.PlainVanillaPayoff(kind, float(strike)),
                               ql.AmericanExercise(today, today + days))
        opt.setPricingEngine(ql.FdBlackScholesVanillaEngine(proc, 400, 400))
        return opt.NPV()

    return folder, rate, div, vol, price


def test_american_chain_uses_american_implied_vols(american_chain):
    # reference: QuantLib FdBlackScholesVanillaEngine, American exercise, flat 30 %
    folder, rate, div, vol, price = american_chain
    c = compare(folder, rate=rate, div_yield=div, model="garch", dist="normal", n_paths=200)
    assert c.style == "american"
    otm = c.strike_frame()
    otm = otm[np.where(otm["is_call"], otm["moneyness"] >= 1, otm["moneyness"] <= 1)]
    # tree-based inversion: accurate to about 1e-3 of vol (see the pricing notes)
    np.testing.assert_allclose(otm["iv_mid"], vol, atol=2e-3)
    for row in c.expiries:
        assert row.style == "american"
        assert row.atm_iv == pytest.approx(vol, abs=2e-3)
    # the value at the forecast vol is the American value (QuantLib at that vol)
    for rec in otm[otm["strike"].isin([85.0, 115.0])].itertuples():
        days = (rec.expiry.date() - c.asof).days
        ref = price(rec.strike, days, rec.is_call, rec.forecast_vol)
        assert rec.price_at_forecast == pytest.approx(ref, rel=2e-3, abs=2e-3)


def test_history_after_the_quote_date_is_not_used(tmp_path, demo):
    # no look-ahead: closes after the quote date must not move the forecast
    import shutil
    for name in ("chain.csv", "meta.toml"):
        shutil.copy(DEMO / name, tmp_path / name)
    text = (DEMO / "history.csv").read_text().rstrip("\n")
    text += "\n2026-11-30,5210,5230,5190,5600.5\n2026-12-01,5600,5640,5500,5230.1\n"
    (tmp_path / "history.csv").write_text(text)
    late = compare(tmp_path, model="gjr", dist="t")
    assert any("after the quote date" in w for w in late.warnings)
    assert [r.forecast_vol for r in late.expiries] == [r.forecast_vol for r in demo.expiries]


def test_expiry_positions_match_pandas_get_indexer():
    # reference: pandas.Index.get_indexer on distinct listed expiries (-1 where absent)
    import pandas as pd
    from optbench.analysis.compare import _expiry_positions
    rng = np.random.default_rng(3)
    listed = (np.datetime64("2026-12-01", "ns")
              + rng.permutation(40)[:12].astype("timedelta64[D]"))
    values = np.datetime64("2026-12-01", "ns") + rng.integers(0, 40, 500).astype(
        "timedelta64[D]")
    want = pd.Index(listed).get_indexer(values)
    assert np.array_equal(_expiry_positions(listed, values), want)
    assert (want == -1).any() and (want >= 0).any()
    assert np.array_equal(_expiry_positions(listed[:0], values), np.full(500, -1))
