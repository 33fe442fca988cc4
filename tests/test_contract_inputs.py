"""``--style`` and ``--multiplier`` on every command that loads a chain, and every
output naming the style, multiplier, spot and as-of date it used and where each
came from (file, meta.toml, option, default)."""
from __future__ import annotations

import io
import json
import shutil
from pathlib import Path

import openpyxl
import pandas as pd
import pytest

from optbench.cli import main
from optbench.data.chain import load_chain

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "chains" / "ZPHX"

HEAD = "quote_date,underlying_price,expiry,strike,type,bid,ask"
ROWS = ["2026-11-27,100,2026-12-18,100,C,2.00,2.20",
        "2026-11-27,100,2026-12-18,100,P,1.80,2.00"]


def _chain(tmp_path: Path, extra_header: str = "", extra: tuple[str, ...] = ("", "")) -> Path:
    path = tmp_path / "chain.csv"
    path.write_text("\n".join([HEAD + extra_header]
                              + [r + e for r, e in zip(ROWS, extra)]) + "\n")
    return path


def _read_csv(text: str) -> pd.DataFrame:
    """The CSV's table without its note line (a ``#`` line, quoted or not)."""
    lines = [ln for ln in text.splitlines() if not ln.lstrip('"').startswith("#")]
    return pd.read_csv(io.StringIO("\n".join(lines)))


# ------------------------------------------------------------------ the loader
@pytest.mark.parametrize("header, cells, meta, kwargs, style_src, mult_src", [
    (",style,multiplier", (",american,10", ",american,10"), {}, {}, "file", "file"),
    (",style,multiplier", (",american,10", ",,"), {"style": "european", "multiplier": 50},
     {}, "file+meta", "file+meta"),
    (",style", (",american", ","), {}, {}, "file+default", "default"),
    ("", ("", ""), {"style": "american", "multiplier": 10}, {}, "meta", "meta"),
    ("", ("", ""), {}, {}, "default", "default"),
    (",style,multiplier", (",american,10", ",american,10"), {},
     {"style": "european", "multiplier": 25}, "caller", "caller"),
])
def test_the_chain_records_where_style_and_multiplier_came_from(
        tmp_path, header, cells, meta, kwargs, style_src, mult_src):
    chain = load_chain(_chain(tmp_path, header, cells), meta=meta, **kwargs)
    assert (chain.style_source, chain.multiplier_source) == (style_src, mult_src)
    if kwargs:
        assert set(chain.quotes["style"]) == {kwargs["style"]}
        assert set(chain.quotes["multiplier"]) == {kwargs["multiplier"]}


# ------------------------------------------------------------------ compare
@pytest.fixture(scope="module")
def european(tmp_path_factory):
    """The demo compared as it is (style and multiplier from the chain file)."""
    out = tmp_path_factory.mktemp("eu") / "compare.json"
    assert main(["compare", str(DEMO), "--format", "json", "-o", str(out)]) == 0
    return json.loads(out.read_text())


def test_compare_names_the_sources_of_style_and_multiplier(european):
    assert european["style"] == "european" and european["multiplier"] == 100
    assert european["sources"]["style"] == "file"
    assert european["sources"]["multiplier"] == "file"
    assert european["sources"]["spot"] == "file" and european["sources"]["asof"] == "file"


def test_compare_style_american_reaches_the_pricing(european, tmp_path):
    """An American option is worth at least its European counterpart (Hull, *Options,
    Futures, and Other Derivatives*, ch. 11), so the same quotes imply a vol no higher
    when read as American; with a dividend yield and a rate both calls and puts carry
    some early-exercise value, so the ATM vols come out lower somewhere."""
    out = tmp_path / "am.json"
    assert main(["compare", str(DEMO), "--style", "american", "--format", "json",
                 "-o", str(out)]) == 0
    american = json.loads(out.read_text())
    assert american["style"] == "american" and american["sources"]["style"] == "caller"
    eu = [e["atm_iv"] for e in european["expiries"]]
    am = [e["atm_iv"] for e in american["expiries"]]
    assert all(a <= e + 1e-4 for a, e in zip(am, eu)), (am, eu)
    assert any(a < e - 1e-4 for a, e in zip(am, eu))


def test_every_compare_output_says_which_inputs_it_used(tmp_path, capsys):
    args = [str(DEMO), "--multiplier", "10", "--paths", "200"]
    want = ("spot 5,206.19 (file)", "as of 2026-11-27 (file)", "european (file)",
            "multiplier 10 (option)")
    for fmt in ("table", "md", "html", "csv"):
        out = tmp_path / f"c.{fmt}"
        assert main(["compare", *args, "--format", fmt, "-o", str(out)]) == 0
        # a CSV holds its table alone; the inputs line is in its notes sidecar
        text = (tmp_path / "c.csv.meta.json").read_text() if fmt == "csv" \
            else out.read_text()
        if fmt == "html":
            text = text.replace("&#x27;", "'")
        assert all(w in text for w in want), (fmt, [w for w in want if w not in text])
    # CSV: the table reads with pandas' defaults
    frame = pd.read_csv(tmp_path / "c.csv")
    assert len(frame) >= 7
    out = tmp_path / "c.xlsx"
    assert main(["compare", *args, "--format", "xlsx", "-o", str(out)]) == 0
    book = openpyxl.load_workbook(out, read_only=True)
    cells = [str(c) for row in book["Notes"].iter_rows(values_only=True) for c in row
             if c is not None]
    assert any(all(w in c for w in want) for c in cells)
    out = tmp_path / "c.json"
    assert main(["compare", *args, "--format", "json", "-o", str(out)]) == 0
    doc = json.loads(out.read_text())
    assert doc["multiplier"] == 10 and doc["sources"]["multiplier"] == "caller"


# ------------------------------------------------------------------ hedge
def test_hedge_multiplier_sets_the_contract_count_and_is_named(tmp_path, capsys):
    """Contracts = beta x portfolio value / (multiplier x index level), the usual
    count for index-option portfolio insurance (Hull, *Options, Futures, and Other
    Derivatives*, ch. 17), rounded to a whole contract."""
    base = [str(DEMO), "--portfolio", "10000000", "--days", "91", "--paths", "500"]
    docs = {}
    for mult in (None, 10):
        out = tmp_path / f"h{mult}.json"
        extra = [] if mult is None else ["--multiplier", str(mult)]
        assert main(["hedge", *base, *extra, "--format", "json", "-o", str(out)]) == 0
        docs[mult] = json.loads(out.read_text())
    spot = docs[None]["spot"]
    assert docs[None]["contracts"] == round(10_000_000 / (100 * spot))
    assert docs[10]["contracts"] == round(10_000_000 / (10 * spot))
    assert docs[None]["sources"]["multiplier"] == "file"
    assert docs[10]["sources"]["multiplier"] == "caller" and docs[10]["multiplier"] == 10
    assert docs[10]["style"] == "european" and docs[10]["sources"]["style"] == "file"
    for fmt in ("table", "md", "html", "csv"):
        out = tmp_path / f"h.{fmt}"
        assert main(["hedge", *base, "--multiplier", "10", "--format", fmt,
                     "-o", str(out)]) == 0
        # a CSV holds its table alone; the inputs line is in its notes sidecar
        text = (tmp_path / "h.csv.meta.json").read_text() if fmt == "csv" \
            else out.read_text()
        assert "multiplier 10 (option)" in text, fmt


# ------------------------------------------------------------------ screen
@pytest.fixture(scope="module")
def small_universe(tmp_path_factory):
    folder = tmp_path_factory.mktemp("u")
    for code in ("A", "B"):
        shutil.copytree(DEMO, folder / code)
    # B's chain loses its style and multiplier columns: meta.toml supplies them
    chain = pd.read_csv(folder / "B" / "chain.csv", dtype=str, keep_default_na=False)
    chain.drop(columns=["style", "multiplier"]).to_csv(folder / "B" / "chain.csv",
                                                       index=False)
    return folder


def test_screen_rows_carry_style_multiplier_and_their_sources(small_universe, capsys):
    assert main(["screen", str(small_universe), "--workers", "1", "--tenors", "30",
                 "--paths", "200", "--format", "json"]) == 0
    rows = {r["folder"][-1]: r for r in json.loads(capsys.readouterr().out)["rows"]}
    assert rows["A"]["style"] == "european" and rows["A"]["multiplier"] == 100
    assert "style file" in rows["A"]["sources"]
    assert "style meta.toml" in rows["B"]["sources"]
    assert "multiplier meta.toml" in rows["B"]["sources"]
    assert rows["A"]["spot"] == pytest.approx(5206.19) and rows["A"]["asof"] == "2026-11-27"

    assert main(["screen", str(small_universe), "--workers", "1", "--tenors", "30",
                 "--paths", "200", "--multiplier", "50", "--style", "european"]) == 0
    table = capsys.readouterr().out
    assert "multiplier 50" in table and "style option" in table
    assert main(["screen", str(small_universe), "--workers", "1", "--tenors", "30",
                 "--paths", "200", "--multiplier", "50", "--format", "csv"]) == 0
    frame = _read_csv(capsys.readouterr().out)
    assert set(frame["multiplier"]) == {50}
    assert frame["sources"].str.contains("multiplier option").all()


# ------------------------------------------------------------------ open and check
def test_open_passes_style_and_multiplier_to_the_workbench(monkeypatch):
    from optbench.tui import app as tui_app
    seen = {}

    class Stop(Exception):
        pass

    def fake_make_app(*args, **kwargs):
        seen.update(kwargs)
        raise Stop

    monkeypatch.setattr(tui_app, "make_app", fake_make_app)
    with pytest.raises(Stop):
        main(["open", str(DEMO), "--style", "american", "--multiplier", "10"])
    assert seen["style"] == "american" and seen["multiplier"] == 10
    monkeypatch.undo()
    # the real factory hands them to the loader's overrides
    wb = tui_app.make_app(DEMO, style="american", multiplier=10.0)
    overrides = wb.inputs.settings.overrides()
    assert overrides["style"] == "american" and overrides["multiplier"] == 10.0


@pytest.mark.parametrize("bad", ["0", "-100", "nan", "inf"])
def test_a_multiplier_that_is_not_positive_is_a_one_line_error(bad, capsys):
    with pytest.raises(SystemExit) as exc:
        main(["compare", str(DEMO), "--multiplier", bad])
    assert exc.value.code == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "--multiplier" in err


def test_check_names_style_and_multiplier_sources(capsys):
    assert main(["check", str(DEMO), "--format", "json", "--style", "american"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["sources"]["style"] == "caller" and doc["sources"]["multiplier"] == "file"
    assert main(["check", str(DEMO), "--multiplier", "10"]) == 0
    assert "multiplier 10 [caller]" in capsys.readouterr().out
