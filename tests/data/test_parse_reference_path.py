"""The loaders' fast paths give what their straightforward paths give, cell for cell.

Dates: plain ``YYYY-MM-DD`` cells are read from their code points
(:func:`optbench.data.parse._plain_iso_dates`); the reference is the format search
every other cell goes through (:func:`optbench.data.parse._parse_by_format`, which
is ``pandas.to_datetime`` per format), run on *all* cells. The calendar check (month
lengths, leap years) is also compared with Python's ``datetime.date``.
"""
from __future__ import annotations

import datetime as _dt

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from optbench.data.parse import (DATE_MAX, DATE_MIN, _parse_by_format, _parse_unique,
                                 _plain_iso_dates, date_array, to_date)

EDGE_CELLS = ["2026-12-18", "2024-02-29", "2023-02-29", "2026-02-30", "2026-04-31",
              "2026-13-01", "2026-00-10", "2026-01-00", "1900-01-01", "1899-12-31",
              "2200-12-31", "2201-01-01", "0000-01-01", "9999-12-31", "2026-1-05",
              "2026-01-5 ", " 2026-01-05", "2026-01-05T10:30:00", "2026-01-05 16:00",
              "2026/01/05", "20260105", "01/05/2026", "05-Jan-2026", "2026-01-05Z",
              "2026_01_05", "２０２６-01-05", "2026-01-0x", "", " ", "nan", "2026-12-1八",
              "2000-02-29", "1900-02-29", "2100-02-29", "2096-02-29"]


def _reference(cells) -> np.ndarray:
    return _parse_by_format(pd.Series(list(cells), dtype=object)).to_numpy()


def test_edge_cells_match_the_format_search():
    got = _parse_unique(np.array(EDGE_CELLS, dtype=object))
    np.testing.assert_array_equal(got, _reference(EDGE_CELLS))
    plain, _ = _plain_iso_dates(np.array(EDGE_CELLS, dtype=object))
    assert plain.sum() == 6  # the fast path does take the plain, real, in-range ones


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(1850, 2250), st.integers(0, 13),
                          st.integers(0, 32)), min_size=1, max_size=40),
       st.lists(st.sampled_from(EDGE_CELLS), max_size=5))
def test_random_dates_match_the_format_search_and_the_calendar(ymd, extra):
    ymd = list(dict.fromkeys(ymd))              # the loaders pass distinct cells
    cells = [f"{y:04d}-{m:02d}-{d:02d}" for y, m, d in ymd]
    cells += [c for c in dict.fromkeys(extra) if c not in cells]
    got = _parse_unique(np.array(cells, dtype=object))
    np.testing.assert_array_equal(got, _reference(cells))
    for (y, m, d), value in zip(ymd, got):
        try:
            day = np.datetime64(_dt.date(y, m, d), "D")   # Python's calendar
            want = day if DATE_MIN <= day <= DATE_MAX else np.datetime64("NaT")
        except ValueError:
            want = np.datetime64("NaT")
        assert (np.isnat(value) and np.isnat(want)) or value == want


def test_columns_of_every_kind_match_the_series_parser():
    text = pd.Series(["2026-12-18", None, "12/18/2026", "2026-12-18", " ", "bad"])
    for col in (text, text.astype(object), text.astype("string"),
                pd.Series([20261218, np.nan, 20270115.0]),
                pd.Series(pd.to_datetime(["2026-12-18", None]))):
        np.testing.assert_array_equal(date_array(col), to_date(col).to_numpy())
    want = _reference(["2026-12-18", "12/18/2026", " ", "bad"])
    np.testing.assert_array_equal(date_array(text)[[0, 2, 4, 5]], want)


BLANKISH = ["a", " ", "", None, "\u00a0", "\t x", "\u2003", "nan", "\x0b", "\x1c", "\x85",
            " C ", "\u3000"]


def test_present_on_pyarrow_text_matches_the_series_strip():
    """The pyarrow path of ``present`` against ``Series.str.strip() != ""`` (the
    reference path), on every text storage."""
    from optbench.data.parse import present

    for dtype in ("str", "string[pyarrow]", "string[python]", object):
        col = pd.Series(BLANKISH, dtype=dtype)
        has = col.notna().to_numpy(dtype=bool)
        text = col[has].astype(str).str.strip()
        want = has.copy()
        want[has] = (text != "").to_numpy(dtype=bool)
        np.testing.assert_array_equal(present(col), want, err_msg=str(dtype))


@settings(max_examples=80, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(["2026-01-16", "2026-02-20", "NaT"]),
                          st.sampled_from([95.0, 100.0, 105.0, float("nan")]),
                          st.booleans(), st.sampled_from([100.0, 10.0, float("nan")])),
                min_size=1, max_size=60))
def test_first_of_contract_matches_pandas_duplicated(rows):
    """Duplicate contracts found by integer codes against
    ``pandas.DataFrame.duplicated`` and ``groupby(...).transform("first")`` (the
    reference path; missing values equal to each other)."""
    from optbench.data.validate import first_of_contract

    keys = pd.DataFrame(rows, columns=["expiry", "strike", "is_call", "multiplier"])
    keys["expiry"] = pd.to_datetime(keys["expiry"]).astype("datetime64[ns]")
    cols = [keys[c].to_numpy() for c in keys.columns]
    first = first_of_contract(*cols)
    dup = keys.duplicated(keep="first").to_numpy()
    np.testing.assert_array_equal(first != np.arange(len(keys)), dup)
    line = np.arange(len(keys)) + 2
    want = keys.assign(line=line).groupby(list(keys.columns), sort=False, dropna=False)[
        "line"].transform("first").to_numpy()
    np.testing.assert_array_equal(line[first], want)


def _reference_history_rows(dates: np.ndarray, close: np.ndarray, lines: np.ndarray):
    """The pandas path the history loader took for its kept rows (reference): a frame
    sorted stably by date, ``duplicated(keep="last")``, the close's range per date by
    ``groupby(...).transform``."""
    df = pd.DataFrame({"date": dates, "close": close, "line": lines})
    if not df["date"].is_monotonic_increasing:
        df = df.sort_values("date", kind="stable")
    dup = df["date"].duplicated(keep="last").to_numpy()
    spread = df.groupby("date")["close"].transform(lambda c: c.max() - c.min())
    conflict = dup & (spread.to_numpy() > 0)
    df = df[~dup]
    return (df["date"].to_numpy().astype("datetime64[D]"), df["close"].to_numpy(),
            int((dup & ~conflict).sum()), int(conflict.sum()))


@pytest.mark.parametrize("seed", range(6))
def test_history_rows_match_the_frame_path(tmp_path, seed):
    """Unsorted, repeated and conflicting dates: kept dates, closes and drop counts of
    :func:`optbench.data.history.load_history` against the frame path."""
    from optbench.data.history import load_history

    rng = np.random.default_rng(seed)
    n = 300
    days = np.datetime64("2024-01-01") + rng.integers(0, 200, n)
    close = np.round(rng.uniform(90, 110, n), 2)
    repeat = rng.random(n) < 0.3                # some repeats copy an earlier close
    prev = rng.integers(0, n, n)
    days[repeat] = days[prev[repeat]]
    same = repeat & (rng.random(n) < 0.5)
    close[same] = close[prev[same]]
    if seed % 2:
        order = np.argsort(days, kind="stable")  # sorted files too
        days, close = days[order], close[order]
    pd.DataFrame({"date": days.astype(str), "close": close}).to_csv(tmp_path / "h.csv",
                                                                  index=False)
    hist = load_history(tmp_path / "h.csv")
    want_d, want_c, n_same, n_conflict = _reference_history_rows(
        days.astype("datetime64[ns]"), close, np.arange(n) + 2)
    np.testing.assert_array_equal(hist.dates, want_d)
    assert np.array_equal(hist.close.view(np.int64), want_c.view(np.int64))
    assert hist.dropped.get("duplicate_date", 0) == n_same
    assert hist.dropped.get("conflicting_date", 0) == n_conflict
    assert n_same + n_conflict > 0


TYPE_CELLS = ["C", "p", " Call", "PUT ", None, "", "x", "calls", "\u00a0c", "\u0130", "Puts"]


def test_call_codes_on_pyarrow_text_match_the_object_path():
    """Option types read from pyarrow storage by its kernels against the same column
    as Python objects through pandas' ``.str`` methods (the reference path)."""
    from optbench.data.parse import call_codes

    want = call_codes(pd.Series(TYPE_CELLS, dtype=object))
    np.testing.assert_array_equal(want, [1, 0, 1, 0, -1, -1, -1, 1, 1, -1, 0])
    for dtype in ("str", "string[pyarrow]", "string[python]"):
        np.testing.assert_array_equal(call_codes(pd.Series(TYPE_CELLS, dtype=dtype)), want)


@pytest.mark.parametrize("cells", [["ZPHX", " zphx", None, "", "ZPHX "],
                                   ["ZPHX", "QRTZ", "ZPHX"], [None, " "], ["qrtz"]])
def test_single_underlying_matches_the_counting(cells):
    """The one-underlying shortcut against ``value_counts`` of the stripped,
    upper-cased cells (the reference path)."""
    from optbench.data.chain import _single_underlying

    col = pd.Series(cells, dtype="str")
    und = col.astype("string").str.strip().str.upper()
    counts = und[und.notna() & (und != "")].value_counts()
    got = _single_underlying(col)
    if len(counts) == 1:
        assert got == str(counts.index[0])
    else:
        assert got is None                       # left to the counting


def test_osi_dates_match_pandas_to_datetime():
    """OCC symbol dates (Options Symbology Initiative: YYMMDD, years 20YY) read from
    code points against ``pandas.to_datetime("20" + cell, format="%Y%m%d")`` (the
    reference path), over every YYMMDD of three years and awkward cells."""
    from optbench.data.occ import _osi_dates

    days = [f"{y:02d}{m:02d}{d:02d}" for y in (0, 24, 99) for m in range(0, 14)
            for d in range(0, 33)]
    cells = np.array(days + ["2612", "26121", "2612188", "26-218", "٢٦١٢١٨", "2612 8",
                             "abcdef"], dtype=object)
    want = pd.to_datetime("20" + pd.Series(cells, dtype=object).astype(str),
                          format="%Y%m%d", errors="coerce").to_numpy(dtype="datetime64[ns]")
    got = _osi_dates(cells)
    np.testing.assert_array_equal(got, want)
    assert (~np.isnat(got[:len(days)])).sum() == 3 * 365 + 2   # 2000 and 2024 are leap years


def test_first_of_contract_recodes_wide_keys_like_pandas():
    """Six keys of 5,000 values each (more combinations than an int64 holds): the
    re-coding branch against ``pandas.DataFrame.duplicated`` (the reference path)."""
    from optbench.data.validate import first_of_contract

    rng = np.random.default_rng(11)
    cols = [rng.integers(0, 5000, 5000) for _ in range(6)]
    cols[1][:2500] = cols[1][2500:]
    for c in cols[2:]:
        c[:2500] = c[2500:]
    cols[0][:2500] = cols[0][2500:]
    first = first_of_contract(*cols)
    dup = pd.DataFrame(dict(enumerate(cols))).duplicated(keep="first").to_numpy()
    np.testing.assert_array_equal(first != np.arange(5000), dup)
    assert dup.sum() == 2500


STYLE_CELLS = ["european", " American", "E", "am ", None, "", "weird", "EUR", "\u00a0a"]


def test_styles_and_types_on_pyarrow_text_match_the_object_path():
    """Exercise styles and option types read from pyarrow storage against the same
    column as Python objects (the reference path)."""
    from optbench.data.parse import to_is_call, to_style

    for fn, cells in ((to_style, STYLE_CELLS), (to_is_call, TYPE_CELLS)):
        want = fn(pd.Series(cells, dtype=object))
        for dtype in ("str", "string[pyarrow]", "string[python]"):
            got = fn(pd.Series(cells, dtype=dtype))
            pd.testing.assert_series_equal(got, want)
    assert list(to_style(pd.Series(STYLE_CELLS, dtype="str"))) == [
        "european", "american", "european", "american", None, None, None, "european",
        "american"]


@pytest.mark.parametrize("kind", ["string", "large_string"])
def test_arrow_cells_read_as_python_strings(kind):
    """The distinct cells of a pyarrow text column (read from its bytes) give the dates
    the object path gives, edge cells, a NUL byte and a sliced array included; without
    NUL bytes the reference is also the format search on every cell (a trailing NUL is
    dropped by numpy's text arrays in the object path, and kept as it always was)."""
    import pyarrow as pa

    from optbench.data.parse import _parse_unique_arrow
    cells = EDGE_CELLS + ["2026-12-0\x00", "2026-12-04\x00", "１９９９-01-01"]
    for arr in (pa.array(cells, type=getattr(pa, kind)()),
                pa.array(["x"] + cells, type=getattr(pa, kind)()).slice(1)):
        got = _parse_unique_arrow(arr)
        np.testing.assert_array_equal(got, _parse_unique(np.array(cells, dtype=object)))
    clean = [c for c in cells if "\x00" not in c]
    np.testing.assert_array_equal(_parse_unique_arrow(pa.array(clean, type=getattr(pa, kind)())),
                                  _reference(clean))


@pytest.mark.parametrize("cells", [
    ["2026-12-18"] * 3 + ["2027-01-15"],                  # every cell plain: read at once
    ["2026-12-18", None, "2027-01-15"],                    # a missing cell
    ["2026-12-18", "2026-02-30", "2026-12-18"],            # not a calendar date
    ["2026-12-18", "12/18/2026", "2026-12-18 16:00"],      # other forms
    ["1899-12-31", "2026-12-18"], ["2026-12-18"]])
def test_text_column_on_pyarrow_reads_as_object_column(cells):
    """A pandas text column on pyarrow storage (pandas' default for text) gives the
    dates the same cells give as a plain object column (the factorize path)."""
    arrow_col = pd.Series(cells, dtype="str")
    object_col = pd.Series(cells, dtype=object)
    np.testing.assert_array_equal(date_array(arrow_col), date_array(object_col))


@pytest.mark.parametrize("cells", [
    ["C", "P", "call"], ["C", None], ["C", ""], ["C ", " P"], ["\u00a0", "C"],
    ["é", "C"], [" ", "  "], ["a\tb", "~"], ["x"]])
def test_presence_of_text_cells_is_python_strip(cells):
    """A cell of a text column on pyarrow storage holds something exactly when Python's
    ``str.strip`` leaves something of it (and it is not missing)."""
    from optbench.data.parse import present
    want = np.array([c is not None and c.strip() != "" for c in cells])
    np.testing.assert_array_equal(present(pd.Series(cells, dtype="str")), want)
    sliced = pd.Series(["x"] + cells, dtype="str").iloc[1:].reset_index(drop=True)
    np.testing.assert_array_equal(present(sliced), want)


@pytest.mark.parametrize("cells", [
    ["SYN1"] * 4, ["syn1 ", "SYN1", " Syn1"], ["A", "B"], ["A", None], ["", ""],
    [" "] * 3, ["é"] * 3, ["ab", "ab", "ba"], ["X"]])
def test_single_underlying_is_the_counted_one(cells):
    """The chain's single underlying, read from the distinct cells (all cells the same
    bytes compared at once), is the one counting the stripped, upper-cased non-blank
    cells finds (None when there is not exactly one)."""
    from optbench.data.chain import _single_underlying
    names = {c.strip().upper() for c in cells if c is not None and c.strip()}
    want = names.pop() if len(names) == 1 else None
    assert _single_underlying(pd.Series(cells, dtype="str")) == want
    sliced = pd.Series(["Q"] + cells, dtype="str").iloc[1:].reset_index(drop=True)
    assert _single_underlying(sliced) == want
