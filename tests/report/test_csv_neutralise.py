"""Spreadsheet-formula neutralisation of CSV cells.

Source: OWASP, "CSV Injection" (the cells a spreadsheet executes are those starting
with =, +, -, @, tab or carriage return; the recommended defence is a leading single
quote so the cell is shown as text).
"""
from __future__ import annotations

import io

import pandas as pd
import pytest

from optbench.report.csv import frame_csv, neutralise, write_rows


@pytest.mark.parametrize("cell", ["=1+2", "+SUM(A1:A2)", "-A1", "@cmd", "\tx", "\rx",
                                  "=HYPERLINK(\"http://x\")", "-", "+1", "-1_000", "-inf", "-1+A1"])
def test_dangerous_text_gets_a_leading_quote(cell):
    # OWASP "CSV Injection": cells starting with = + - @ TAB CR are executed
    assert neutralise(cell) == "'" + cell


@pytest.mark.parametrize("cell", ["-0.25", "-3", "-.5", "-2.5e-3", "ZPHX", "rich", "",
                                  "1e-3", "a=b"])
def test_harmless_text_and_negative_numbers_pass(cell):
    assert neutralise(cell) == cell


def test_numbers_stay_numbers_on_reread():
    frame = pd.DataFrame({"name": ["=cmd()", "ok", "-x"], "value": [-0.25, 1.5, float("nan")],
                          "n": [1, -2, 3]})
    text = frame_csv(frame, {"table": "test", "caution": "caution"})
    assert text.splitlines()[0] == "name,value,n" and text.notes["caution"] == "caution"
    back = pd.read_csv(io.StringIO(text))
    assert back["name"].tolist() == ["'=cmd()", "ok", "'-x"]
    assert back["value"].iloc[0] == -0.25 and back["value"].iloc[1] == 1.5
    assert pd.isna(back["value"].iloc[2])
    assert back["n"].tolist() == [1, -2, 3]
    assert back["value"].dtype.kind == "f" and back["n"].dtype.kind == "i"


def test_floats_round_trip_exactly():
    x = 0.1 + 0.2
    text = write_rows(["x"], [[x]])
    assert float(text.splitlines()[1]) == x


from hypothesis import given, strategies as st


@given(st.text(max_size=20))
def test_no_neutralised_cell_starts_with_a_formula_character(text):
    # OWASP "CSV Injection": after neutralisation no text cell may start with a
    # formula trigger, except a plain negative number
    out = neutralise(text)
    if out and out[0] in "=+-@\t\r":
        assert out[0] == "-" and float(out) < 0 or float(out) == 0
    assert out.endswith(text)


@given(st.floats(allow_nan=False, allow_infinity=False))
def test_numbers_are_never_quoted(x):
    text = write_rows(["x"], [[x]])
    assert float(text.splitlines()[1]) == x
