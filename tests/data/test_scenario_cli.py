"""Scenario folders (precedence of caller, file and meta.toml), file-level user
errors, and ``optbench check`` on the command line (one line and exit 2 on errors)."""
from __future__ import annotations

import datetime as dt
import json
import subprocess
import sys

import numpy as np
import pytest

from optbench.data.chain import load_chain
from optbench.data.scenario import load_scenario
from optbench.errors import InputError

from conftest import long_frame, random_quotes

META = """name = "Zephyr Composite Index"
code = "ZPHX"
spot = 99.0
asof = 2026-11-27
rate = 0.03
div_yield = 0.01
holidays = ["2026-12-25", "2027-01-01"]
"""


def _folder(tmp_path, with_spot=True):
    folder = tmp_path / "ZPHX"
    folder.mkdir()
    frame = long_frame(random_quotes(np.random.default_rng(11)), 100.0)
    if not with_spot:
        frame = frame.drop(columns=["underlying_price", "quote_date"])
    frame.to_csv(folder / "chain.csv", index=False)
    (folder / "history.csv").write_text("date,close\n2026-11-25,98\n2026-11-26,99\n"
                                        "2026-11-27,100\n")
    (folder / "meta.toml").write_text(META)
    return folder


def test_scenario_precedence(tmp_path):
    folder = _folder(tmp_path)
    s = load_scenario(folder)
    assert s.name == "Zephyr Composite Index" and s.code == "ZPHX"
    # the file's own underlying_price beats meta.toml; rate comes from meta
    assert s.chain.spot == 100.0 and s.chain.spot_source == "file"
    assert s.chain.rate == 0.03 and s.chain.rate_source == "meta"
    assert s.holidays == (dt.date(2026, 12, 25), dt.date(2027, 1, 1))
    assert len(s.history.returns) == 2
    # the caller beats both
    s2 = load_scenario(folder / "chain.csv", spot=101.0, rate=0.02)
    assert s2.chain.spot == 101.0 and s2.chain.spot_source == "caller"
    assert s2.chain.rate == 0.02 and s2.chain.rate_source == "caller"


def test_meta_fills_what_the_file_lacks(tmp_path):
    s = load_scenario(_folder(tmp_path, with_spot=False))
    assert s.chain.spot == 99.0 and s.chain.spot_source == "meta"
    assert s.chain.asof == dt.date(2026, 11, 27) and s.chain.asof_source == "meta"


def test_several_spots_use_the_median_with_a_note(tmp_path):
    frame = long_frame(random_quotes(np.random.default_rng(2), n_exp=1, n_k=3), 100.0)
    frame["underlying_price"] = [100.0, 100.2, 99.9, 100.1, 100.0, 100.0]
    path = tmp_path / "c.csv"
    frame.to_csv(path, index=False)
    chain = load_chain(path)
    assert chain.spot == float(np.median(frame["underlying_price"]))
    assert any("median" in n for n in chain.notes)


CHAIN_OK = ("quote_date,underlying_price,expiry,strike,type,bid,ask\n"
            "2026-11-27,100,2027-01-15,100,C,4.0,4.2\n")


@pytest.mark.parametrize("name, content, problem", [
    ("empty.csv", b"", "file is empty"),
    ("blank.csv", b"\n\n  \n", "file is empty"),
    ("binary.csv", bytes(range(256)) * 4, "binary"),
    ("nocol.csv", b"quote_date,underlying_price,expiry,strike,type,bid\n"
                  b"2026-11-27,100,2027-01-15,100,C,4.0\n", "missing column 'ask'"),
    ("nostrike.csv", b"quote_date,underlying_price,expiry,type,bid,ask\n"
                     b"2026-11-27,100,2027-01-15,C,4.0,4.2\n", "missing column 'strike'"),
    ("onecol.csv", b"quote_date:expiry:strike:type:bid:ask\n1:2:3:4:5:6\n", "delimiter"),
    ("nodate.csv", b"underlying_price,expiry,strike,type,bid,ask\n100,2027-01-15,100,C,4,4.2\n",
     "no quote date"),
    ("baddate.csv", b"quote_date,underlying_price,expiry,strike,type,bid,ask\n"
                    b"someday,100,2027-01-15,100,C,4,4.2\n", "no readable date"),
    ("nospot.csv", b"quote_date,expiry,strike,type,bid,ask\n2026-11-27,2027-01-15,100,C,4,4.2\n",
     "no spot price"),
    ("header.csv", b"quote_date,underlying_price,expiry,strike,type,bid,ask\n",
     "no quotes"),
])
def test_file_level_user_errors(tmp_path, name, content, problem):
    path = tmp_path / name
    path.write_bytes(content)
    with pytest.raises(InputError, match=problem) as err:
        load_chain(path)
    assert str(path) in str(err.value) and "\n" not in str(err.value)


def test_semicolons_and_decimal_commas_are_accepted(tmp_path):
    path = tmp_path / "semi.csv"
    path.write_text(CHAIN_OK.replace(",", ";").replace("4.0", "4,0").replace("4.2", "4,2"))
    chain = load_chain(path)
    assert chain.quality.rows_used == 1 and chain.quotes["mid"].iloc[0] == 4.1


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "optbench", "check", *args],
                          capture_output=True, text=True, timeout=60)


@pytest.mark.parametrize("make, args, problem", [
    (lambda d: None, ["missing.csv"], "no such file"),
    (lambda d: (d / "e.csv").write_bytes(b""), ["e.csv"], "file is empty"),
    (lambda d: (d / "b.csv").write_bytes(b"\x00\x01\x02PK" * 50), ["b.csv"], "binary"),
    (lambda d: (d / "m.csv").write_text("expiry,strike,type,bid\n2027-01-15,1,C,1\n"),
     ["m.csv", "--spot", "100", "--asof", "2026-11-27"], "missing column 'ask'"),
    (lambda d: (d / "ok.csv").write_text(CHAIN_OK), ["ok.csv", "--asof", "27.13.2026"],
     "not a date"),
])
def test_cli_user_errors_are_one_line_exit_2(tmp_path, make, args, problem):
    make(tmp_path)
    args = [str(tmp_path / a) if a.endswith(".csv") else a for a in args]
    out = _cli(*args)
    assert out.returncode == 2, out.stderr
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1 and problem in lines[0], out.stderr
    assert "Traceback" not in out.stderr and out.stdout == ""


@pytest.mark.slow
def test_cli_check_json_table_and_csv(tmp_path):
    folder = _folder(tmp_path)
    out = _cli(str(folder), "--format", "json", "--rows", "3")
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    q = doc["quality"]
    assert q["rows_in"] == q["rows_used"] + sum(q["rejected"].values())
    chain = load_scenario(folder).chain
    assert q == chain.quality.as_dict()
    assert doc["asof"] == "2026-11-27" and doc["spot"] == 100.0
    assert doc["underlying"] == "ZPHX" and doc["sources"]["rate"] == "meta"
    assert len(doc["rejected_rows"]) == min(3, len(chain.rejected))
    assert [e["expiry"] for e in doc["expiries"]] == [d.isoformat() for d in chain.expiries]

    target = tmp_path / "rejected.csv"
    out = _cli(str(folder / "chain.csv"), "--format", "csv", "-o", str(target))
    assert out.returncode == 0 and target.is_file()
    assert len(target.read_text().strip().splitlines()) == len(chain.rejected) + 1

    out = _cli(str(folder))
    assert out.returncode == 0 and f"used {chain.quality.rows_used}" in out.stdout


def test_corrupt_parquet_is_one_line(tmp_path):
    path = tmp_path / "chain.parquet"
    path.write_bytes(b"PAR1" + b"not really parquet" * 10)
    with pytest.raises(InputError, match="cannot read as Parquet"):
        load_chain(path)


def test_non_occ_symbols_are_kept_not_read(tmp_path):
    path = tmp_path / "c.csv"
    path.write_text("quote_date,underlying_price,expiry,strike,type,bid,ask,symbol\n"
                    "2026-11-27,100,2027-01-15,100,C,4.0,4.2,ZPHX-15JAN27-100-C\n"
                    "2026-11-27,100,2027-01-15,100,P,3.9,4.1,ZPHX-15JAN27-100-P\n")
    chain = load_chain(path)
    assert chain.quality.rows_used == 2
    assert any("not in OCC form" in n for n in chain.notes)


def test_wide_line_with_one_side_empty(tmp_path):
    path = tmp_path / "w.csv"
    path.write_text("quote_date,underlying_price,expiry,Call Bid,Call Ask,Strike,Put Bid,Put Ask\n"
                    "2026-11-27,100,2027-01-15,4.0,4.2,100,3.9,4.1\n"
                    "2026-11-27,100,2027-01-15,1.0,1.2,110,,\n")
    chain = load_chain(path)
    assert chain.layout == "wide" and chain.quality.rows_in == 4
    rej = chain.rejected.iloc[0]
    assert (rej["line"], rej["reason"], rej["side"]) == (3, "missing_field", "put")


def test_all_rejected_chain_is_not_an_error(tmp_path):
    path = tmp_path / "c.csv"
    path.write_text("quote_date,underlying_price,expiry,strike,type,bid,ask\n"
                    "2026-11-27,100,2026-11-20,100,C,4.0,4.2\n")
    chain = load_chain(path)
    assert chain.quality.rows_used == 0 and chain.quality.rejected == {"expired": 1}
    assert chain.quotes.empty and chain.expiries == []


def test_multiline_cells_are_noted(tmp_path):
    path = tmp_path / "c.csv"
    path.write_text("quote_date,underlying_price,expiry,strike,type,bid,ask,comment\n"
                    '2026-11-27,100,2027-01-15,100,C,4.0,4.2,"two\nlines"\n'
                    "2026-11-27,100,2027-01-15,100,P,3.9,4.1,one\n\n\n")
    assert any("span several lines" in n for n in load_chain(path).notes)
    path.write_text(CHAIN_OK + "\n\n")
    assert not any("span several lines" in n for n in load_chain(path).notes)
