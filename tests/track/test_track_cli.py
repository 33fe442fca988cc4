"""``optbench track`` on the demo in every format, ``compare --record``, the demo's
implied-vol history, and bad input: one line on stderr, exit status 2, nothing lost."""
from __future__ import annotations

import io
import json
import shutil
import sqlite3
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench import demo
from optbench.cli import main

ROOT = Path(__file__).resolve().parents[2]
FOLDER = ROOT / "chains" / "ZPHX"


@pytest.fixture(scope="module")
def record():
    from optbench.track.build import track
    return track(FOLDER)


def test_committed_iv_history_is_what_the_generator_writes():
    assert demo.render_iv_history() == (FOLDER / "iv_history.csv").read_bytes(), (
        "chains/ZPHX/iv_history.csv is out of date: run `optbench demo`")


def test_demo_iv_history_follows_its_price_history():
    """The invented implied vols are the true model's expected vol plus a premium:
    over three years their average premium over realized is positive (as designed)
    and they move with the simulated conditional vol."""
    sc = demo.generate()
    lines = demo.generate_iv_history(sc)
    frame = pd.read_csv(io.StringIO("date,tenor_days,atm_iv,p,c\n" + "\n".join(lines)))
    assert set(frame["tenor_days"]) == set(demo.IV_TENORS)
    thirty = frame[frame["tenor_days"] == 30].reset_index(drop=True)
    idx = np.searchsorted(sc.history.dates, thirty["date"].to_numpy().astype("datetime64[D]"))
    cond = np.sqrt(252 * sc.history.cond_var[idx])
    assert np.corrcoef(thirty["atm_iv"], cond)[0, 1] > 0.8
    assert (frame["p"] > frame["atm_iv"]).all() and (frame["c"] < frame["atm_iv"]).all()


def test_track_with_no_arguments_works_on_the_demo(capsys):
    assert main(["track"]) == 0
    out = capsys.readouterr().out
    for t in demo.IV_TENORS:
        assert f"{t}d" in out
    assert "Brier" in out and "Newey–West" in out and "not advice" in out


def test_json_document(record):
    from optbench.report.track import track_json
    doc = json.loads(track_json(record))
    assert doc["schema"] == "optbench.track/1"
    assert doc["underlying"] == "ZPHX" and doc["asof"] == "2026-11-27"
    assert [t["tenor_days"] for t in doc["tenors"]] == list(demo.IV_TENORS)
    t = doc["tenors"][0]
    for key in ("counts", "gap_by_verdict", "hit_rate_rich", "hit_rate_cheap", "brier",
                "reliability", "mz_implied", "mz_forecast", "encompassing",
                "payoff_by_verdict", "today", "lags"):
        assert key in t
    assert set(t["encompassing"]["coef"]) == {"const", "implied_var", "forecast_var"}
    assert len(doc["observations"]) == doc["quality"]["rows_used"]
    assert doc["quality"]["rows_in"] == doc["quality"]["rows_used"] + sum(
        doc["quality"]["rejected"].values())
    assert doc["caution"] and doc["method"]["band"]


def test_every_view_reads_the_same_numbers(record, tmp_path):
    from optbench.report import track as view
    csv = view.track_csv(record, "tenors")
    frame = pd.read_csv(io.StringIO(csv))   # header on line 1, pandas defaults
    t0 = record.tenors[0]
    assert frame.loc[0, "hit_rate_rich"] == pytest.approx(t0.hit_rate_rich, rel=1e-12)
    assert frame.loc[0, "brier"] == pytest.approx(t0.brier, rel=1e-12)
    obs = pd.read_csv(io.StringIO(view.track_csv(record, "observations")))
    assert len(obs) == len(record.observations)
    from openpyxl import load_workbook
    wb = load_workbook(io.BytesIO(view.track_xlsx(record)), read_only=True)
    assert {"Tenors", "Verdicts", "Reliability", "Regressions", "Observations",
            "Refits", "Notes"} <= set(wb.sheetnames)
    tenors = pd.read_excel(io.BytesIO(view.track_xlsx(record)), sheet_name="Tenors")
    assert tenors.loc[0, "brier"] == pytest.approx(t0.brier, rel=1e-12)   # table at A1
    md = view.track_markdown(record)
    assert "| 30d |" in md and record.caution in md
    html = view.track_html(record)
    assert html.count("data:image/png;base64,") == len(record.tenors)


def _scenario(tmp_path: Path, iv_text: str | None) -> Path:
    folder = tmp_path / "sc"
    folder.mkdir()
    shutil.copy(FOLDER / "history.csv", folder)
    shutil.copy(FOLDER / "meta.toml", folder)
    if iv_text is not None:
        (folder / "iv_history.csv").write_text(iv_text)
    return folder


def _iv(dates, tenor=30, vol=0.2) -> str:
    return "date,tenor_days,atm_iv\n" + "".join(f"{d},{tenor},{vol}\n" for d in dates)


def _bad(capsys, argv, *needles):
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "Traceback" not in err, err
    for n in needles:
        assert n in err, err
    return err


def test_no_overlap_with_the_price_history(tmp_path, capsys):
    days = pd.bdate_range("1995-01-02", periods=60).strftime("%Y-%m-%d")
    sc = _scenario(tmp_path, _iv(days))
    _bad(capsys, ["track", str(sc)], "iv_history.csv", "do not overlap")


def test_too_few_dates_says_how_many_are_needed(tmp_path, capsys):
    days = pd.bdate_range("2025-03-03", periods=12).strftime("%Y-%m-%d")
    sc = _scenario(tmp_path, _iv(days))
    _bad(capsys, ["track", str(sc)], "too few dates", "at least 40 needed")


def test_tenors_longer_than_the_history_can_check(tmp_path, capsys):
    days = pd.bdate_range("2025-03-03", periods=60).strftime("%Y-%m-%d")
    sc = _scenario(tmp_path, _iv(days, tenor=1200))
    _bad(capsys, ["track", str(sc)], "no tenor can be checked", "2026-11-27")


def test_conflicting_duplicate_dates(tmp_path, capsys):
    days = list(pd.bdate_range("2025-03-03", periods=60).strftime("%Y-%m-%d"))
    text = _iv(days) + f"{days[5]},30,0.25\n"
    sc = _scenario(tmp_path, text)
    _bad(capsys, ["track", str(sc)], "given twice with different vols")


def test_missing_iv_history_and_bad_store(tmp_path, capsys):
    sc = _scenario(tmp_path, None)
    _bad(capsys, ["track", str(sc)], "no iv_history.csv", "--iv-history")
    bad = tmp_path / "bad.sqlite"
    bad.write_bytes(b"not a database" * 50)
    _bad(capsys, ["track", str(FOLDER), "--store", str(bad)], "not a readable record store")


def test_compare_record_appends_and_a_locked_store_loses_nothing(tmp_path, capsys,
                                                                 monkeypatch):
    path = tmp_path / "records.sqlite"
    assert main(["compare", str(FOLDER), "--record", str(path), "-f", "json",
                 "-o", str(tmp_path / "c.json")]) == 0
    assert "recorded 8 expiries of ZPHX 2026-11-27" in capsys.readouterr().err
    from optbench.track.store import read_iv_history, read_records
    iv = read_iv_history(path, "ZPHX")
    doc = json.loads((tmp_path / "c.json").read_text())
    np.testing.assert_array_equal(iv.frame["atm_iv"], [e["atm_iv"] for e in doc["expiries"]])
    before = read_records(path)
    holder = sqlite3.connect(path, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")          # another program is writing
    monkeypatch.setattr("optbench.track.store.DEFAULT_TIMEOUT", 0.2)
    try:
        _bad(capsys, ["compare", str(FOLDER), "--record", str(path), "-f", "json",
                      "-o", str(tmp_path / "c2.json")], "locked by another program",
             "nothing was written")
    finally:
        holder.execute("ROLLBACK")
        holder.close()
    assert not (tmp_path / "c2.json").exists()
    after = read_records(path)
    assert before[0].equals(after[0]) and before[1].equals(after[1])
    # one comparison on one date: nothing can be checked yet -> one line, exit 2
    _bad(capsys, ["track", str(FOLDER), "--store", str(path)], "no tenor can be checked")


def test_file_and_store_together_count_every_row(tmp_path, capsys):
    """A recorded comparison beside the implied-vol file: every row is counted, the
    store's new tenors are shown, and the ones the history cannot check are said."""
    path = tmp_path / "records.sqlite"
    assert main(["compare", str(FOLDER), "--record", str(path), "-f", "json",
                 "-o", str(tmp_path / "c.json")]) == 0
    capsys.readouterr()
    assert main(["track", str(FOLDER), "--iv-history", str(FOLDER / "iv_history.csv"),
                 "--store", str(path), "-f", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    n_file = (FOLDER / "iv_history.csv").read_text().count("\n") - 1
    q = doc["quality"]
    assert q["rows_in"] == n_file + 8
    assert q["rows_in"] == q["rows_used"] + sum(q["rejected"].values())
    assert doc["iv_sources"] == [str(FOLDER / "iv_history.csv"), str(path)]
    unchecked = [t["tenor_days"] for t in doc["tenors"] if t["n_checked"] == 0]
    assert unchecked and all(any(f"tenor {d} days: no expiry" in w for w in doc["warnings"])
                             for d in unchecked)
