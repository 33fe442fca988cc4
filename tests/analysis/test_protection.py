"""The protection verdict: the 25-delta put and the floor put judged on their own
against the model-expected discounted payoff and its band.

References named beside each check: the Black-Scholes-Merton put price (Hull,
*Options, Futures, and Other Derivatives*, ch. 15; vollib's implementation, after
Haug, *The Complete Guide to Option Pricing Formulas*, p. 4) for the expected payoff
under a constant vol and the drift r - q.
"""
from __future__ import annotations

import math
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench.analysis.compare import compare
from optbench.analysis.protection import (expected_put_payoffs, protection_verdict)

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"


@pytest.fixture(scope="module")
def demo():
    return compare(DEMO, model="gjr", dist="t")


def test_expected_put_payoff_is_the_bsm_price_under_a_constant_vol():
    # constant vol, drift r - q: S_T = S exp((r - q - s^2/2) T + s sqrt(T) Z); the
    # discounted mean payoff of a put is its Black-Scholes-Merton price (Hull ch. 15),
    # computed here by vollib.black_scholes_merton
    from vollib.black_scholes_merton import black_scholes_merton
    S, r, q, T, sigma = 5000.0, 0.04, 0.015, 0.5, 0.22
    z = np.random.default_rng(1).standard_normal(400_000)
    x = (r - q - sigma ** 2 / 2) * T + sigma * math.sqrt(T) * z
    K = np.array([4300.0, 4600.0, 5000.0])
    value, se, paying = expected_put_payoffs(x, S, math.exp(-r * T), K)
    for k, v, e in zip(K, value, se):
        ref = black_scholes_merton("p", S, k, T, r, sigma, q)
        assert abs(v - ref) < 4 * e, (k, v, ref, e)
    assert np.all(paying > 0)


def test_compare_puts_under_a_constant_variance_model_match_bsm(demo):
    # a GARCH with alpha = beta = 0 is a constant daily variance s2: the 25-delta and
    # floor puts' expected payoffs are BSM prices (vollib, Hull ch. 15) at the vol
    # sqrt(h s2 / tau) with the expiry's forward and discount
    from vollib.black import black
    from optbench.data.history import load_history
    from optbench.volatility.garch import fix_garch
    s2 = 1.2e-4
    fixed = fix_garch(load_history(DEMO / "history.csv").returns,
                      {"mu": 5e-4, "omega": s2, "alpha": 0.0, "beta": 0.0},
                      model="garch", dist="normal")
    comp = compare(DEMO, fit=fixed, n_paths=50_000, seed=5,
                   expiries=[r.expiry for r in demo.expiries[3:6]])
    checked = 0
    for row in comp.expiries:
        vol = math.sqrt(row.trading_days * s2 / row.t)
        for prefix in ("put25", "floor_put"):
            k = getattr(row, f"{prefix}_strike")
            ref = black("p", row.forward, k, row.t, row.rate, vol)
            got = getattr(row, f"{prefix}_expected_payoff")
            se = getattr(row, f"{prefix}_payoff_se")
            # four Monte Carlo standard errors (law of large numbers)
            assert abs(got - ref) < 4 * se, (row.expiry, prefix, got, ref, se)
            assert getattr(row, f"{prefix}_payoff_low") <= got <= getattr(
                row, f"{prefix}_payoff_high")
            checked += 1
    assert checked == 6


def test_fields_are_consistent(demo):
    spot = demo.spot
    for row in demo.expiries:
        assert row.floor == 0.90
        table = demo.strike_frame(row.expiry)
        puts = table[~table["is_call"] & (table["ask"] > 0)]
        # the floor put is the listed put nearest 90 % of spot
        nearest = (puts["strike"] - 0.9 * spot).abs().min()
        assert abs(row.floor_put_strike - 0.9 * spot) == pytest.approx(nearest)
        # the 25-delta put is the listed put whose delta is nearest -0.25
        assert abs(row.put25_delta + 0.25) == pytest.approx((puts["delta"] + 0.25).abs().min())
        quote = puts[puts["strike"] == row.put25_strike].iloc[0]
        assert row.put25_premium == quote["ask"] and row.put25_premium_mid == quote["mid"]
        for prefix in ("put25", "floor_put"):
            verdict = getattr(row, f"{prefix}_verdict")
            if verdict == "n/a":
                continue
            assert verdict == protection_verdict(getattr(row, f"{prefix}_premium"),
                                                 getattr(row, f"{prefix}_payoff_low"),
                                                 getattr(row, f"{prefix}_payoff_high"))
    d = demo.to_dict()
    assert d["drift"]["rule"] == "risk-free" and d["drift"]["annual"] == pytest.approx(
        demo.rate - demo.div_yield)
    assert "put25_verdict" in d["expiries"][0] and "floor" in d
    assert "protection" in d["protection_rule"]


def test_too_few_paying_paths_give_no_verdict_and_say_so(demo):
    # the week's floor put lies far below spot: almost no simulated path reaches it
    row = demo.expiries[0]
    if row.floor_put_verdict == "n/a":
        assert any("protection verdict n/a" in w and row.expiry.isoformat() in w
                   for w in demo.warnings)


def _raise_otm_put_vols(folder: Path, below: float, points: float) -> None:
    """The demo chain with every put struck below ``below`` x spot repriced at its
    implied vol plus ``points`` vol points (bid and ask moved by the same amount)."""
    from optbench.pricing.bsm import bsm_price
    from optbench.pricing.implied import implied_vol
    shutil.copytree(DEMO, folder)
    raw = pd.read_csv(DEMO / "chain.csv", dtype=str, keep_default_na=False)
    num = raw[["bid", "ask", "strike", "underlying_price"]].apply(pd.to_numeric, errors="coerce")
    t = (pd.to_datetime(raw["expiry"], errors="coerce")
         - pd.to_datetime(raw["quote_date"], errors="coerce")).dt.days / 365
    S = num["underlying_price"]
    pick = ((raw["type"] == "P") & (num["strike"] < below * S) & (t > 0)
            & (num["bid"] > 0) & (num["ask"] > num["bid"])).to_numpy()
    mid = ((num["bid"] + num["ask"]) / 2)[pick].to_numpy()
    K, tt, s = num["strike"][pick].to_numpy(), t[pick].to_numpy(), S[pick].to_numpy()
    iv = implied_vol(mid, s, K, tt, 0.04, 0.015, False)
    new_mid = bsm_price(s, K, tt, 0.04, 0.015, iv + points / 100, False)
    shift = np.where(np.isfinite(new_mid), new_mid - mid, 0.0)
    for col in ("bid", "ask"):
        vals = num[col].to_numpy().copy()
        vals[pick] = vals[pick] + shift
        raw.loc[pick, col] = [f"{v:.2f}" for v in vals[pick]]
    raw.to_csv(folder / "chain.csv", index=False)


def test_expensive_protection_where_atm_is_fair(tmp_path, demo):
    # the demo's one- and two-year expiries are fair at the money and their puts fair;
    # with the out-of-the-money put vols raised by 8 points the ATM verdict stays fair
    # while both puts become expensive protection
    folder = tmp_path / "ZPHX"
    _raise_otm_put_vols(folder, below=0.93, points=8.0)
    raised = compare(folder, model="gjr", dist="t")
    before = {r.expiry: r for r in demo.expiries}
    seen = 0
    for row in raised.expiries:
        if row.calendar_days < 300:
            continue
        old = before[row.expiry]
        assert old.verdict == "fair" and old.put25_verdict != "rich"
        assert row.verdict == "fair"
        # the smile fit moves the ATM vol a little with its wing, inside the band
        assert row.atm_iv == pytest.approx(old.atm_iv, abs=0.03)
        assert row.put25_verdict == "rich" and row.floor_put_verdict == "rich"
        assert row.put25_premium > row.put25_payoff_high
        seen += 1
    assert seen == 2


def test_the_floor_is_the_users(demo):
    comp = compare(DEMO, model="gjr", dist="t", floor=0.8, expiries=[demo.expiries[5].expiry])
    row = comp.expiries[0]
    assert row.floor == 0.8
    assert row.floor_put_strike < demo.expiries[5].floor_put_strike
    from optbench.errors import InputError
    with pytest.raises(InputError, match="--floor"):
        compare(DEMO, floor=1.4)


@pytest.mark.parametrize("lead", [(), (3,)])
@pytest.mark.parametrize("n_strikes", [0, 1, 2, 5])
@pytest.mark.parametrize("n_paths", [1, 2, 150, 2000, 20_000])
def test_expected_put_payoffs_equal_numpy_mean_and_std_bit_for_bit(lead, n_strikes, n_paths):
    # reference: numpy.mean and numpy.std(ddof=1) over the paths axis of the
    # (..., paths, strikes) payoff array (the straightforward formulas); the fast path
    # keeps the paths contiguous and must give the same bits
    rng = np.random.default_rng(n_paths + 7 * n_strikes)
    x = rng.normal(0.0, 0.25, lead + (n_paths,))
    K = rng.uniform(70.0, 110.0, n_strikes)
    pay = np.maximum(K - 100.0 * np.exp(x)[..., None], 0.0)
    ref_mean = 0.97 * pay.mean(axis=-2)
    with np.errstate(invalid="ignore", divide="ignore"):
        ref_se = (0.97 * (pay.std(axis=-2, ddof=1) / math.sqrt(n_paths)) if n_paths > 1
                  else np.full(ref_mean.shape, np.nan))
    value, se, paying = expected_put_payoffs(x, 100.0, 0.97, K)
    assert value.shape == se.shape == paying.shape == ref_mean.shape
    assert np.array_equal(value, ref_mean)
    assert np.array_equal(se, ref_se, equal_nan=True)
    assert np.array_equal(paying, (pay > 0).sum(axis=-2))


def test_judge_puts_reads_a_frame_or_its_columns_alike(demo):
    # the comparison hands the judging the sorted columns of each expiry; a user's
    # per-strike frame gives the same judgements
    from optbench.analysis.drift import choose_drift, simulate_terminal
    from optbench.analysis.protection import choose_puts, judge_puts
    row = demo.expiries[2]
    table = demo.strike_frame(row.expiry)
    draws = simulate_terminal(demo.fit, choose_drift("risk-free", rate=demo.rate,
                                                     div_yield=demo.div_yield),
                              np.array([row.trading_days]), np.array([row.t]),
                              np.array([row.rate]), np.array([row.carry]),
                              n_paths=3000, seed=11)
    columns = {name: table[name].to_numpy() for name in table.columns}
    picks = choose_puts(table, demo.spot, 0.9)
    assert picks == choose_puts(columns, demo.spot, 0.9) and min(picks) >= 0
    kw = dict(spot=demo.spot, discount=row.discount, forecast_vol=row.forecast_vol,
              forecast_low=row.forecast_low, forecast_high=row.forecast_high,
              band_high_level=0.95)
    assert judge_puts(table, picks, draws, 0, **kw) == judge_puts(columns, picks, draws, 0,
                                                                   **kw)
