"""Exports re-read by outside readers (json, pandas, openpyxl) equal the JSON numbers,
and the command line writes every format and refuses bad input in one line."""
from __future__ import annotations

import io
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench.analysis.compare import compare
from optbench.analysis.hedge import hedge_from_comparison
from optbench.analysis.results import CAUTION, HedgeRequest
from optbench.report.csv import comparison_csv, hedge_csv
from optbench.report.jsonout import dumps
from optbench.report.xlsx import comparison_xlsx, hedge_xlsx

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"


@pytest.fixture(scope="module")
def comparison():
    return compare(DEMO, model="gjr", dist="t")


@pytest.fixture(scope="module")
def estimate(comparison):
    return hedge_from_comparison(comparison, HedgeRequest(1e7, structure="collar", days=84),
                                 n_paths=2000, seed=5)


def _same(a, b):
    if a is None or (isinstance(a, float) and math.isnan(a)):
        return b is None or (isinstance(b, float) and math.isnan(b)) or b == ""
    if isinstance(a, float):
        return math.isclose(a, float(b), rel_tol=1e-12, abs_tol=1e-15)
    return str(a) == str(b)


def test_json_is_strict_and_matches_the_design_keys(comparison):
    text = dumps(comparison, kind="compare")
    data = json.loads(text, parse_constant=lambda c: pytest.fail(f"non-JSON constant {c}"))
    for key in ("asof", "underlying", "spot", "model", "expiries", "quality"):
        assert key in data
    for key in ("name", "dist", "params", "loglik"):
        assert key in data["model"]
    row = data["expiries"][0]
    for key in ("expiry", "calendar_days", "trading_days", "forward", "atm_iv",
                "forecast_vol", "forecast_low", "forecast_high", "realized_vol",
                "iv_minus_forecast", "verdict"):
        assert key in row
    assert data["caution"] == CAUTION
    assert data["schema"] == "optbench.compare/1"


def test_nan_becomes_null():
    assert json.loads(dumps({"x": float("nan"), "y": [np.float64("inf"), 1.5]})) == \
        {"x": None, "y": [None, 1.5]}


def test_csv_reread_by_pandas_equals_json(comparison):
    data = json.loads(dumps(comparison))
    frame = pd.read_csv(io.StringIO(comparison_csv(comparison)))   # default settings
    assert len(frame) == len(data["expiries"])
    for rec, row in zip(frame.to_dict(orient="records"), data["expiries"]):
        for key in ("atm_iv", "forecast_vol", "forecast_low", "forecast_high",
                    "variance_premium", "prob_realized_above_iv", "forward", "verdict"):
            assert _same(row[key], rec[key]), key
    strikes = pd.read_csv(io.StringIO(comparison_csv(comparison, "strikes")))
    assert len(strikes) == len(data["strikes"])
    for key in ("strike", "iv_mid", "edge_per_contract", "price_at_forecast"):
        np.testing.assert_array_equal(strikes[key].to_numpy(float),
                                      np.array([r[key] if r[key] is not None else np.nan
                                                for r in data["strikes"]], float))


def test_xlsx_reread_by_openpyxl_equals_json(comparison):
    from openpyxl import load_workbook
    data = json.loads(dumps(comparison))
    wb = load_workbook(io.BytesIO(comparison_xlsx(comparison)), read_only=True)
    assert wb.sheetnames == ["Expiries", "Strikes", "Quality", "Model", "Notes"]
    notes = dict(list(wb["Notes"].iter_rows(values_only=True))[1:])
    assert notes["caution"] == CAUTION
    assert notes["asof"].date().isoformat() == data["asof"]
    rows = list(wb["Expiries"].iter_rows(values_only=True))
    header, body = rows[0], rows[1:]          # the table starts at A1
    assert len(body) == len(data["expiries"])
    for values, row in zip(body, data["expiries"]):
        rec = dict(zip(header, values))
        for key in ("atm_iv", "forecast_vol", "forecast_high", "variance_premium",
                    "realized_vol", "verdict", "calendar_days"):
            assert _same(row[key], rec[key]), key
    # percent formats on the vol columns
    wb2 = load_workbook(io.BytesIO(comparison_xlsx(comparison)))
    col = list(header).index("atm_iv") + 1
    assert wb2["Expiries"].cell(row=2, column=col).number_format == "0.00%"


def test_hedge_exports_agree(estimate):
    from openpyxl import load_workbook
    data = json.loads(dumps(estimate, kind="hedge"))
    summary = pd.read_csv(io.StringIO(hedge_csv(estimate))).set_index("item")
    for key in ("contracts", "premium_mid", "premium_paid", "expected_payoff", "overpay",
                "cost_pct", "cost_pct_annual", "annual_roll_cost"):
        assert float(summary.loc[key, "value"]) == pytest.approx(data[key], rel=1e-12)
    assert summary.loc["caution", "value"] == CAUTION
    scen = pd.read_csv(io.StringIO(hedge_csv(estimate, "scenarios")))
    np.testing.assert_array_equal(scen["hedged"], [s["hedged"] for s in data["scenarios"]])
    wb = load_workbook(io.BytesIO(hedge_xlsx(estimate)), read_only=True)
    rows = list(wb["Summary"].iter_rows(values_only=True))
    items = {r[0]: r[1] for r in rows[1:]}
    assert items["premium_paid"] == pytest.approx(data["premium_paid"], rel=1e-12)
    assert items["contracts"] == data["contracts"]
    legs = list(wb["Legs"].iter_rows(values_only=True))
    assert len(legs) - 1 == len(data["legs"])
    assert dict(list(wb["Notes"].iter_rows(values_only=True))[1:])["caution"] == CAUTION


def test_markdown_and_html_carry_the_caution_and_figures(comparison, estimate):
    from optbench.report.html import comparison_html, hedge_html
    from optbench.report.markdown import comparison_markdown, hedge_markdown
    md = comparison_markdown(comparison, strikes_for=[comparison.expiries[2].expiry])
    assert CAUTION in md and "| Expiry |" in md
    assert CAUTION in hedge_markdown(estimate)
    page = comparison_html(comparison)
    # figures are SVG drawn by optbench.report.svg (no plotting library): three of them
    assert page.count("data:image/svg+xml;base64,") == 3
    assert CAUTION in page and CAUTION in hedge_html(estimate)


def test_cli_formats_write_files(tmp_path, capsys):
    from optbench.cli import main
    for fmt in ("csv", "xlsx", "md", "json"):
        out = tmp_path / f"c.{fmt}"
        assert main(["compare", str(DEMO), "--model", "gjr", "--format", fmt, "-o",
                     str(out)]) == 0
        assert out.stat().st_size > 500
    assert main(["hedge", str(DEMO), "--model", "gjr", "--portfolio", "5e6",
                 "--structure", "put-spread", "--paths", "500", "--format", "json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["structure"] == "put_spread" and data["caution"] == CAUTION


@pytest.mark.parametrize("argv, needle", [
    (["hedge", "--portfolio", "1e7", "--expiry", "2031-01-17"], "--expiry"),
    (["hedge", "--portfolio", "1e7", "--floor", "1.2"], "--floor"),
    (["hedge", "--portfolio", "-5"], "--portfolio"),
    (["hedge", "--portfolio", "1e7", "--beta", "abc"], "--beta"),
    (["compare", "--format", "xlsx"], "-o FILE"),
    (["compare", "no/such/chain.csv"], "no such file"),
])
def test_cli_bad_input_is_one_line_exit_2(argv, needle, capsys):
    from optbench.cli import main
    argv = [argv[0], str(DEMO), "--model", "gjr"] + argv[1:] if argv[1:2] != [
        "no/such/chain.csv"] else argv
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and needle in err and "Traceback" not in err


def test_an_output_that_is_not_a_regular_file_is_written_into_not_replaced(tmp_path):
    """``-o`` naming a pipe (like ``/dev/null`` or a terminal) writes into it: the
    atomic replace is for regular files only, and no sidecar is written beside it."""
    import os
    import threading

    from optbench.report.csv import write_rows
    from optbench.report.files import write_payload
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    got = []
    reader = threading.Thread(target=lambda: got.append(fifo.read_bytes()))
    reader.start()
    write_payload(fifo, write_rows(["a", "b"], [(1, 2)], {"table": "t"}))
    reader.join(timeout=10)
    assert got and got[0].decode().splitlines() == ["a,b", "1,2"]
    assert fifo.exists() and not fifo.is_file()            # still the pipe
    assert not (tmp_path / "pipe.meta.json").exists()
