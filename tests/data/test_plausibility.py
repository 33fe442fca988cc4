"""Rows and values that cannot be real are rejected with their own reason, never a
traceback: dates outside 1900-2200, strikes far from spot, NaN multipliers, IV
columns mixing units, missing market inputs (all named at once), an as-of date the
file does not hold. The rules are the loader's stated common-practice ones."""
from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench.cli import main
from optbench.data.chain import load_chain
from optbench.data.history import load_history
from optbench.errors import InputError

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"


def _chain(tmp_path: Path, edit) -> Path:
    frame = pd.read_csv(DEMO / "chain.csv", dtype=str).drop(columns=["symbol"])
    edit(frame)
    path = tmp_path / "chain.csv"
    frame.to_csv(path, index=False)
    return path


@pytest.mark.parametrize("column,value", [("expiry", "9999-12-31"), ("expiry", "2262-06-01"),
                                          ("expiry", "2300-01-01"),
                                          ("quote_date", "1600-01-01")])
def test_out_of_range_dates_are_bad_date_rows(tmp_path, column, value):
    def edit(f):
        f.loc[10, column] = value
    chain = load_chain(_chain(tmp_path, edit), meta={"rate": 0.04, "div_yield": 0.015})
    row = chain.rejected[chain.rejected["line"] == 12]
    assert list(row["reason"]) == ["bad_date"]
    assert chain.quality.rows_in == chain.quality.rows_used + sum(
        chain.quality.rejected.values())


def test_out_of_range_dates_in_screen_stay_in_their_row(tmp_path):
    from optbench.screening.screen import screen
    root = tmp_path / "universe"
    shutil.copytree(DEMO, root / "ZPHX")
    frame = pd.read_csv(DEMO / "chain.csv", dtype=str)
    frame.loc[10, "expiry"] = "9999-12-31"
    frame.loc[11, "quote_date"] = "1600-01-01"
    frame.to_csv(root / "ZPHX" / "chain.csv", index=False)
    hist = pd.read_csv(DEMO / "history.csv", dtype=str)
    hist.loc[50, "close"] = "-3"
    hist.to_csv(root / "ZPHX" / "history.csv", index=False)
    result = screen(root, workers=1, n_paths=200, model="garch", dist="normal")
    assert not result.failures
    assert all(r["error"] is None for r in result.rows)
    # the dropped history row travels into every row of the screen, and its views
    assert all("negative_close" in r["warnings"] for r in result.rows)
    from optbench.report.screen import screen_csv, screen_table
    assert "negative_close" in screen_csv(result)
    assert "negative_close" in screen_table(result, width=200)


@pytest.mark.parametrize("day", ["9999-01-04", "1500-01-04"])
def test_out_of_range_history_dates_are_dropped_and_counted(tmp_path, day):
    frame = pd.read_csv(DEMO / "history.csv", dtype=str)
    frame.loc[9, "date"] = day
    path = tmp_path / "history.csv"
    frame.to_csv(path, index=False)
    h = load_history(path)
    assert h.dropped == {"bad_date": 1}
    assert any("bad_date; lines 11" in i for i in h.issues)


def test_strike_ratio_is_settable(tmp_path):
    def edit(f):
        f.loc[10, "strike"] = "15000"      # about 2.9 x spot 5,206
    path = _chain(tmp_path, edit)
    kept = load_chain(path)
    assert 12 in set(kept.quotes["line"]) or kept.rejected.set_index("line").loc[
        12, "reason"] != "implausible_strike"
    strict = load_chain(path, max_strike_ratio=2.0)
    assert strict.rejected.set_index("line").loc[12, "reason"] == "implausible_strike"
    with pytest.raises(InputError, match="--max-strike-ratio"):
        load_chain(path, max_strike_ratio=0.5)


@pytest.mark.parametrize("cell", ["nan", "NaN", "", "inf"])
def test_multiplier_cell_that_is_not_a_number_is_rejected(tmp_path, cell):
    def edit(f):
        f.loc[10, "multiplier"] = cell
    chain = load_chain(_chain(tmp_path, edit))
    row = chain.rejected.set_index("line").loc[12]
    assert row["reason"] == "bad_number" and "multiplier" in row["detail"]


def test_mixed_iv_units_are_read_cell_by_cell(tmp_path):
    path = tmp_path / "chain.csv"
    path.write_text("underlying,quote_date,underlying_price,expiry,strike,type,bid,ask,iv\n"
                    "ZPHX,2026-11-27,100,2027-05-28,100,C,7.00,7.40,21.5%\n"
                    "ZPHX,2026-11-27,100,2027-05-28,100,P,4.50,4.90,0.215\n"
                    "ZPHX,2026-11-27,100,2027-05-28,105,C,5.00,5.40,0.205\n")
    chain = load_chain(path)
    np.testing.assert_allclose(np.sort(chain.quotes["iv_file"].to_numpy()),
                               [0.205, 0.215, 0.215])
    assert any("mixes cells with %" in n for n in chain.notes)


def test_every_missing_market_input_is_named_at_once(tmp_path):
    path = tmp_path / "chain.csv"
    path.write_text("expiry,strike,type,bid,ask\n2027-05-28,100,C,7.00,7.40\n")
    with pytest.raises(InputError) as err:
        load_chain(path)
    msg = str(err.value)
    assert "no quote date" in msg and "--asof" in msg
    assert "no spot price" in msg and "--spot" in msg


def test_asof_not_in_the_file_says_so(tmp_path, capsys):
    assert main(["compare", str(DEMO), "--asof", "2026-11-26"]) == 2
    err = capsys.readouterr().err
    assert "2026-11-26 is not a quote date" in err and "2026-11-27" in err
    assert "no usable quotes" not in err


def test_negative_portfolio_reaches_its_own_check(capsys):
    for value in ("-5", "-1e7"):
        assert main(["hedge", str(DEMO), "--portfolio", value, "--model", "garch",
                     "--paths", "200"]) == 2
        err = capsys.readouterr().err
        assert "must be positive" in err and "expected one argument" not in err


@pytest.mark.parametrize("argv,needle", [
    (["compare", str(DEMO), "--seed", "-1"], "--seed"),
    (["compare", str(DEMO), "--spot", "1e308"], "spot"),
    (["hedge", str(DEMO), "--portfolio", "1e7", "--beta", "1e308"], "--beta"),
    (["screen", str(DEMO), "--scheduler", "notanaddress"], "--scheduler"),
])
def test_extreme_options_are_one_line_errors(argv, needle, capsys):
    try:
        code = main(argv)
    except SystemExit as stop:          # argparse's own usage errors
        code = stop.code
    assert code == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and needle in err and "Traceback" not in err


def test_fit_json_with_nan_is_valid_json_with_null(monkeypatch, capsys):
    import json

    from optbench.commands import fit as fit_cmd
    real = fit_cmd.fit_report

    def with_nan(*args, **kwargs):
        doc = real(*args, **kwargs)
        doc["model"]["std_errors"]["omega"] = float("nan")   # as a degenerate fit gives
        doc["term_structure"][0]["high"] = float("inf")
        return doc
    monkeypatch.setattr(fit_cmd, "fit_report", with_nan)
    assert main(["fit", str(DEMO), "--model", "garch", "--format", "json"]) == 0
    out = capsys.readouterr().out
    doc = json.loads(out)
    assert "NaN" not in out and "Infinity" not in out
    # JSON has no NaN (RFC 8259 section 6): non-finite numbers are null (docs/schema.md)
    assert doc["model"]["std_errors"]["omega"] is None
    assert doc["term_structure"][0]["high"] is None
    assert "warnings" in doc and "dropped" in doc
