"""Greeks of each hedge leg against QuantLib's AnalyticEuropeanEngine, in money."""
from __future__ import annotations

import pytest

from optbench.analysis.hedge import hedge_from_comparison
from optbench.analysis.portfolio.greeks import hedge_greeks
from optbench.analysis.results import HedgeRequest


def _quantlib_greeks(est, leg):
    import QuantLib as ql
    today = ql.Date(est.asof.day, est.asof.month, est.asof.year)
    ql.Settings.instance().evaluationDate = today
    dc = ql.Actual365Fixed()
    maturity = today + est.calendar_days
    spot = ql.SimpleQuote(est.spot)
    process = ql.BlackScholesMertonProcess(
        ql.QuoteHandle(spot),
        ql.YieldTermStructureHandle(ql.FlatForward(today, est.div_yield, dc, ql.Continuous)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, est.rate, dc, ql.Continuous)),
        ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(),
                                                           leg.iv_mid, dc)))
    kind = ql.Option.Call if leg.type == "C" else ql.Option.Put
    opt = ql.VanillaOption(ql.PlainVanillaPayoff(kind, leg.strike), ql.EuropeanExercise(maturity))
    opt.setPricingEngine(ql.AnalyticEuropeanEngine(process))
    return opt.delta(), opt.gamma(), opt.vega(), opt.thetaPerDay()


@pytest.mark.parametrize("structure", ["put", "put_spread", "collar"])
def test_leg_greeks_match_quantlib(comparison, structure):
    est = hedge_from_comparison(comparison, HedgeRequest(25e6, beta=1.3, floor=0.9, days=180,
                                                         structure=structure), n_paths=500)
    g = hedge_greeks(est)
    for i, leg in enumerate(est.legs):
        d, gm, v, th = _quantlib_greeks(est, leg)   # reference: QuantLib AnalyticEuropeanEngine
        units = leg.quantity * est.multiplier
        row = g.iloc[i]
        assert row["delta_units"] == pytest.approx(units * d, rel=1e-9)
        assert row["delta_money"] == pytest.approx(units * d * est.spot, rel=1e-9)
        assert row["gamma_units"] == pytest.approx(units * gm, rel=1e-9)
        assert row["vega_per_vol_point"] == pytest.approx(units * v / 100, rel=1e-9)
        # QuantLib's thetaPerDay divides the annual theta by 365 (Actual/365 Fixed)
        assert row["theta_per_day"] == pytest.approx(units * th, rel=1e-6)
    net = g[g["position"] == "net hedge"].iloc[0]
    assert net["delta_units"] == pytest.approx(g.iloc[:len(est.legs)]["delta_units"].sum())
    port = g[g["position"] == "portfolio"].iloc[0]
    assert port["delta_money"] == pytest.approx(1.3 * 25e6)
