"""The walk-forward replay: each day's forecast uses only what was known that day,
held parameters are filtered like a fixed-parameter model, realized vol is the
plain sum of the following squared returns, and with an implied vol equal to the
true expected vol the verdict shows no skill and the regression no bias."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from optbench.data.history import load_history
from optbench.track.build import tenor_record
from optbench.track.walkforward import overlap_lags, walk_forward
from optbench.volatility.garch import fit_garch, fix_garch

DEMO = "chains/ZPHX/history.csv"


def _obs(dates, tenors, iv=0.2):
    d = np.repeat(dates, len(tenors))
    t = np.tile(tenors, len(dates))
    return pd.DataFrame({"date": d.astype("datetime64[ns]"), "tenor_days": t,
                         "expiry": (d + t.astype("timedelta64[D]")).astype("datetime64[ns]"),
                         "atm_iv": iv, "iv_25d_put": np.nan, "iv_25d_call": np.nan,
                         "tenor_given": True, "line": np.arange(d.size) + 2})


@pytest.fixture(scope="module")
def demo():
    from pathlib import Path
    return load_history(Path(__file__).resolve().parents[2] / DEMO)


@pytest.fixture(scope="module")
def replay(demo):
    dates = demo.dates[1000:1040]
    return walk_forward(demo.returns, demo.dates, _obs(dates, [30, 91]), refit_every=21,
                        model="gjr", dist="t", n_paths=400, seed=3)


def test_forecasts_use_only_returns_up_to_the_day(demo, replay):
    """At a refit the forecast and band are the fit's own (fit_garch on returns up to
    that day); between refits they equal a fixed-parameter model (fix_garch) on the
    returns up to that day, i.e. parameters held and the variance filtered forward."""
    o = replay.observations
    first = replay.refits.iloc[0]
    assert first["n_returns"] == 1000 and len(replay.refits) == 2
    i0 = 1000
    fit = fit_garch(demo.returns[:i0], model="gjr", dist="t")
    row = o[(o["date"] == pd.Timestamp(demo.dates[i0])) & (o["tenor_days"] == 30)].iloc[0]
    assert row["forecast_vol"] == pytest.approx(fit.forecast_vol(int(row["trading_days"])),
                                                rel=1e-12)
    lo, hi = fit.forecast_band(int(row["trading_days"]), level=(0.05, 0.95))
    assert (row["forecast_low"], row["forecast_high"]) == pytest.approx((lo, hi), rel=1e-12)
    j = i0 + 13
    held = fix_garch(demo.returns[:j], fit.params, model="gjr", dist="t")
    for tenor in (30, 91):
        r = o[(o["date"] == pd.Timestamp(demo.dates[j])) & (o["tenor_days"] == tenor)].iloc[0]
        assert r["refit_date"] == pd.Timestamp(demo.dates[i0])
        assert r["forecast_vol"] == pytest.approx(held.forecast_vol(int(r["trading_days"])),
                                                  rel=1e-9)


def test_realized_vol_is_the_sum_of_the_following_squared_returns(demo, replay):
    o = replay.observations
    for _, r in o.iloc[[0, 17, 55]].iterrows():
        after = (demo.dates > np.datetime64(r["date"].date())) & \
                (demo.dates <= np.datetime64(r["expiry"].date()))
        ret = demo.returns[after[1:]]
        assert r["realized_days"] == ret.size
        assert r["realized_vol"] == pytest.approx(np.sqrt(252 / ret.size * np.sum(ret ** 2)),
                                                  rel=1e-12)
    assert o["checked"].all()


def test_days_the_history_cannot_check_or_fit_are_said(demo):
    late = demo.dates[-5:]
    early = demo.dates[10:12]
    off = np.array(["1990-01-02"], dtype="datetime64[D]")
    wf = walk_forward(demo.returns, demo.dates,
                      _obs(np.concatenate([early, off, late]), [30]), refit_every=21,
                      n_paths=200)
    assert sorted(wf.rejected["reason"]) == ["not_a_history_date", "too_early", "too_early"]
    assert not wf.observations["checked"].any()
    assert wf.observations["realized_vol"].isna().all()


def test_overlap_lags_of_daily_observations():
    d = np.busday_offset(np.datetime64("2025-01-06"), np.arange(100)).astype("datetime64[D]")
    e = np.busday_offset(d, 21)            # a 21-trading-day window
    assert overlap_lags(d, e) == 20


def _simulate_garch(seed: int, n: int, omega: float, alpha: float, beta: float):
    """GARCH(1,1) with normal innovations, simulated by its definition (Bollerslev
    1986), with its true conditional variance."""
    rng = np.random.default_rng(seed)
    z = rng.standard_normal(n)
    v = np.empty(n + 1)
    r = np.empty(n)
    v[0] = omega / (1 - alpha - beta)
    for t in range(n):
        r[t] = np.sqrt(v[t]) * z[t]
        v[t + 1] = omega + alpha * r[t] ** 2 + beta * v[t]
    return r, v


@pytest.mark.slow
def test_no_premium_means_no_skill_and_no_bias():
    """Implied vol set to the true conditional expected vol (no premium) on a long
    simulated GARCH series: the verdict has no skill, so realized ends below implied
    on 'rich' days and above on 'cheap' days about half the time, and the
    Mincer-Zarnowitz slope of realized on implied variance is one within its
    Newey-West standard error (Mincer & Zarnowitz 1969: an unbiased forecast has
    slope one). Tolerances: realized vol is right-skewed, so P(realized < expected)
    is a little above one half; we allow 0.15 around one half for each hit rate,
    0.08 for their average (the no-skill identity) and two standard errors for the
    slope (overlapping windows leave about n / h independent observations)."""
    omega, alpha, beta, tenor = 1e-6, 0.04, 0.95, 91
    n = 6000
    r, v = _simulate_garch(1, n, omega, alpha, beta)
    dates = np.busday_offset(np.datetime64("2000-01-03"), np.arange(n + 1)).astype("datetime64[D]")
    idx = np.arange(1000, n - 2 * tenor)
    d = dates[idx]
    exp = d + tenor
    h = np.busday_count(d + 1, exp + 1)
    p = alpha + beta
    vl = omega / (1 - p)
    true_vol = np.sqrt(252 * (vl + (v[idx] - vl) * (1 - p ** h) / ((1 - p) * h)))
    obs = _obs(d, [tenor])
    obs["atm_iv"] = true_vol
    # a narrow band (40 %-60 %) so that rich and cheap are said on many days
    wf = walk_forward(r, dates, obs, refit_every=126, model="garch", dist="normal",
                      band=(0.4, 0.6), n_paths=500, seed=5)
    rec = tenor_record(wf.observations, tenor)
    assert rec.counts["rich"] > 300 and rec.counts["cheap"] > 300
    assert abs(rec.hit_rate_rich - 0.5) < 0.15 and abs(rec.hit_rate_cheap - 0.5) < 0.15
    assert abs((rec.hit_rate_rich + rec.hit_rate_cheap) / 2 - 0.5) < 0.08
    b = rec.mz_implied["coef"]["implied_var"]
    se = rec.mz_implied["std_error"]["implied_var"]
    assert abs(b - 1) < 2 * se, (b, se)
    assert rec.lags == 63 or rec.lags == 64
    # calibration: the Brier score is no worse than always saying the base rate + 0.02
    assert rec.brier < rec.brier_base_rate + 0.02
