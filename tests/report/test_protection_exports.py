"""The protection verdict and the drift reach every view and export of compare, hedge
and screen, and the drift options give one-line errors."""
from __future__ import annotations

import io
import json
import shutil
from pathlib import Path

import pandas as pd
import pytest

from optbench.analysis.compare import compare
from optbench.analysis.hedge import hedge_from_comparison
from optbench.analysis.results import HedgeRequest
from optbench.errors import InputError

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"
PUT_KEYS = ("strike", "delta", "iv", "premium", "premium_mid", "expected_payoff",
            "payoff_low", "payoff_high", "payoff_se", "verdict")


@pytest.fixture(scope="module")
def comparison():
    return compare(DEMO, model="gjr", dist="t", excess_return=0.02)


def test_json_carries_the_drift_and_both_puts(comparison):
    from optbench.report.jsonout import dumps
    data = json.loads(dumps(comparison, kind="compare"))
    assert data["drift"]["rule"] == "excess" and data["drift"]["excess_return"] == 0.02
    assert data["drift"]["annual"] == pytest.approx(comparison.rate - comparison.div_yield
                                                    + 0.02)
    assert data["floor"] == 0.9 and "25 delta" in data["protection_rule"]
    for row in data["expiries"]:
        for prefix in ("put25", "floor_put"):
            for key in PUT_KEYS:
                assert f"{prefix}_{key}" in row
        assert row["put25_verdict"] in ("rich", "fair", "cheap", "n/a")


def test_csv_xlsx_md_html_and_table_carry_them(comparison):
    from optbench.report.csv import comparison_csv
    from optbench.report.html import comparison_html
    from optbench.report.markdown import comparison_markdown
    from optbench.report.tables import comparison_table
    from optbench.report.xlsx import comparison_xlsx, read_table
    text = comparison_csv(comparison)
    # the CSV holds the table alone; its notes (the drift among them) travel beside it
    assert "risk-free rate less dividend yield plus an expected excess" in \
        text.notes["drift"]
    frame = pd.read_csv(io.StringIO(text))
    for prefix in ("put25", "floor_put"):
        assert list(frame[f"{prefix}_verdict"].fillna("n/a")) == [
            getattr(r, f"{prefix}_verdict") for r in comparison.expiries]
    assert frame["put25_expected_payoff"].tolist() == pytest.approx(
        [r.put25_expected_payoff for r in comparison.expiries])
    book = comparison_xlsx(comparison)
    sheet = read_table(book, "Expiries")
    assert sheet["floor_put_payoff_high"].tolist() == pytest.approx(
        [r.floor_put_payoff_high for r in comparison.expiries])
    notes = read_table(book, "Notes").set_index("item")["value"]
    assert "expected excess" in notes["drift"] and "protection" not in notes["drift"]
    assert "25 delta" in notes["protection_rule"]
    for page in (comparison_markdown(comparison), comparison_html(comparison,
                                                                  figures=False),
                 comparison_table(comparison, width=160)):
        assert "Protection" in page and "expected excess return of +2.00%" in page
        assert "25d put" in page or "25d put".replace(" ", "\n") in page


def test_hedge_outputs_name_the_drift(comparison):
    from optbench.report.csv import hedge_csv
    from optbench.report.markdown import hedge_markdown
    from optbench.report.tables import hedge_table
    est = hedge_from_comparison(comparison, HedgeRequest(1e7, days=84), n_paths=2000,
                                seed=5)
    assert est.drift == comparison.drift.to_dict()
    assert est.to_dict()["drift"]["rule"] == "excess"
    for text in (hedge_csv(est), hedge_markdown(est), hedge_table(est, width=200)):
        assert "excess return of +2.00%" in text


def test_meta_toml_sets_the_excess_return(tmp_path):
    folder = tmp_path / "ZPHX"
    shutil.copytree(DEMO, folder)
    meta = folder / "meta.toml"
    meta.write_text(meta.read_text() + "excess_return = 0.04\n")
    c = compare(folder, model="gjr", dist="t", expiries=["2027-02-19"])
    assert (c.drift.rule, c.drift.source, c.drift.excess_return) == ("excess", "meta", 0.04)
    # the caller beats meta.toml; the fitted mean only when asked for
    assert compare(folder, model="gjr", dist="t", expiries=["2027-02-19"],
                   excess_return=0.0).drift.rule == "risk-free"
    fitted = compare(folder, model="gjr", dist="t", expiries=["2027-02-19"], drift="fitted")
    assert fitted.drift.rule == "fitted"
    assert fitted.drift.annual == pytest.approx(252 * fitted.model.params["mu"]
                                                - fitted.div_yield)
    meta.write_text(meta.read_text().replace("excess_return = 0.04", 'excess_return = "x"'))
    with pytest.raises(InputError, match="meta.toml: excess_return"):
        compare(folder, model="gjr", dist="t")


@pytest.mark.parametrize("argv, needle", [
    (["compare", "--excess-return", "abc"], "--excess-return"),
    (["compare", "--excess-return", "0.02", "--drift", "fitted"], "--excess-return"),
    (["hedge", "--portfolio", "1e7", "--excess-return", "5"], "--excess-return"),
    (["compare", "--drift", "sideways"], "--drift"),
    (["compare", "--floor", "1.5"], "--floor"),
])
def test_drift_options_bad_input_is_one_line_exit_2(argv, needle, capsys):
    from optbench.cli import main
    try:
        code = main([argv[0], str(DEMO), "--model", "gjr", *argv[1:]])
    except SystemExit as stop:         # argparse's own errors leave by SystemExit
        code = stop.code
    assert code == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and needle in err and "Traceback" not in err


def test_screen_rows_carry_the_protection_verdicts_and_drift(tmp_path):
    from optbench.report.screen import screen_table
    from optbench.screening.screen import screen
    universe = tmp_path / "u"
    shutil.copytree(DEMO, universe / "ZPHX")
    result = screen(universe, tenors=(91,), workers=1, excess_return=0.01, n_paths=1000)
    row = result.rows[0]
    assert row["drift_rule"] == "excess"
    assert row["drift_annual"] == pytest.approx(0.04 - 0.015 + 0.01)
    assert row["floor_put_verdict"] in ("rich", "fair", "cheap", "n/a")
    assert result.to_dict()["drift"]["excess_return"] == 0.01
    assert "Drift of simulated prices: excess" in screen_table(result, width=200)
