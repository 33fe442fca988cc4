"""``optbench hedge`` with a portfolio: the views read one result and agree."""
from __future__ import annotations

import io
import json
from pathlib import Path

import pandas as pd
import pytest

from optbench.analysis.results import CAUTION
from optbench.cli import main

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"

BASE = [str(DEMO), "--holdings", str(DEMO / "holdings.csv"), "--paths", "3000",
        "--days", "90"]


def _run(capsys, *args):
    code = main(["hedge", *BASE, *args])
    out = capsys.readouterr()
    return code, out.out, out.err


def test_json_has_the_portfolio_keys_and_agrees_with_the_table(capsys):
    code, out, _ = _run(capsys, "--menu", "--format", "json", "--moves=-0.2,0,0.1",
                        "--vol-shocks", "5")
    assert code == 0
    d = json.loads(out)
    assert d["schema"] == "optbench.hedge/1" and d["caution"] == CAUTION
    for key in ("contracts", "premium_paid", "scenarios", "portfolio", "loss_distribution",
                "menu", "greeks", "scenario_grid", "basis_note", "simulation_drift"):
        assert key in d
    p = d["portfolio"]
    assert p["beta"] > 0 and p["beta_se"] > 0 and 0 < p["r_squared"] < 1
    assert d["request"]["beta"] == pytest.approx(p["beta"])
    assert len(d["scenario_grid"]) == 3 * 3            # moves x (-5, 0, +5) points
    assert {r["position"] for r in d["greeks"]} >= {"net hedge", "portfolio",
                                                     "hedged portfolio"}
    assert any(r["efficient"] for r in d["menu"]["rows"])
    assert d["loss_distribution"]["caution"] == CAUTION
    # the terminal view shows the same beta and ES
    code, text, _ = _run(capsys, "--menu")
    assert f"beta {p['beta']:.3f} ± {p['beta_se']:.3f}" in text
    assert f"{d['loss_distribution']['hedged']['es_99']:,.0f}" in text
    assert CAUTION in text and "Basis risk" in text


@pytest.mark.parametrize("table", ["menu", "greeks", "grid", "holdings", "loss"])
def test_csv_tables_carry_the_caution(capsys, table, tmp_path):
    code, out, err = _run(capsys, "--menu", "--format", "csv", "--table", table)
    assert code == 0
    assert len(pd.read_csv(io.StringIO(out))) > 0      # the table alone, header first
    assert CAUTION in err                               # its notes go to stderr
    out_file = tmp_path / f"{table}.csv"
    code, _, _ = _run(capsys, "--menu", "--table", table, "-o", str(out_file))
    notes = json.loads((tmp_path / f"{table}.csv.meta.json").read_text())["notes"]
    assert code == 0 and notes["caution"] == CAUTION and "Basis risk" in notes["basis_risk"]
    assert len(pd.read_csv(out_file)) > 0


def test_markdown_html_xlsx_carry_the_sections(capsys, tmp_path):
    _, md, _ = _run(capsys, "--format", "md")
    assert "## Greeks of the hedge" in md and "## P&L at expiry (simulated)" in md
    assert md.count(CAUTION) >= 2 and "Basis risk" in md
    _run(capsys, "--format", "html", "-o", str(tmp_path / "h.html"))
    page = (tmp_path / "h.html").read_text(encoding="utf-8")
    assert "Greeks of the hedge" in page and page.rstrip().endswith("</html>")
    assert "distribution of P&amp;L at expiry\" src=\"data:image/svg+xml" in page
    _run(capsys, "--menu", "--format", "xlsx", "-o", str(tmp_path / "h.xlsx"))
    from openpyxl import load_workbook
    book = load_workbook(tmp_path / "h.xlsx")
    assert {"Holdings", "Loss", "Greeks", "Scenario grid", "Menu"} <= set(book.sheetnames)
    # every table starts at A1; the caution and the basis-risk note are on the last
    # sheet, Notes
    assert book["Menu"]["A1"].value == "expiry" and book.sheetnames[-1] == "Notes"
    notes = {r[0]: r[1] for r in book["Notes"].iter_rows(values_only=True)}
    assert notes["caution"] == CAUTION and "Basis risk" in notes["basis_risk"]


def test_value_history_and_typed_beta_get_greeks(capsys, tmp_path):
    hist = pd.read_csv(DEMO / "history.csv")
    (tmp_path / "v.csv").write_text("date,value\n" + "".join(
        f"{d},{1e6 * c / hist['close'].iloc[0]:.2f}\n" for d, c in
        zip(hist["date"], hist["close"])))
    code = main(["hedge", str(DEMO), "--portfolio-history", str(tmp_path / "v.csv"),
                 "--paths", "2000", "--format", "json"])
    d = json.loads(capsys.readouterr().out)
    assert code == 0 and d["portfolio"]["beta"] == pytest.approx(1.0, abs=1e-3)
    code = main(["hedge", str(DEMO), "--portfolio", "1e7", "--paths", "2000",
                 "--format", "json"])
    d = json.loads(capsys.readouterr().out)
    assert d["portfolio"] is None and len(d["greeks"]) == 4


@pytest.mark.parametrize("args, message", [
    (["--holdings", "nope.csv"], "nope.csv: no such file"),
    (["--portfolio", "1e7", "--moves", "a,b"], "--moves: not a number"),
    (["--portfolio", "1e7", "--menu-days", "9"], "--menu-days"),
    (["--holdings", str(DEMO / "holdings.csv"), "--beta", "1.1"], "--beta"),
    (["--portfolio", "1e7", "--table", "menu", "--format", "csv"], "--table: menu needs"),
    ([], "--portfolio"),
])
def test_bad_arguments_give_one_line(capsys, args, message):
    code = main(["hedge", str(DEMO), *args])
    err = capsys.readouterr().err
    assert code == 2 and message in err and err.count("\n") == 1


def test_menu_sort_orders_every_view(capsys):
    code, out, _ = _run(capsys, "--menu", "--menu-sort", "protection", "--format", "csv",
                        "--table", "menu")
    frame = pd.read_csv(io.StringIO(out))   # header on line 1
    assert code == 0 and frame["es99_reduction"].is_monotonic_decreasing


def test_xlsx_sheets_neutralise_text_from_the_holdings_file(tmp_path, capsys):
    import shutil
    folder = tmp_path / "p"
    folder.mkdir()
    shutil.copy(DEMO / "holdings_history.csv", folder)
    text = (DEMO / "holdings.csv").read_text().replace("ZH01", "=ZH01")
    (folder / "holdings.csv").write_text(text)
    hist = (folder / "holdings_history.csv").read_text().replace("ZH01", "=ZH01", 1)
    (folder / "holdings_history.csv").write_text(hist)
    code = main(["hedge", str(DEMO), "--holdings", str(folder / "holdings.csv"), "--paths",
                 "2000", "--format", "xlsx", "-o", str(tmp_path / "o.xlsx")])
    assert code == 0
    from openpyxl import load_workbook
    ws = load_workbook(tmp_path / "o.xlsx")["Holdings"]
    symbols = [row[0].value for row in ws.iter_rows(min_row=2)]   # header at A1
    assert "=ZH01" not in symbols and any(str(s).endswith("=ZH01") for s in symbols)
