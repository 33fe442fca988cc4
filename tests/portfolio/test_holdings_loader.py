"""Holdings files, price panels and value histories: aliases, every row accounted for,
one-line errors naming the file."""
from __future__ import annotations

import numpy as np
import pytest

from optbench.data.holdings import load_holdings, load_price_panel, load_value_history
from optbench.errors import InputError


def _write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_aliases_lots_and_rejected_rows(tmp_path):
    p = _write(tmp_path, "h.csv", "Ticker;Shares;Last Price\nAA1;100;10,5\nBB2;;3\n;5;1\n"
                                   "aa1;50;10,5\nCC3;0;2\nDD4;7;-1\n")
    h = load_holdings(p)
    assert h.sized_by == "quantity"
    assert h.symbols == ["AA1", "DD4"]
    t = h.table.set_index("symbol")
    assert t.loc["AA1", "quantity"] == 150 and t.loc["AA1", "price"] == 10.5
    assert np.isnan(t.loc["DD4", "price"])                       # bad price -> history's
    assert sorted(h.rejected["reason"]) == ["no_size", "no_symbol", "zero_size"]
    # every input row is used or rejected (two AA1 lots make one holding)
    assert h.rows_in == 6 == 3 + len(h.rejected)
    assert any("combined" in s or "added" in s for s in h.issues)
    assert any("not a positive" in s for s in h.issues)


def test_weights_in_percent_are_scaled_and_reported(tmp_path):
    h = load_holdings(_write(tmp_path, "w.csv", "symbol,weight\nA,60%\nB,30%\n"))
    assert h.table["weight"].tolist() == pytest.approx([2 / 3, 1 / 3])
    assert any("percent" in s for s in h.issues) and any("scaled" in s for s in h.issues)


@pytest.mark.parametrize("text, problem", [
    ("qty,price\n1,2\n", "missing column 'symbol'"),
    ("symbol,price\nA,2\n", "missing column 'quantity' or 'weight'"),
    ("symbol,quantity,weight\nA,1,0.5\n", "both a quantity"),
    ("symbol,quantity\n,1\nB,x\n", "no usable holding"),
])
def test_holdings_errors_are_one_line_naming_the_file(tmp_path, text, problem):
    p = _write(tmp_path, "bad.csv", text)
    with pytest.raises(InputError) as err:
        load_holdings(p)
    assert str(p) in str(err.value) and problem in str(err.value)
    assert "\n" not in str(err.value)


def test_wide_panel_reports_per_symbol(tmp_path):
    p = _write(tmp_path, "c.csv", "Date,AA1,BB2,ZZ9\n2026-01-05,10,20,1\n2026-01-06,11,x,1\n"
                                   "bad,12,22,1\n2026-01-06,11.5,21,1\n2026-01-07,12,0,1\n")
    panel = load_price_panel(p, ["AA1", "BB2", "CC3"])
    assert panel.symbols == ["AA1", "BB2", "CC3"]
    assert panel.closes["AA1"].tolist() == [10, 11.5, 12]        # duplicate date: last kept
    assert any("unreadable date" in s for s in panel.issues)
    assert any("more than once" in s for s in panel.issues)
    assert any("ZZ9" in s for s in panel.issues)                  # column with no holding
    assert "not positive" in panel.series_issues["BB2"][0]
    assert "no column CC3" in panel.series_issues["CC3"][0]


def test_folder_of_histories(tmp_path):
    (tmp_path / "h").mkdir()
    _write(tmp_path / "h", "AA1.csv", "date,close\n2026-01-05,10\n2026-01-06,11\n")
    _write(tmp_path / "h", "other.csv", "date,close\n2026-01-05,10\n2026-01-06,11\n")
    panel = load_price_panel(tmp_path / "h", ["AA1", "BB2"])
    assert panel.closes["AA1"].tolist() == [10, 11]
    assert "no history file BB2.csv" in panel.series_issues["BB2"][0]
    assert any("OTHER" in s for s in panel.issues)


def test_value_history(tmp_path):
    panel = load_value_history(_write(tmp_path, "v.csv", "date,NAV\n2026-01-05,100\n"
                                                         "2026-01-06,101\n"))
    assert panel.closes["PORTFOLIO"].tolist() == [100, 101]
    with pytest.raises(InputError, match="missing column 'value'"):
        load_value_history(_write(tmp_path, "v2.csv", "date,a,b\n2026-01-05,1,2\n"))


def test_demo_portfolio_files_are_what_the_generator_writes(tmp_path):
    from pathlib import Path

    from optbench import demo
    folder = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"
    written = demo.write_portfolio(tmp_path)
    assert set(written) == {"holdings.csv", "holdings_history.csv"}
    for name in written:
        assert (tmp_path / name).read_bytes() == (folder / name).read_bytes(), (
            f"chains/ZPHX/{name} is out of date: run `optbench demo`")
    h = load_holdings(folder / "holdings.csv")
    assert len(h.symbols) == 12 and h.rejected.empty
