"""Every command, fed random extreme option values, ends with exit status 0 or 2 and a
one-line message — never a traceback.

hypothesis draws a few options per run from each command's list and a value for each
from a pool of extremes (negative, zero, 1e308, NaN, infinities, text, out-of-range
dates). The commands run in this process through ``optbench.cli.main``; anything but
a clean exit (an exception other than the user error the CLI turns into status 2)
fails the test. The scenario is a small invented one, so the whole file keeps to a
budget of about a minute.
"""
from __future__ import annotations

import contextlib
import datetime as _dt
import io
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from optbench.cli import main

ASOF = _dt.date(2026, 11, 27)
SPOT = 100.0

NUMBERS = ["0", "-1", "-5", "-1e7", "1", "0.5", "0.01", "2", "7", "100", "1e308", "-1e308",
           "1e-308", "nan", "inf", "-inf", "abc", "", "99999999999999999999", "1,5", "0x10"]
DATES = ["9999-12-31", "1600-01-01", "2262-04-12", "2300-01-01", "2026-02-30",
         "2026-11-27", "2026-11-26", "2024-01-02", "1999-01-01", "x"]
DAYS = ["5", "0", "-1", "1,5,21", "99999999", "3650", "3651", "5,x", "1e9", ""]

OPTIONS = {
    "check": {"--spot": NUMBERS, "--asof": DATES, "--rate": NUMBERS, "--div-yield": NUMBERS,
              "--multiplier": NUMBERS, "--max-spread": NUMBERS, "--rows": NUMBERS,
              "--max-strike-ratio": NUMBERS, "--format": ["json", "csv", "table"]},
    "fit": {"--horizons": DAYS, "--format": ["json", "csv", "table"]},
    "backtest": {"--split": DATES, "--k": NUMBERS, "--refit-every": NUMBERS,
                 "--format": ["json", "table"]},
    "compare": {"--spot": NUMBERS, "--asof": DATES, "--rate": NUMBERS,
                "--div-yield": NUMBERS, "--seed": NUMBERS, "--paths": NUMBERS,
                "--band": ["0.05,0.95", "0.9,0.1", "nan,1", "0,1", "x"],
                "--max-strike-ratio": NUMBERS, "--format": ["json", "csv", "table"]},
    "hedge": {"--portfolio": NUMBERS, "--beta": NUMBERS, "--hedge-ratio": NUMBERS,
              "--floor": NUMBERS, "--days": NUMBERS, "--lower-floor": NUMBERS,
              "--call-strike": NUMBERS, "--multiplier": NUMBERS, "--spot": NUMBERS,
              "--seed": NUMBERS, "--paths": NUMBERS,
              "--structure": ["put", "put-spread", "collar"], "--format": ["json", "table"]},
    "screen": {"--tenors": DAYS, "--floor": NUMBERS, "--paths": NUMBERS,
               "--format": ["json", "csv", "table"]},
}
FIXED = {"check": [], "fit": ["--model", "garch", "--dist", "normal"],
         "backtest": ["--model", "garch", "--dist", "normal"],
         "compare": ["--model", "garch", "--dist", "normal", "--paths", "200"],
         "hedge": ["--model", "garch", "--dist", "normal", "--paths", "200",
                   "--portfolio", "1000000"],
         "screen": ["--model", "garch", "--dist", "normal", "--workers", "1",
                    "--paths", "200"]}


def _bsm(s, k, t, r, q, vol, call):
    from math import erf, exp, log, sqrt
    n = lambda x: 0.5 * (1 + erf(x / sqrt(2)))  # noqa: E731
    d1 = (log(s / k) + (r - q + 0.5 * vol * vol) * t) / (vol * sqrt(t))
    d2 = d1 - vol * sqrt(t)
    if call:
        return s * exp(-q * t) * n(d1) - k * exp(-r * t) * n(d2)
    return k * exp(-r * t) * n(-d2) - s * exp(-q * t) * n(-d1)


@pytest.fixture(scope="module")
def universe(tmp_path_factory) -> Path:
    """An invented scenario: 420 daily closes ending at 100 on the quote date, and a
    chain priced at 20 % on three expiries."""
    root = tmp_path_factory.mktemp("extremes")
    folder = root / "ZQXT"
    folder.mkdir()
    rng = np.random.default_rng(11)
    days = pd.bdate_range(end=pd.Timestamp(ASOF), periods=420)
    r = rng.standard_t(5, size=len(days)) * 0.01
    close = SPOT * np.exp(np.cumsum(r) - np.cumsum(r)[-1])
    pd.DataFrame({"date": days.strftime("%Y-%m-%d"), "close": close}).to_csv(
        folder / "history.csv", index=False)
    rows = []
    for d in (30, 91, 182):
        expiry = ASOF + _dt.timedelta(days=d)
        for k in np.arange(80.0, 121.0, 5.0):
            for call in (True, False):
                p = _bsm(SPOT, k, d / 365, 0.03, 0.01, 0.2, call)
                if p < 0.05:
                    continue
                rows.append({"underlying": "ZQXT", "quote_date": ASOF.isoformat(),
                             "underlying_price": SPOT, "expiry": expiry.isoformat(),
                             "strike": k, "type": "C" if call else "P",
                             "bid": round(p * 0.98, 4), "ask": round(p * 1.02 + 0.01, 4)})
    pd.DataFrame(rows).to_csv(folder / "chain.csv", index=False)
    (folder / "meta.toml").write_text('code = "ZQXT"\nrate = 0.03\ndiv_yield = 0.01\n')
    return root


def _run(argv: list[str]) -> tuple[int, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(argv)
        except SystemExit as stop:        # argparse usage errors and --help
            code = stop.code if isinstance(stop.code, int) else 2
    return code, err.getvalue()


def _target(command: str, universe: Path) -> list[str]:
    folder = universe / "ZQXT"
    return {"check": [str(folder)], "fit": [str(folder)], "backtest": [str(folder)],
            "compare": [str(folder)], "hedge": [str(folder)],
            "screen": [str(universe)]}[command]


def _drive(command: str, universe: Path, chosen: dict) -> None:
    argv = [command, *_target(command, universe), *FIXED[command]]
    for opt, value in chosen.items():
        argv += [opt, value]
    code, err = _run(argv)
    assert code in (0, 2), (argv, code, err)
    assert "Traceback" not in err, (argv, err)
    if code == 2:
        assert len(err.strip().splitlines()) == 1, (argv, err)


def _options(command: str):
    table = OPTIONS[command]
    return st.dictionaries(st.sampled_from(sorted(table)), st.just(None), max_size=4).flatmap(
        lambda keys: st.fixed_dictionaries({k: st.sampled_from(table[k]) for k in keys}))


_SETTINGS = dict(deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture,
                                                       HealthCheck.too_slow])


@settings(max_examples=40, **_SETTINGS)
@given(chosen=_options("check"))
def test_check_never_tracebacks(universe, chosen):
    _drive("check", universe, chosen)


@settings(max_examples=15, **_SETTINGS)
@given(chosen=_options("fit"))
def test_fit_never_tracebacks(universe, chosen):
    _drive("fit", universe, chosen)


@settings(max_examples=10, **_SETTINGS)
@given(chosen=_options("backtest"))
def test_backtest_never_tracebacks(universe, chosen):
    _drive("backtest", universe, chosen)


@settings(max_examples=20, **_SETTINGS)
@given(chosen=_options("compare"))
def test_compare_never_tracebacks(universe, chosen):
    _drive("compare", universe, chosen)


@settings(max_examples=25, **_SETTINGS)
@given(chosen=_options("hedge"))
def test_hedge_never_tracebacks(universe, chosen):
    _drive("hedge", universe, chosen)


@settings(max_examples=8, **_SETTINGS)
@given(chosen=_options("screen"))
def test_screen_never_tracebacks(universe, chosen):
    _drive("screen", universe, chosen)


def test_the_fixture_itself_runs_clean(universe):
    """Without extremes every command answers (the property above is not vacuous)."""
    for command in OPTIONS:
        code, err = _run([command, *_target(command, universe), *FIXED[command]])
        assert code == 0, (command, err)
