"""Dividend schedules: CSV files with column aliases, meta.toml tables, every entry used
or rejected with its reason, one-line errors naming the file, and the schedule's use
by compare, hedge and check (it changes the forwards and every output says so)."""
from __future__ import annotations

import datetime as _dt
import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from optbench.data.dividends import (DividendSchedule, dividends_from_meta, read_dividends)
from optbench.data.scenario import load_scenario
from optbench.errors import InputError

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"


def test_csv_with_aliases_every_row_used_or_rejected(tmp_path):
    path = tmp_path / "d.csv"
    path.write_text("Ex-Date,Dividend\n2027-03-19,12.5\n2026-12-18,\"1,000.5\"\n"
                    "next year,3\n2027-06-18,-1\n2026-12-18,4\n\n")
    s = read_dividends(path)
    assert s.ex_dates == (_dt.date(2026, 12, 18), _dt.date(2027, 3, 19))
    assert s.amounts == (1000.5, 12.5)
    assert [w for w, _ in s.rejected] == ["line 4", "line 5", "line 6"]
    assert [r.split(":")[0] for _, r in s.rejected] == ["bad_date", "bad_amount",
                                                        "repeated_ex_date"]
    times, amounts = s.arrays(_dt.date(2026, 12, 18))      # the first is in the spot price
    assert list(amounts) == [12.5] and times[0] == pytest.approx(91 / 365)
    assert "1 on or before the quote date not used" in s.describe(_dt.date(2026, 12, 18))


@pytest.mark.parametrize("text, problem", [
    ("date,price\n2027-01-01,1\n", "no amount column"),
    ("amount\n1\n", "no ex_date column"),
    ("ex_date,amount\nsoon,1\n", "no usable dividend"),
    ("", "empty"),
])
def test_csv_errors_are_one_line_naming_the_file(tmp_path, text, problem):
    path = tmp_path / "bad.csv"
    path.write_text(text)
    with pytest.raises(InputError) as err:
        read_dividends(path)
    assert str(path) in str(err.value) and problem in str(err.value)
    assert "\n" not in str(err.value)


def test_meta_tables_and_meta_file_reference(tmp_path):
    meta = tmp_path / "meta.toml"
    s = dividends_from_meta([{"ex_date": _dt.date(2027, 1, 8), "amount": 2},
                             {"ex_date": "2027-04-09", "amount": 2.5},
                             {"ex_date": "2027-07-09"}], meta)
    assert s.amounts == (2.0, 2.5) and s.source == str(meta)
    assert s.rejected == (("[[dividends]] entry 3", "bad_amount: None is not a positive "
                                                    "number"),)
    (tmp_path / "divs.csv").write_text("ex_date,amount\n2027-01-08,1\n")
    assert dividends_from_meta("divs.csv", meta).amounts == (1.0,)
    with pytest.raises(InputError, match="meta.toml: dividends must be"):
        dividends_from_meta(3, meta)


@pytest.fixture()
def scenario(tmp_path):
    folder = tmp_path / "ZPHX"
    shutil.copytree(DEMO, folder)
    with open(folder / "meta.toml", "a") as fh:
        fh.write('\n[[dividends]]\nex_date = 2026-12-18\namount = 40.0\n'
                 '\n[[dividends]]\nex_date = 2027-03-19\namount = 40.0\n')
    (tmp_path / "other.csv").write_text("ex_date,amount\n2027-01-08,5\n")
    return folder


def test_scenario_carries_the_schedule_and_option_beats_meta(scenario):
    sc = load_scenario(scenario)
    assert sc.dividends.amounts == (40.0, 40.0) and sc.chain.dividends is sc.dividends
    assert any("dividend schedule from" in n for n in sc.chain.notes)
    other = load_scenario(scenario, dividends=scenario.parent / "other.csv")
    assert other.dividends.amounts == (5.0,)
    assert sum("dividend schedule" in n for n in other.chain.notes) == 1


def _run(*args):
    return subprocess.run([sys.executable, "-m", "optbench", *args], capture_output=True,
                          text=True, timeout=300)


def test_compare_uses_the_schedule_and_says_so(scenario):
    base = json.loads(_run("compare", str(scenario), "--dividends",
                           str(scenario.parent / "other.csv"), "--paths", "200",
                           "--format", "json").stdout)
    out = _run("compare", str(scenario), "--paths", "200", "--format", "json")
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    assert doc["sources"]["dividends"].endswith("meta.toml")
    assert any(w.startswith("dividend schedule from") for w in doc["warnings"])
    # the demo's parity forwards know no 80 of dividends (1.5 % of spot): the check
    # names the expiries after the ex-dates (optbench's own parity comparison)
    gaps = [w for w in doc["warnings"] if "dividend-schedule forward" in w]
    assert gaps and all("2026-12-04" not in w for w in gaps)
    assert len(gaps) > len([w for w in base["warnings"] if "dividend-schedule forward" in w])


def test_american_compare_and_hedge_price_with_the_dividends(scenario):
    plain = json.loads(_run("compare", str(scenario), "--style", "american", "--dividends",
                            str(scenario.parent / "other.csv"), "--paths", "200",
                            "--format", "json").stdout)
    out = _run("compare", str(scenario), "--style", "american", "--paths", "200",
               "--format", "json")
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    far = [e for e in doc["expiries"] if e["calendar_days"] > 200][0]
    far_plain = [e for e in plain["expiries"] if e["expiry"] == far["expiry"]][0]
    assert far["atm_iv"] != pytest.approx(far_plain["atm_iv"], abs=1e-6)
    hedge = _run("hedge", str(scenario), "--portfolio", "1000000", "--paths", "200")
    assert hedge.returncode == 0, hedge.stderr
    assert "dividend schedule from" in hedge.stdout


def test_cli_dividend_file_errors_exit_2_in_one_line(scenario, tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text("when,cash\n")
    for cmd in ("check", "compare"):
        out = _run(cmd, str(scenario), "--dividends", str(bad))
        assert out.returncode == 2
        assert str(bad) in out.stderr and "Traceback" not in out.stderr
        assert len(out.stderr.strip().splitlines()) == 1


def test_schedule_is_frozen():
    s = DividendSchedule((_dt.date(2027, 1, 1),), (1.0,), "x")
    with pytest.raises(AttributeError):
        s.source = "y"


def test_price_bounds_allow_for_dividends(tmp_path):
    # a deep in-the-money European call of an underlying paying 5 before expiry is worth
    # about (S - PV) - K e^{-rt} (Hull ch. 11, lower bound with dividends): below the
    # dividend-free bound S - K e^{-rt}, yet a fair quote
    from optbench.data.chain import load_chain
    from optbench.pricing.cash_dividends import escrowed_european_price
    t = 181 / 365
    fair = float(escrowed_european_price(100, 50, t, 0.04, 0.0, 0.3, True, [49 / 365], [5.0]))
    chain = tmp_path / "chain.csv"
    chain.write_text("quote_date,underlying_price,expiry,strike,type,bid,ask\n"
                     f"2026-11-27,100,2027-05-27,50,C,{fair - 0.05:.2f},{fair + 0.05:.2f}\n")
    divs = tmp_path / "d.csv"
    divs.write_text("ex_date,amount\n2027-01-15,5\n")
    plain = load_chain(chain, rate=0.04)
    assert plain.quality.rejected == {"below_intrinsic": 1}
    with_divs = load_chain(chain, rate=0.04, dividends=divs)
    assert with_divs.quality.rows_used == 1 and with_divs.dividends.amounts == (5.0,)
    out = _run("check", str(chain), "--rate", "0.04", "--dividends", str(divs),
               "--format", "json")
    doc = json.loads(out.stdout)
    assert doc["quality"]["rows_used"] == 1
    assert any(n.startswith("dividend schedule from") for n in doc["notes"])


def test_exports_name_the_dividend_schedule(scenario):
    out = _run("compare", str(scenario), "--paths", "200", "--format", "md")
    assert out.returncode == 0, out.stderr
    inputs = [line for line in out.stdout.splitlines() if "Inputs:" in line]
    assert inputs and "cash dividends (" in inputs[0]          # the provenance line
    from optbench.report.provenance import sources_text
    assert sources_text({"spot": "file", "dividends": "/x/meta.toml"}) == \
        "spot file, cash dividends meta.toml"
