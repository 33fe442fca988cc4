"""The opt-in fit cache: the next day's screen filters from the cached parameters
instead of refitting, and says so in every row.

Outside check: the variance of the appended day is recomputed by hand with the
GJR-GARCH(1,1) recursion of Glosten, Jagannathan & Runkle (1993),
sigma2_t = omega + (alpha + gamma 1[e_{t-1} < 0]) e_{t-1}^2 + beta sigma2_{t-1}, from the
cached parameters and the previous day's conditional variance.
"""
from __future__ import annotations

import json
import math
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench.demo_universe import write_universe
from optbench.screening.fit_cache import fingerprint, fit_with_cache
from optbench.screening.screen import screen

PATHS = 500


def _next_day(src: Path, dst: Path, move: float = -0.02, revise: bool = False) -> str:
    """A copy of the scenario one business day later: one more close, the chain
    quoted that day (same expiries and prices)."""
    shutil.copytree(src, dst)
    hist = pd.read_csv(dst / "history.csv")
    day = (pd.Timestamp(hist["date"].iloc[-1]) + pd.offsets.BDay(1)).strftime("%Y-%m-%d")
    hist.loc[len(hist)] = [day, round(float(hist["close"].iloc[-1]) * math.exp(move), 4)]
    if revise:                                   # a vendor revised an old close
        hist.loc[10, "close"] = round(float(hist.loc[10, "close"]) * 1.01, 4)
    hist.to_csv(dst / "history.csv", index=False)
    chain = pd.read_csv(dst / "chain.csv")
    asof = str(chain["quote_date"].iloc[0])
    chain["quote_date"] = chain["quote_date"].astype(str).str.replace(asof, day)
    chain.to_csv(dst / "chain.csv", index=False)
    meta = dst / "meta.toml"
    meta.write_text(meta.read_text().replace(f"asof = {asof}", f"asof = {day}"))
    return day


@pytest.fixture(scope="module")
def days(tmp_path_factory):
    root = tmp_path_factory.mktemp("fitcache")
    members = write_universe(root / "demo", 3)      # invented underlyings
    code = next(m.code for m in members if m.character != "broken")
    src = root / "demo" / code
    day1, day2, revised = root / "day1", root / "day2", root / "revised"
    shutil.copytree(src, day1 / code)
    new_day = _next_day(src, day2 / code)
    _next_day(src, revised / code, revise=True)
    return {"day1": day1, "day2": day2, "revised": revised, "new_day": new_day,
            "cache": root / "cache", "code": code}


def _by_tenor(result):
    return {r["tenor_days"]: r for r in result.rows}


def test_first_screen_fits_and_caches_with_the_same_rows(days):
    plain = screen(days["day1"], workers=1, n_paths=PATHS, model="gjr")
    cached = screen(days["day1"], workers=1, n_paths=PATHS, model="gjr",
                    fit_cache=days["cache"])
    assert plain.rows == cached.rows
    assert {r["fit_source"] for r in cached.rows} == {"fitted"}
    entry = json.loads((days["cache"] / f"{days['code']}.gjr-t-constant.json").read_text())
    assert entry["fit_date"] == cached.rows[0]["fit_date"]
    again = screen(days["day1"], workers=1, n_paths=PATHS, model="gjr",
                   fit_cache=days["cache"])
    for tenor, r in _by_tenor(again).items():
        ref = _by_tenor(plain)[tenor]
        assert r["fit_source"] == "cached" and r["fit_date"] == entry["fit_date"]
        assert f"cached fit of {entry['fit_date']}" in r["warnings"]
        # same history: every number as fitted (parameters, start-up variance and
        # covariance held), to rounding
        for col, want in ref.items():
            if isinstance(want, float):
                assert r[col] == pytest.approx(want, rel=1e-9, abs=1e-12), col
            elif col not in ("fit_source", "warnings"):
                assert r[col] == want, col


def test_next_day_filters_the_cached_parameters(days):
    screen(days["day1"], workers=1, n_paths=PATHS, model="gjr", fit_cache=days["cache"])
    entry = json.loads((days["cache"] / f"{days['code']}.gjr-t-constant.json").read_text())
    nxt = screen(days["day2"], workers=1, n_paths=PATHS, model="gjr",
                 fit_cache=days["cache"])
    for r in nxt.rows:
        assert r["fit_source"] == "filtered"
        assert r["fit_date"] == entry["fit_date"]
        assert f"filtered over 1 new day to {days['new_day']}" in r["warnings"]

    # the filter by hand: same parameters, one more step of the GJR recursion
    from optbench.data.scenario import load_scenario
    hist1 = load_scenario(days["day1"] / days["code"]).history
    hist2 = load_scenario(days["day2"] / days["code"]).history
    y1, y2 = np.asarray(hist1.returns), np.asarray(hist2.returns)
    assert len(y2) == len(y1) + 1 and fingerprint(y2[:-1]) == entry["fingerprint"]
    fit, origin = fit_with_cache(y2, hist2.dates[1:], folder=days["cache"], code=days["code"],
                                 model="gjr", dist="t", mean="constant")
    assert origin.source == "filtered" and origin.new_days == 1
    p = entry["params"]
    assert {k: fit.params[k] for k in p} == pytest.approx(p, rel=1e-12)
    sigma = np.asarray(fit.conditional_vol)
    fit1, _ = fit_with_cache(y1, hist1.dates[1:], folder=days["cache"], code=days["code"],
                             model="gjr", dist="t", mean="constant")
    np.testing.assert_allclose(sigma[:-1], np.asarray(fit1.conditional_vol), rtol=1e-10)
    e = y2[-2] - p["mu"]
    s2 = p["omega"] + (p["alpha"] + p["gamma"] * (e < 0)) * e * e \
        + p["beta"] * sigma[-2] ** 2                  # Glosten, Jagannathan & Runkle 1993
    assert sigma[-1] ** 2 == pytest.approx(s2, rel=1e-9)
    e = y2[-1] - p["mu"]
    nxt_var = p["omega"] + (p["alpha"] + p["gamma"] * (e < 0)) * e * e + p["beta"] * s2
    assert fit.last_variance == pytest.approx(nxt_var, rel=1e-9)


def test_revised_history_or_too_many_days_refits(days):
    screen(days["day1"], workers=1, n_paths=PATHS, model="gjr", fit_cache=days["cache"])
    revised = screen(days["revised"], workers=1, n_paths=PATHS, model="gjr",
                     fit_cache=days["cache"])
    assert {r["fit_source"] for r in revised.rows} == {"fitted"}
    assert "differs from the one the cached fit used: refitted" in revised.rows[0]["warnings"]
    screen(days["day1"], workers=1, n_paths=PATHS, model="gjr", fit_cache=days["cache"])
    strict = screen(days["day2"], workers=1, n_paths=PATHS, model="gjr",
                    fit_cache=days["cache"], max_filter_days=0)
    assert {r["fit_source"] for r in strict.rows} == {"fitted"}
    assert "(more than 0): refitted" in strict.rows[0]["warnings"]
    plain = screen(days["day2"], workers=1, n_paths=PATHS, model="gjr")
    assert [r["forecast_vol"] for r in strict.rows] == [r["forecast_vol"] for r in plain.rows]


def test_unreadable_entry_is_refitted(days, tmp_path):
    cache = tmp_path / "cache"
    cache.mkdir()
    entry = cache / f"{days['code']}.gjr-t-constant.json"
    entry.write_text("{not json")
    result = screen(days["day1"], workers=1, n_paths=PATHS, model="gjr", fit_cache=cache)
    assert {r["fit_source"] for r in result.rows} == {"fitted"}
    assert "could not be read" in result.rows[0]["warnings"]
    assert json.loads(entry.read_text())["model"] == "gjr"


def test_command_line_options(days, tmp_path):
    cache = tmp_path / "c"
    base = [sys.executable, "-m", "optbench", "screen", str(days["day1"]), "--workers",
            "1", "--paths", str(PATHS), "--model", "gjr", "--format", "json"]
    out = subprocess.run(base + ["--fit-cache", str(cache)], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    out = subprocess.run(base + ["--fit-cache", str(cache)], capture_output=True, text=True)
    doc = json.loads(out.stdout)
    assert {r["fit_source"] for r in doc["rows"]} == {"cached"}
    table = subprocess.run(base[:-2] + ["--fit-cache", str(cache)], capture_output=True,
                           text=True)
    assert "Fit cache: models not refitted" in table.stdout
    for args, needle in ((["--refit-after", "3"], "--refit-after"),
                         (["--fit-cache", str(days["day1"] / days["code"] / "chain.csv")],
                          "--fit-cache")):
        bad = subprocess.run(base + args, capture_output=True, text=True)
        assert bad.returncode == 2 and needle in bad.stderr, bad.stderr
        assert len(bad.stderr.strip().splitlines()) == 1


def test_a_file_in_place_of_the_cache_folder_is_one_line(tmp_path):
    from optbench.errors import InputError
    from optbench.screening.fit_cache import check_folder
    afile = tmp_path / "cache.json"
    afile.write_text("{}")
    with pytest.raises(InputError, match="is a file, not a folder"):
        check_folder(afile)
    assert afile.read_text() == "{}"          # left as it was
    assert check_folder(tmp_path / "new" / "cache").is_dir()
