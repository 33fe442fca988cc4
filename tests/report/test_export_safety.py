"""Every CSV and XLSX export is safe to open in a spreadsheet, opens with default
settings, and no output ever replaces an input.

Source for the formula check: OWASP, "CSV Injection" — a spreadsheet runs a cell
whose text starts with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return; the
defence is a leading ``'``. The scan below reads every cell of every CSV (Python's
``csv`` module) and every cell of every sheet (openpyxl) that the commands write from
a chain, history and universe full of such cells, and finds none left.
"""
from __future__ import annotations

import csv
import io
import json
import os
import shutil
from pathlib import Path

import pandas as pd
import pytest

from optbench.cli import main

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"

#: formula-like text, as OWASP's guidance lists the leading characters
HOSTILE = ['=HYPERLINK("http://example.invalid/x","click")', "+cmd|' /C calc'!A0",
           "@SUM(1+1)*cmd|' /C calc'!A0", "\t=1+2", "-2+3+cmd|' /C calc'!A0", "\r=1+1"]
TRIGGERS = ("=", "+", "-", "@", "\t", "\r")


def formula_like(text: str) -> bool:
    """True for text a spreadsheet would run (a plain negative number is not)."""
    if not text or text[0] not in TRIGGERS:
        return False
    if text[0] == "-":
        try:
            float(text)
            return False
        except ValueError:
            return True
    return True


def scan_csv(path: Path) -> list[str]:
    with open(path, newline="", encoding="utf-8") as handle:
        return [cell for row in csv.reader(handle) for cell in row if formula_like(cell)]


def scan_xlsx(path: Path) -> list[str]:
    from openpyxl import load_workbook
    bad = []
    wb = load_workbook(path)          # not read-only: data_type shows formulas
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                if cell.data_type == "f":
                    bad.append(f"{ws.title}!{cell.coordinate} formula {cell.value!r}")
                elif isinstance(cell.value, str) and formula_like(cell.value):
                    bad.append(f"{ws.title}!{cell.coordinate} {cell.value!r}")
    return bad


def _hostile_scenario(folder: Path) -> Path:
    shutil.copytree(DEMO, folder)
    chain = pd.read_csv(folder / "chain.csv", dtype=str, keep_default_na=False)
    bad = []
    for i, text in enumerate(HOSTILE):
        for field in ("strike", "bid", "type", "expiry", "symbol", "quote_date"):
            row = chain.iloc[40 + i].copy()
            row[field] = text
            row["last"] = text
            bad.append(row)
    chain = pd.concat([chain, pd.DataFrame(bad)], ignore_index=True)
    chain["underlying"] = HOSTILE[0]          # travels into every table's notes
    chain["volume"] = chain["volume"].where(chain.index % 7 != 0, HOSTILE[0])
    chain.to_csv(folder / "chain.csv", index=False)
    history = pd.read_csv(folder / "history.csv", dtype=str)
    rows = pd.DataFrame([[h, "1", "1", "1", "1"] for h in HOSTILE], columns=history.columns)
    pd.concat([history.iloc[:5], rows, history.iloc[5:]]).to_csv(folder / "history.csv",
                                                                 index=False)
    meta = (folder / "meta.toml").read_text().replace(
        'name = "Zephyr Composite Index"', 'name = "=HYPERLINK(\\"http://x\\",\\"ZPHX\\")"')
    (folder / "meta.toml").write_text(meta)
    return folder


@pytest.fixture(scope="module")
def hostile(tmp_path_factory) -> Path:
    return _hostile_scenario(tmp_path_factory.mktemp("hostile") / "ZPHX")


@pytest.fixture(scope="module")
def exports(hostile, tmp_path_factory):
    """Every command's CSV and XLSX exports of the hostile scenario."""
    out = tmp_path_factory.mktemp("exports")
    fast = ["--model", "gjr"]
    runs = {
        "check": ["check", str(hostile)],
        "compare": ["compare", str(hostile), *fast, "--paths", "300"],
        "strikes": ["compare", str(hostile), *fast, "--paths", "300", "--table", "strikes"],
        "hedge": ["hedge", str(hostile), *fast, "--paths", "300", "--portfolio", "1e7",
                  "--structure", "collar"],
        "legs": ["hedge", str(hostile), *fast, "--paths", "300", "--portfolio", "1e7",
                 "--table", "legs"],
        "fit": ["fit", str(hostile), *fast],
        "backtest": ["backtest", str(hostile), *fast],
    }
    files = {}
    for name, argv in runs.items():
        csv_path, xlsx_path, json_path = (out / f"{name}.{e}" for e in ("csv", "xlsx", "json"))
        assert main([*argv, "-o", str(csv_path), "-o", str(xlsx_path), "-o",
                     str(json_path)]) == 0, name
        files[name] = (csv_path, xlsx_path, json_path)
    return files


@pytest.fixture(scope="module")
def screen_exports(hostile, tmp_path_factory):
    universe = tmp_path_factory.mktemp("universe")
    shutil.copytree(hostile, universe / "ZPHX")
    shutil.copytree(DEMO, universe / "other")
    meta = universe / "other" / "meta.toml"
    meta.write_text(meta.read_text().replace('code = "ZPHX"', 'code = "@SUM(1+1)"'))
    out = tmp_path_factory.mktemp("screen")
    paths = [out / f"screen.{e}" for e in ("csv", "xlsx", "json", "md", "html")]
    argv = ["screen", str(universe), "--workers", "1", "--paths", "200", "--tenors", "91"]
    for p in paths:
        argv += ["-o", str(p)]
    assert main(argv) == 0
    return paths


def test_no_export_holds_a_formula_like_cell(exports, screen_exports):
    # OWASP "CSV Injection": no cell may start with = + - @ TAB CR (plain negative
    # numbers excepted), in any CSV or any sheet of any workbook
    found = {}
    for name, (csv_path, xlsx_path, _) in exports.items():
        found[f"{name}.csv"] = scan_csv(csv_path)
        found[f"{name}.xlsx"] = scan_xlsx(xlsx_path)
    found["screen.csv"] = scan_csv(screen_exports[0])
    found["screen.xlsx"] = scan_xlsx(screen_exports[1])
    assert {k: v[:3] for k, v in found.items() if v} == {}


def test_the_hostile_cells_did_reach_the_exports_neutralised(exports, screen_exports):
    # the scan above can fail: the hostile text is there, behind its quote
    text = exports["check"][0].read_text()
    for cell in HOSTILE[:5]:         # (a carriage return ends the line for the reader)
        assert "'" + cell.replace('"', '""') in text or "'" + cell in text, cell
    from openpyxl import load_workbook
    wb = load_workbook(exports["check"][1], read_only=True)
    cells = [c for row in wb["Rejected"].iter_rows(values_only=True) for c in row]
    assert "'" + HOSTILE[0] in cells
    notes = [c for row in load_workbook(exports["compare"][1], read_only=True)["Notes"]
             .iter_rows(values_only=True) for c in row]
    assert "'" + HOSTILE[0].upper() in notes      # the loader upper-cases codes
    screen_cells = [c for row in csv.reader(io.StringIO(screen_exports[0].read_text()))
                    for c in row]
    assert "'@SUM(1+1)" in screen_cells
    assert "'" + '=HYPERLINK("http://x","ZPHX")' in screen_cells


def test_the_rejected_rows_export_has_every_rejected_row(exports):
    csv_path, xlsx_path, json_path = exports["check"]
    doc = json.loads(json_path.read_text())
    frame = pd.read_csv(csv_path)                     # default settings
    assert len(frame) == sum(doc["quality"]["rejected"].values())
    assert list(frame.columns[:3]) == ["line", "reason", "detail"]
    sheet = pd.read_excel(xlsx_path)                  # default settings: first sheet
    assert sheet["line"].tolist() == frame["line"].tolist()
    assert sheet["reason"].tolist() == frame["reason"].tolist()


# ----------------------------------------------------------- default read-back
def _num(values):
    return [float("nan") if v is None else float(v) for v in values]


def test_every_export_reads_back_with_default_settings(exports, screen_exports):
    # compare: per-expiry CSV and first sheet equal the JSON
    csv_path, xlsx_path, json_path = exports["compare"]
    doc = json.loads(json_path.read_text())
    for frame in (pd.read_csv(csv_path), pd.read_excel(xlsx_path)):
        assert len(frame) == len(doc["expiries"])
        assert pd.to_datetime(frame["expiry"]).dt.strftime("%Y-%m-%d").tolist() == \
            [e["expiry"] for e in doc["expiries"]]
        for key in ("atm_iv", "forecast_vol", "forecast_low", "forecast_high", "forward"):
            assert frame[key].tolist() == pytest.approx(_num(e[key] for e in doc["expiries"]),
                                                        rel=1e-12, nan_ok=True), key
        assert frame["verdict"].tolist() == [e["verdict"] for e in doc["expiries"]]
    meta = json.loads(Path(str(csv_path) + ".meta.json").read_text())
    assert meta["notes"]["caution"] == doc["caution"]
    assert meta["notes"]["warnings"] == doc["warnings"]
    assert [c["name"] for c in meta["columns"]] == list(pd.read_csv(csv_path).columns)
    # compare strikes: every strike row
    csv_path, xlsx_path, json_path = exports["strikes"]
    doc = json.loads(json_path.read_text())
    strikes = pd.read_csv(csv_path)
    assert len(strikes) == len(doc["strikes"])
    assert strikes["iv_mid"].tolist() == pytest.approx(_num(r["iv_mid"] for r in doc["strikes"]),
                                                       rel=1e-12, nan_ok=True)
    sheet = pd.read_excel(xlsx_path, sheet_name="Strikes")
    assert sheet["strike"].tolist() == [r["strike"] for r in doc["strikes"]]
    assert sheet["is_call"].tolist() == [r["is_call"] for r in doc["strikes"]]
    # hedge: summary items
    csv_path, xlsx_path, json_path = exports["hedge"]
    doc = json.loads(json_path.read_text())
    for frame in (pd.read_csv(csv_path), pd.read_excel(xlsx_path)):
        items = frame.set_index("item")["value"]
        for key in ("contracts", "premium_paid", "expected_payoff", "cost_pct"):
            assert float(items[key]) == pytest.approx(doc[key], rel=1e-12), key
        assert items["caution"] == doc["caution"]
    legs = pd.read_csv(exports["legs"][0])
    doc = json.loads(exports["legs"][2].read_text())
    assert legs["strike"].tolist() == [leg["strike"] for leg in doc["legs"]]
    # fit: the term structure
    csv_path, xlsx_path, json_path = exports["fit"]
    doc = json.loads(json_path.read_text())
    for frame in (pd.read_csv(csv_path), pd.read_excel(xlsx_path)):
        assert frame["trading_days"].tolist() == [r["trading_days"] for r in doc["term_structure"]]
        assert frame["forecast_vol"].tolist() == pytest.approx(
            [r["forecast_vol"] for r in doc["term_structure"]], rel=1e-12)
    # backtest: one row per out-of-sample day
    csv_path, xlsx_path, json_path = exports["backtest"]
    doc = json.loads(json_path.read_text())
    for frame in (pd.read_csv(csv_path), pd.read_excel(xlsx_path)):
        assert len(frame) == doc["n_out"]
        assert int(frame["outside_band"].sum()) == doc["outside_band"]
    notes = pd.read_excel(xlsx_path, sheet_name="Notes")
    assert list(notes.columns) == ["item", "value"]
    assert doc["caution"] in notes["value"].tolist()
    # screen: the ranked rows
    doc = json.loads(screen_exports[2].read_text())
    for frame in (pd.read_csv(screen_exports[0]), pd.read_excel(screen_exports[1])):
        assert len(frame) == len(doc["rows"])
        assert frame["atm_iv"].tolist() == pytest.approx(_num(r["atm_iv"] for r in doc["rows"]),
                                                         rel=1e-12, nan_ok=True)
    assert doc["caution"] in screen_exports[3].read_text()
    page = screen_exports[4].read_text()
    assert page.startswith("<!doctype html>") and "not advice" in page
    assert page.count("<tr>") == len(doc["rows"]) + 1


def test_every_workbook_has_its_table_at_a1_and_a_notes_sheet(exports, screen_exports):
    from openpyxl import load_workbook
    books = [x for _, x, _ in exports.values()] + [screen_exports[1]]
    for path in books:
        wb = load_workbook(path, read_only=True)
        assert wb.sheetnames[-1] == "Notes", path.name
        first = next(wb.worksheets[0].iter_rows(max_row=1, values_only=True))
        assert first[0] is not None and " " not in str(first[0]), path.name   # a field name
        notes = {r[0] for r in wb["Notes"].iter_rows(min_row=2, values_only=True)}
        assert "table" in notes and "units" in notes, path.name


# ----------------------------------------------------------- outputs never over inputs
@pytest.fixture
def scenario(tmp_path) -> Path:
    folder = tmp_path / "ZPHX"
    shutil.copytree(DEMO, folder)
    return folder


def _refused(argv, *protected: Path, capsys):
    before = {p: p.read_bytes() for p in protected}
    assert main(argv) == 2, argv
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err, err
    assert "-o" in err and "elsewhere" in err, err
    for p, data in before.items():
        assert p.read_bytes() == data, f"{p} changed"


@pytest.mark.parametrize("command", ["check", "fit", "backtest", "compare", "hedge"])
def test_o_naming_an_input_file_is_refused(command, scenario, tmp_path, capsys):
    chain, history, meta = (scenario / n for n in ("chain.csv", "history.csv", "meta.toml"))
    extra = ["--portfolio", "1e7"] if command == "hedge" else []
    first = chain if command in ("check", "compare", "hedge") else history
    files = (chain, history, meta)
    # the input file itself, given as a file
    _refused([command, str(first), *extra, "-o", str(first)], *files, capsys=capsys)
    # every file of the scenario folder, given as a folder
    for target in files:
        _refused([command, str(scenario), *extra, "-o", str(target)], *files, capsys=capsys)
    # a relative spelling, a symbolic link and a hard link of the input
    rel = os.path.relpath(first)
    _refused([command, str(first), *extra, "-o", rel], *files, capsys=capsys)
    link = tmp_path / "link.csv"
    link.symlink_to(first)
    _refused([command, str(first), *extra, "-o", str(link)], *files, capsys=capsys)
    hard = tmp_path / "hard.csv"
    os.link(first, hard)
    _refused([command, str(first), *extra, "-o", str(hard)], *files, capsys=capsys)
    # among several outputs
    _refused([command, str(scenario), *extra, "-o", str(tmp_path / "ok.json"), "-o",
              str(history)], *files, capsys=capsys)
    assert not (tmp_path / "ok.json").exists()       # refused before anything runs


def test_o_naming_the_history_given_apart_is_refused(scenario, tmp_path, capsys):
    history = tmp_path / "prices.csv"
    shutil.copy(scenario / "history.csv", history)
    for command in ("compare", "hedge"):
        extra = ["--portfolio", "1e7"] if command == "hedge" else []
        _refused([command, str(scenario / "chain.csv"), "--history", str(history), *extra,
                  "-o", str(history)], history, capsys=capsys)


def test_o_over_a_file_of_a_screened_universe_is_refused(scenario, tmp_path, capsys):
    universe = tmp_path / "universe"
    universe.mkdir()
    member = universe / "ZPHX"
    shutil.move(str(scenario), member)
    _refused(["screen", str(universe), "--workers", "1", "-o", str(member / "meta.toml")],
             member / "meta.toml", capsys=capsys)
    _refused(["screen", str(universe), "--workers", "1", "-o", str(member / "chain.csv")],
             member / "chain.csv", capsys=capsys)


def test_o_writing_a_new_scenario_file_beside_the_chain_is_refused(tmp_path, capsys):
    folder = tmp_path / "data"
    folder.mkdir()
    shutil.copy(DEMO / "chain.csv", folder / "zphx_chain.csv")
    assert main(["check", str(folder / "zphx_chain.csv"), "-o",
                 str(folder / "history.csv")]) == 2
    assert "elsewhere" in capsys.readouterr().err
    assert not (folder / "history.csv").exists()
    # an ordinary new file beside the input is fine
    assert main(["check", str(folder / "zphx_chain.csv"), "-o",
                 str(folder / "report.json")]) == 0


def test_the_default_demo_scenario_is_an_input_too():
    # compare and hedge without CHAIN read the bundled demo folder: its files are
    # inputs as well (checked without running the command)
    import argparse

    from optbench.commands.compare import check_file_formats
    from optbench.errors import InputError
    from optbench.cli import build_parser
    args = build_parser().parse_args(["compare", "-o", str(DEMO / "history.csv")])
    assert isinstance(args, argparse.Namespace)
    with pytest.raises(InputError, match="elsewhere"):
        check_file_formats(args)


def test_the_workbench_export_refuses_the_input_chain(tmp_path):
    from optbench.errors import InputError
    from optbench.tui.dialogs.requests import ExportRequest
    from optbench.tui.export import export

    class Result:            # only the input paths matter: refused before rendering
        source = str(DEMO)
        history_source = None
    with pytest.raises(InputError, match="elsewhere"):
        export(Result(), None, ExportRequest("expiries", "csv", DEMO / "chain.csv"))


# ----------------------------------------------------------- several outputs, one run
def test_several_outputs_from_one_run_each_by_its_extension(tmp_path, capsys):
    outs = [tmp_path / f"t.{e}" for e in ("csv", "xlsx", "md", "html", "json")]
    argv = ["compare", str(DEMO), "--model", "gjr", "--paths", "300"]
    for p in outs:
        argv += ["-o", str(p)]
    assert main(argv) == 0
    assert pd.read_csv(outs[0]).shape[0] == pd.read_excel(outs[1]).shape[0]
    assert outs[2].read_text().startswith("# ")
    assert outs[3].read_text().startswith("<!doctype html>")
    doc = json.loads(outs[4].read_text())
    assert len(doc["expiries"]) == pd.read_csv(outs[0]).shape[0]
    err = capsys.readouterr().err
    assert err.count("optbench: wrote") == 6        # five files and the CSV's notes


@pytest.mark.parametrize("argv, needle", [
    (["check", str(DEMO), "-o", "x.html"], "cannot write html"),
    (["check", str(DEMO), "-o", "a.csv", "-o", "b.dat"], "extension names no format"),
    (["check", str(DEMO), "-o", "a.csv", "-o", "a.csv"], "named twice"),
])
def test_output_plan_errors_are_one_line(argv, needle, capsys, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and needle in err


def test_a_csv_on_the_terminal_is_the_table_and_its_notes_go_to_stderr(capsys):
    assert main(["fit", str(DEMO), "--model", "gjr", "--format", "csv"]) == 0
    out, err = capsys.readouterr()
    frame = pd.read_csv(io.StringIO(out))
    assert list(frame.columns) == ["trading_days", "forecast_vol", "low", "high", "model",
                                   "dist"]
    assert "caution" in err and "not advice" in err
