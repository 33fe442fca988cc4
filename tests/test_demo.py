"""The bundled demo scenario (chains/ZPHX) and ``optbench demo``.

The committed files must be exactly what the generator writes; the chain must load
with only the deliberate bad rows rejected; the history must show calm and
turbulent spells; the quotes must be Black-Scholes-Merton prices of the intended
smile (checked with vollib); and the ATM implied vols must sit above the GJR-t
forecast fitted on the history on most expiries and below it on at least one.
"""
from __future__ import annotations

import datetime as dt
import re
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench import demo

ROOT = Path(__file__).resolve().parents[1]
FOLDER = ROOT / "chains" / "ZPHX"

# what optbench.data's validation calls each deliberate bad row (DEVELOPERS.md:
# rejected rows carry a reason code)
EXPECTED_REASON = {"expired": "expired", "crossed": "crossed", "zero_bid": "no_bid",
                   "below_intrinsic": "below_intrinsic", "duplicate": "duplicate",
                   "unparseable": "bad_number"}


@pytest.fixture(scope="module")
def scenario():
    return demo.generate()


@pytest.fixture(scope="module")
def meta():
    return tomllib.loads((FOLDER / "meta.toml").read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def chain(meta):
    from optbench import load_chain
    return load_chain(FOLDER / "chain.csv", rate=meta["rate"], div_yield=meta["div_yield"])


@pytest.fixture(scope="module")
def history():
    from optbench import load_history
    return load_history(FOLDER / "history.csv")


@pytest.fixture(scope="module")
def arch_fit(history):
    """GJR-GARCH(1,1) with Student-t errors fitted by the reference library arch
    (Sheppard) on the committed history, in percent returns."""
    import arch
    return arch.arch_model(history.returns * 100, mean="Constant", vol="GARCH", p=1,
                           o=1, q=1, dist="t").fit(disp="off")


# ----------------------------------------------------------------- reproducibility
def test_committed_files_are_what_the_generator_writes(tmp_path):
    written = demo.write_scenario(tmp_path)
    assert set(written) == {"chain.csv", "history.csv", "meta.toml"}
    for name in written:
        assert (tmp_path / name).read_bytes() == (FOLDER / name).read_bytes(), (
            f"chains/ZPHX/{name} is out of date: run `optbench demo`")


def test_another_seed_gives_another_scenario():
    a = demo.render_files(demo.generate(demo.SEED + 1))
    b = demo.render_files(demo.generate(demo.SEED + 1))
    assert a == b                                  # same seed, same bytes
    assert a["history.csv"] != (FOLDER / "history.csv").read_bytes()


def test_cli_writes_the_folder_and_reports_it(tmp_path, capsys):
    from optbench.cli import main
    assert main(["demo", "--out", str(tmp_path / "zphx")]) == 0
    out = capsys.readouterr().out
    for name in ("chain.csv", "history.csv", "meta.toml"):
        assert (tmp_path / "zphx" / name).read_bytes() == (FOLDER / name).read_bytes()
        assert name in out


def test_cli_json_names_the_files_and_their_rows(tmp_path, capsys):
    import json
    from optbench.cli import main
    assert main(["demo", "--out", str(tmp_path), "--format", "json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["code"] == "ZPHX" and out["invented"] is True and out["seed"] == demo.SEED
    rows = {f["name"]: f.get("rows") for f in out["files"]}
    assert rows["history.csv"] == (FOLDER / "history.csv").read_text().count("\n") - 1
    assert rows["chain.csv"] == (FOLDER / "chain.csv").read_text().count("\n") - 1


def test_cli_rejects_a_bad_seed_in_one_line(capsys):
    from optbench.cli import main
    with pytest.raises(SystemExit) as exc:
        main(["demo", "--seed", "-3", "--out", "unused"])
    assert exc.value.code == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "--seed" in err


def test_cli_writes_to_the_user_data_folder_outside_a_checkout(monkeypatch, tmp_path, capsys):
    """An installed copy has no chains/ZPHX to regenerate: without --out, `optbench
    demo` writes into the user's data folder (platformdirs) and says where."""
    from optbench.cli import main
    from optbench.commands import demo as demo_command
    from optbench.data import scenario
    assert demo_command.checkout_folder() == FOLDER      # running from this checkout
    monkeypatch.setattr(demo_command, "checkout_folder", lambda: None)
    monkeypatch.setattr(scenario, "user_data_folder", lambda: tmp_path / "data")
    assert main(["demo"]) == 0
    target = tmp_path / "data" / "scenarios" / "ZPHX"
    assert str(target) in capsys.readouterr().out
    for name in ("chain.csv", "history.csv", "meta.toml"):
        assert (target / name).read_bytes() == (FOLDER / name).read_bytes()
    assert main(["demo"]) == 0                           # optbench's own folder: rewritten


def test_cli_refuses_a_non_empty_out_folder_without_force(tmp_path, capsys):
    from optbench.cli import main
    folder = tmp_path / "mine"
    folder.mkdir()
    (folder / "chain.csv").write_text("my own chain\n")
    assert main(["demo", "--out", str(folder)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "--force" in err and str(folder) in err
    assert (folder / "chain.csv").read_text() == "my own chain\n"     # untouched
    (folder / "notes.txt").write_text("keep me")
    assert main(["demo", "--out", str(folder), "--force"]) == 0
    assert (folder / "chain.csv").read_bytes() == (FOLDER / "chain.csv").read_bytes()
    assert (folder / "notes.txt").read_text() == "keep me"  # other files stay


def test_an_empty_out_folder_needs_no_force(tmp_path):
    from optbench.cli import main
    (tmp_path / "empty").mkdir()
    assert main(["demo", "--out", str(tmp_path / "empty")]) == 0


def test_bundled_demo_is_the_checkout_folder_here():
    from optbench.data.scenario import bundled_demo, packaged_demo
    assert bundled_demo() == FOLDER
    # an installed package keeps its copy inside optbench/ (setup.py copies it there)
    assert packaged_demo().parts[-3:] == ("optbench", "scenarios", "ZPHX")


def test_cli_refuses_to_write_over_a_file(tmp_path, capsys):
    from optbench.cli import main
    target = tmp_path / "not_a_folder"
    target.write_text("x")
    assert main(["demo", "--out", str(target)]) == 2
    assert "not a folder" in capsys.readouterr().err


# ----------------------------------------------------------------- invented data
def test_only_the_invented_code_appears(meta):
    chain = pd.read_csv(FOLDER / "chain.csv", dtype=str, keep_default_na=False)
    assert set(chain["underlying"]) == {"ZPHX"}
    assert meta["code"] == "ZPHX" and meta["name"] == "Zephyr Composite Index"
    assert "invented" in meta["note"].lower()
    roots = {s[:6] for s in chain["symbol"] if s}
    assert roots == {"ZPHX  "}


def test_meta_carries_the_market_facts(meta, scenario):
    assert meta["asof"] == demo.ASOF and meta["asof"].weekday() == 4   # a Friday
    assert meta["spot"] == scenario.spot
    assert (meta["rate"], meta["div_yield"]) == (demo.RATE, demo.DIV_YIELD)
    assert meta["style"] == "european" and meta["multiplier"] == 100
    hol = [dt.date.fromisoformat(h) for h in meta["holidays"]]
    assert hol == sorted(hol) and all(h.weekday() < 5 for h in hol)
    assert max(hol) >= max(demo.EXPIRIES) - dt.timedelta(days=365)  # covers the expiries


def test_sizes_stay_small():
    assert (FOLDER / "chain.csv").read_text().count("\n") - 1 < 1500
    assert (FOLDER / "history.csv").read_text().count("\n") - 1 < 2000


# ----------------------------------------------------------------- the chain
def test_occ_symbols_match_the_columns():
    # OCC Options Symbology Initiative (2010): root padded to 6, YYMMDD, C/P,
    # strike x 1000 in 8 digits
    chain = pd.read_csv(FOLDER / "chain.csv", dtype=str, keep_default_na=False)
    pattern = re.compile(r"^(.{6})(\d{6})([CP])(\d{8})$")
    checked = 0
    for sym, exp, typ, strike in zip(chain["symbol"], chain["expiry"], chain["type"],
                                     chain["strike"]):
        if not sym:
            continue
        m = pattern.match(sym)
        assert m, sym
        assert dt.datetime.strptime(m[2], "%y%m%d").date().isoformat() == exp
        assert m[3] == typ
        assert int(m[4]) == round(float(strike) * 1000)
        checked += 1
    assert checked >= len(chain) - 1


def test_expiries_span_a_week_to_two_years(chain):
    days = np.sort(chain.quotes["calendar_days"].unique())
    assert days[0] == 7 and 700 <= days[-1] <= 760 and days.size >= 7
    exp = pd.to_datetime(chain.quotes["expiry"].unique())
    assert all(d.weekday() < 5 for d in exp)
    hol = {dt.date.fromisoformat(h) for h in tomllib.loads(
        (FOLDER / "meta.toml").read_text())["holidays"]}
    assert not any(d.date() in hol for d in exp)


def test_rejected_rows_are_exactly_the_deliberate_ones(chain, scenario):
    expected = {line: EXPECTED_REASON[kind] for line, kind in scenario.bad_rows}
    got = dict(zip(chain.rejected["line"].astype(int), chain.rejected["reason"]))
    assert got == expected
    assert {kind for _, kind in scenario.bad_rows} == set(EXPECTED_REASON)
    q = chain.quality
    assert q.rows_in == q.rows_used + sum(q.rejected.values())
    assert q.warnings.get("stale", 0) > 0          # some zero volume and open interest


def test_quotes_respect_the_tick_and_widen_away_from_the_money(chain):
    quotes = chain.quotes
    bid, ask = quotes["bid"].to_numpy(), quotes["ask"].to_numpy()
    for price in (bid, ask):
        tick = np.where(price >= 3.0, 0.05, 0.01)
        assert np.allclose(np.round(price / tick) * tick, price, atol=1e-9)
    assert np.all(ask > bid) and np.all(bid > 0)
    # among out-of-the-money options, the spread relative to the mid widens away
    # from the money (common practice of market makers)
    rel = (ask - bid) / quotes["mid"].to_numpy()
    logk = np.log(quotes["strike"].to_numpy() / chain.spot)
    otm = np.where(quotes["is_call"], logk > 0, logk < 0)
    near, far = rel[otm & (np.abs(logk) < 0.02)], rel[otm & (np.abs(logk) > 0.15)]
    assert np.median(far) > 2 * np.median(near)


def test_strikes_reach_deep_out_of_the_money_puts(chain):
    puts = chain.quotes[~chain.quotes["is_call"]]
    lowest = puts.groupby("calendar_days")["strike"].min() / chain.spot
    assert lowest.iloc[-1] <= 0.55          # about half of spot at two years
    assert lowest.iloc[0] <= 0.97           # below the money at one week
    assert (lowest.diff().dropna() <= 0.02).all()  # reaching further out with time


def _vollib_iv(price, S, K, t, r, q, is_call):
    from vollib.black_scholes_merton.implied_volatility import implied_volatility
    return implied_volatility(price, S, K, t, r, q, "c" if is_call else "p")


def test_mids_are_bsm_prices_of_the_smile(chain, scenario):
    # vollib's Black-Scholes-Merton implied vol (Jaeckel's "Let's be rational")
    # recovers the generator's SSVI vol from the quoted mid; the mid of an
    # outward-rounded quote is within half a tick of the model price, i.e. within
    # (tick / 2) / vega in vol (vega = S e^{-qt} N'(d1) sqrt(t), Hull ch. 19)
    from vollib.helpers.exceptions import PriceIsBelowIntrinsic
    q = chain.quotes
    rng = np.random.default_rng(0)
    rows = q.iloc[rng.choice(len(q), size=80, replace=False)]
    atm = np.array([scenario.atm_iv[d.date()] for d in rows["expiry"]])
    t = rows["t"].to_numpy()
    K = rows["strike"].to_numpy()
    F = chain.spot * np.exp((chain.rate - chain.div_yield) * t)
    k = np.log(K / F)
    want = np.sqrt(demo._ssvi_total_variance(k, atm ** 2 * t) / t)
    d1 = (np.log(F / K) + 0.5 * want ** 2 * t) / (want * np.sqrt(t))
    vega = (chain.spot * np.exp(-chain.div_yield * t) * np.sqrt(t)
            * np.exp(-0.5 * d1 ** 2) / np.sqrt(2 * np.pi))
    tick = np.where(rows["bid"].to_numpy() >= 3.0, 0.05, 0.01)
    tol = 0.5 * tick / vega + 1e-4
    checked = 0
    for mid, strike, tt, call, w, tl in zip(rows["mid"], K, t, rows["is_call"], want, tol):
        try:
            got = _vollib_iv(mid, chain.spot, strike, tt, chain.rate, chain.div_yield,
                             bool(call))
        except PriceIsBelowIntrinsic:   # deep in the money, rounded onto the bound
            continue
        assert abs(got - w) <= tl, (strike, tt, call, got, w)
        checked += 1
    assert checked >= 70


def test_ssvi_smiles_are_free_of_static_arbitrage(scenario):
    # Gatheral and Jacquier (2014), "Arbitrage-free SVI volatility surfaces",
    # Theorem 4.2: no butterfly arbitrage if theta*phi*(1+|rho|) < 4 and
    # theta*phi^2*(1+|rho|) <= 4; Theorem 4.1: no calendar arbitrage if theta rises
    t = np.array([(e - demo.ASOF).days / 365 for e in demo.EXPIRIES])
    theta = np.array([scenario.atm_iv[e] for e in demo.EXPIRIES]) ** 2 * t
    phi = demo.SSVI_ETA * theta ** -demo.SSVI_LAMBDA * (1 + theta) ** (demo.SSVI_LAMBDA - 1)
    rho = abs(demo.SSVI_RHO)
    assert np.all(theta * phi * (1 + rho) < 4)
    assert np.all(theta * phi ** 2 * (1 + rho) <= 4)
    assert np.all(np.diff(theta) > 0)


# ----------------------------------------------------------------- the history
def test_history_is_consistent_ohlc_on_trading_days(history, meta):
    dates = history.dates.astype("datetime64[D]")
    assert str(dates[-1]) == meta["asof"].isoformat()
    assert np.all(np.diff(dates).astype(int) > 0)
    assert np.all(np.is_busday(dates))
    assert not np.isin(dates, np.array(meta["holidays"], dtype="datetime64[D]")).any()
    o, h, lo, c = history.open, history.high, history.low, history.close
    assert np.all(h >= np.maximum(o, c)) and np.all(lo <= np.minimum(o, c))
    assert np.all(lo > 0)
    years = (dates[-1] - dates[0]).astype(int) / 365.25
    assert 5.5 < years < 6.5
    assert history.issues == []


def test_history_has_calm_and_turbulent_spells(history):
    # 63-day close-to-close realized vol, annualised with 252 (common practice)
    rv = pd.Series(history.returns).rolling(63).std().dropna().to_numpy() * np.sqrt(252)
    assert rv.min() < 0.11 and rv.max() > 0.28
    assert rv.max() / rv.min() > 3


def test_returns_are_fat_tailed(history):
    r = history.returns
    z = (r - r.mean()) / r.std()
    assert np.mean(z ** 4) - 3 > 1.0               # excess kurtosis (normal: 0)


def test_gjr_t_fit_by_arch_recovers_fat_tails_and_asymmetry(arch_fit):
    # reference library: arch (Sheppard), GJR-GARCH(1,1) with Student-t errors
    res = arch_fit
    p = res.params
    assert p["gamma[1]"] > p["alpha[1]"]           # the leverage effect is there
    assert res.tvalues["gamma[1]"] > 2.0           # and significant
    assert 3.5 < p["nu"] < 10                      # fat tails (true nu = 6)
    assert 0.95 < p["alpha[1]"] + p["gamma[1]"] / 2 + p["beta[1]"] < 1


# ----------------------------------------------------------------- implied vs model
def _chain_atm_iv(chain) -> dict:
    """ATM implied vol per expiry from the quotes: vollib implied vols of the
    out-of-the-money mids at the two strikes around the forward, interpolated
    linearly in log-moneyness to k = 0."""
    out = {}
    for expiry, g in chain.quotes.groupby("expiry"):
        t = float(g["t"].iloc[0])
        F = chain.spot * np.exp((chain.rate - chain.div_yield) * t)
        otm = g[np.where(g["is_call"], g["strike"] >= F, g["strike"] < F)]
        below = otm[otm["strike"] < F].nlargest(1, "strike")
        above = otm[otm["strike"] >= F].nsmallest(1, "strike")
        pts = pd.concat([below, above])
        ks = np.log(pts["strike"].to_numpy() / F)
        ivs = [_vollib_iv(m, chain.spot, K, t, chain.rate, chain.div_yield, bool(c))
               for m, K, c in zip(pts["mid"], pts["strike"], pts["is_call"])]
        out[expiry.date()] = float(np.interp(0.0, ks, ivs))
    return out


def test_chain_atm_matches_the_generator(chain, scenario):
    atm = _chain_atm_iv(chain)
    assert set(atm) == set(demo.EXPIRIES)
    for e in demo.EXPIRIES:
        assert abs(atm[e] - scenario.atm_iv[e]) < 0.003, e


def test_atm_sits_above_the_fitted_forecast_on_most_expiries_below_on_one(chain, history,
                                                                          meta):
    from optbench import fit_garch
    from optbench.volatility.calendar import trading_days
    fit = fit_garch(history.returns, model="gjr", dist="t", mean="constant")
    assert fit.converged
    atm = _chain_atm_iv(chain)
    exp = sorted(atm)
    td = trading_days(meta["asof"], np.array(exp, dtype="datetime64[D]"), meta["holidays"])
    gap = np.array([atm[e] for e in exp]) - np.asarray(fit.forecast_vol(td))
    assert (gap > 0.005).sum() >= len(exp) - 2     # above on most, by half a point or more
    assert (gap < -0.01).sum() >= 1                # clearly below on at least one
    low, high = fit.forecast_band(td)
    atm_arr = np.array([atm[e] for e in exp])
    assert (atm_arr < np.asarray(low)).any()       # "cheap" somewhere
    assert (atm_arr > np.asarray(high)).any()      # "rich" somewhere


def test_reference_forecast_tracks_arch_forecast(scenario, arch_fit, meta):
    # the generator's closed-form anchor stays within 2 vol points of the forecast of
    # a GJR-t fitted by arch (reference library) on the same history
    from optbench.volatility.calendar import trading_days
    res = arch_fit
    td = trading_days(meta["asof"], np.array(demo.EXPIRIES, dtype="datetime64[D]"),
                      meta["holidays"])
    var = res.forecast(horizon=int(td.max()), reindex=False).variance.to_numpy()[0] / 1e4
    arch_vol = np.sqrt(252 * np.cumsum(var) / np.arange(1, var.size + 1))[td - 1]
    ref = np.array([scenario.reference_forecast[e] for e in demo.EXPIRIES])
    assert np.max(np.abs(ref - arch_vol)) < 0.02
