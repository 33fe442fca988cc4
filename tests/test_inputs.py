"""Typed values read the same on the command line and in the workbench
(:mod:`optbench.inputs`): money with suffixes, floors as percent or fraction, rates,
dates in the layouts the file loaders read — and one-line messages that name the
field and echo the text."""
from __future__ import annotations

import datetime as _dt

import pandas as pd
import pytest

from optbench import inputs
from optbench.cli import build_parser
from optbench.data.parse import to_date
from optbench.errors import InputError


@pytest.mark.parametrize("text,value", [
    ("25m", 25e6), ("2.5bn", 2.5e9), ("2.5b", 2.5e9), ("750k", 750e3), ("10,000,000", 1e7),
    ("10 000 000", 1e7), ("1e7", 1e7), ("$25m", 25e6), ("12mm", 12e6), (" 3.5M ", 3.5e6),
])
def test_money(text, value):
    assert inputs.money(text, "Portfolio value") == pytest.approx(value)


@pytest.mark.parametrize("text,needle", [
    ("abc", "Portfolio value: not an amount of money: 'abc'"),
    ("-5m", "Portfolio value: must be positive, not '-5m'"),
    ("", "Portfolio value: empty"), ("5 apples", "not an amount of money: '5 apples'"),
    ("inf", "not a finite amount"),
])
def test_money_errors_name_the_field_and_echo_the_text(text, needle):
    with pytest.raises(InputError, match=needle.replace("$", r"\$")):
        inputs.money(text, "Portfolio value")


@pytest.mark.parametrize("text", ["90", "90%", "0.90", "0.9", " 90 % "])
def test_floor_as_percent_or_fraction(text):
    assert inputs.fraction(text, "Floor") == pytest.approx(0.90)


@pytest.mark.parametrize("text", ["0", "120", "-5", "x"])
def test_floor_outside_0_to_100_percent_is_refused(text):
    with pytest.raises(InputError, match=f"Floor: .*'{text}'"):
        inputs.fraction(text, "Floor")


@pytest.mark.parametrize("text", ["4%", "0.04", "4", "4.0 %"])
def test_rate_as_percent_or_decimal(text):
    assert inputs.rate(text, "Rate") == pytest.approx(0.04)


def test_dates_follow_the_loaders_rule():
    # ISO, then US month-first; day-first only where month-first cannot fit — the
    # same answer the chain loader's column parser gives for each value on its own
    for text, expected in (("2026-03-13", _dt.date(2026, 3, 13)),
                           ("03/13/2026", _dt.date(2026, 3, 13)),
                           ("13/03/2026", _dt.date(2026, 3, 13)),
                           ("03/04/2026", _dt.date(2026, 3, 4)),
                           ("20260313", _dt.date(2026, 3, 13))):
        assert inputs.date(text, "Quote date") == expected
        assert to_date(pd.Series([text])).iloc[0].date() == expected
    with pytest.raises(InputError, match="Quote date: not a date: '2026-13-45'"):
        inputs.date("2026-13-45", "Quote date")


def test_command_line_reads_the_same_values():
    parser = build_parser()
    args = parser.parse_args(["hedge", "chains/ZPHX", "--portfolio", "25m", "--floor", "90",
                              "--asof", "03/13/2026", "--rate", "4%"])
    assert args.portfolio == 25e6 and args.floor == pytest.approx(0.90)
    assert args.asof == _dt.date(2026, 3, 13) and args.rate == pytest.approx(0.04)
    args = parser.parse_args(["screen", "somewhere", "--floor", "0.9"])
    assert args.floor == pytest.approx(0.90)


def test_command_line_errors_echo_the_text(capsys):
    from optbench.cli import main
    with pytest.raises(SystemExit) as done:
        main(["hedge", "chains/ZPHX", "--portfolio", "25 apples"])
    assert done.value.code == 2
    err = capsys.readouterr().err.strip()
    assert err.endswith("argument --portfolio: not an amount of money: '25 apples' "
                        "(give e.g. 25m, 2.5bn or 10,000,000)")
    assert len(err.splitlines()) == 1
