"""The loaders' shortcuts give what their general paths give, to the last bit.

Each shortcut of the chain and history loaders (a plain ``date,close`` file read from
its bytes, one-byte option types, a single plain underlying, dates read run by run,
a chain known free of duplicates from its order, the empty rejected frame built once,
numpy number columns, the few-expiry match) is switched off here and the same files
are loaded both ways: the repository's test files (every layout the loader tests
write, the bundled demo, a synthetic screen universe as the benchmarks write it)
and generated ones. Frames are compared with exact dtypes, notes and errors as text.
The outside reference for the closes is pandas' own CSV reader.
"""
from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from conftest import random_quotes, write_layouts
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import optbench.data.chain as chain_mod
import optbench.data.history as history_mod
import optbench.data.parse as parse_mod
import optbench.data.validate as validate_mod
from optbench.analysis.compare import _isin_few
from optbench.data.chain import load_chain
from optbench.data.history import _is_header, load_history
from optbench.data.columns import map_history_columns
from optbench.data.plain_csv import read_plain_history
from optbench.data.validate import _contracts_distinct, first_of_contract
from optbench.errors import InputError

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests" / "benchmarks"))


class _NoStore(dict):
    """A cache that keeps nothing: every empty rejected frame is built afresh."""

    def __setitem__(self, key, value):
        pass


@pytest.fixture
def general_paths(monkeypatch):
    """A function that runs a loader with every shortcut switched off."""
    def run(fn, *args, **kwargs):
        with monkeypatch.context() as m:
            m.setattr(history_mod, "read_plain_history", lambda *a, **k: None)
            m.setattr(parse_mod, "_one_byte_codes", lambda arr: None)
            m.setattr(parse_mod, "_RUN_PROBE", 10 ** 12)
            m.setattr(chain_mod, "_plain_ascii_name", lambda cell: None)
            m.setattr(chain_mod, "_EMPTY_REJECTED", _NoStore())
            m.setattr(validate_mod, "_contracts_distinct", lambda *a: False)
            return _outcome(fn, *args, **kwargs)
    return run


def _outcome(fn, *args, **kwargs):
    try:
        return fn(*args, **kwargs)
    except InputError as err:
        return f"InputError: {err}"


def _same(a, b, where=""):
    """Equal to the last bit: frames by pandas' exact comparison with dtypes, arrays
    by their bytes, dataclasses field by field."""
    if isinstance(a, pd.DataFrame):
        pd.testing.assert_frame_equal(a, b, check_exact=True, check_dtype=True,
                                      check_column_type=True, check_index_type=True,
                                      check_categorical=True, obj=where)
        return
    if isinstance(a, np.ndarray):
        assert isinstance(b, np.ndarray) and a.dtype == b.dtype and a.shape == b.shape, where
        assert a.tobytes() == b.tobytes() or (
            a.dtype.kind == "O" and a.tolist() == b.tolist()), where
        return
    if dataclasses.is_dataclass(a) and not isinstance(a, type):
        assert type(a) is type(b), where
        for f in dataclasses.fields(a):
            _same(getattr(a, f.name), getattr(b, f.name), f"{where}.{f.name}")
        return
    if isinstance(a, float) and np.isnan(a):
        assert isinstance(b, float) and np.isnan(b), where
        return
    assert type(a) is type(b) and a == b, (where, a, b)


def _check_chain(path, general_paths, **kwargs):
    fast = _outcome(load_chain, path, **kwargs)
    _same(fast, general_paths(load_chain, path, **kwargs), str(path))
    return fast


def _check_history(path, general_paths):
    fast = _outcome(load_history, path)
    _same(fast, general_paths(load_history, path), str(path))
    return fast


# ------------------------------------------------------------ the repository's files

def test_layout_files_load_the_same(tmp_path, general_paths):
    """Every layout the loader tests write (long, variant, wide, OCC, Parquet,
    semicolon), with rows the loader rejects and without."""
    rng = np.random.default_rng(20261127)
    for trial in range(4):
        quotes = random_quotes(rng, n_exp=2 + trial, n_k=5 + 3 * trial)
        folder = tmp_path / f"t{trial}"
        folder.mkdir()
        for path in write_layouts(quotes, 100.0, folder).values():
            _check_chain(path, general_paths)


def test_demo_and_synthetic_universe_load_the_same(tmp_path, general_paths):
    from synthetic_universe import write_universe

    folders = [ROOT / "chains" / "ZPHX"] + [Path(f) for f in write_universe(
        tmp_path / "universe", n=3, n_quotes=400, days=300)]
    for folder in folders:
        _check_chain(folder / "chain.csv", general_paths)
        hist = _check_history(folder / "history.csv", general_paths)
        assert not isinstance(hist, str)


def test_chain_with_duplicates_and_rejections_loads_the_same(tmp_path, general_paths):
    rng = np.random.default_rng(5)
    quotes = random_quotes(rng, n_exp=3, n_k=8)
    quotes = pd.concat([quotes, quotes.iloc[[1, 4, 7]]], ignore_index=True)  # duplicates
    quotes.loc[2, "bid"] = 0.0                                              # no bid
    path = write_layouts(quotes, 100.0, tmp_path)["long"]
    chain = _check_chain(path, general_paths)
    assert chain.quality.rejected.get("duplicate") == 3


# ------------------------------------------------------------ plain histories

@st.composite
def _plain_history_text(draw):
    n = draw(st.integers(2, 60))
    integers = draw(st.booleans())
    cells = []
    for _ in range(n):
        digits = draw(st.text("0123456789", min_size=1, max_size=15))
        if not integers and len(digits) >= 2 and draw(st.booleans()):
            cut = draw(st.integers(1, len(digits) - 1))
            digits = digits[:cut] + "." + digits[cut:]
        cells.append(("-" if draw(st.integers(0, 9)) == 0 else "") + digits)
    offsets = np.cumsum(draw(st.lists(st.integers(0, 4), min_size=n, max_size=n)))
    days = (np.datetime64("1999-12-30") + offsets).astype(str)
    end = "\n" if draw(st.booleans()) else ""
    name = draw(st.sampled_from(["close", "adj_close", "Close", "price"]))
    return f"date,{name}\n" + "\n".join(f"{d},{c}" for d, c in zip(days, cells)) + end


@settings(max_examples=150, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(text=_plain_history_text())
def test_plain_history_is_read_as_the_table_path_reads_it(tmp_path, general_paths, text):
    path = tmp_path / "history.csv"
    path.write_text(text, encoding="ascii")
    plain = read_plain_history(path, _is_header, map_history_columns)
    assert plain is not None
    # outside reference: pandas' C parser reads the same closes to the last bit
    ref = pd.read_csv(path).iloc[:, 1].to_numpy(dtype=float)
    assert plain[4].tobytes() == ref.tobytes()
    _check_history(path, general_paths)


@pytest.mark.parametrize("text", [
    "date,close\n2024-01-02,1e5\n2024-01-03,2\n",            # exponent
    "date,close\n2024-01-02,+5\n2024-01-03,2\n",             # plus sign
    "date,close\n2024-01-02,1234567890123456\n2024-01-03,2\n",  # 16 digits
    "date,close\n2024-01-02,nan\n2024-01-03,2\n",            # a word
    "date,close\n2024-01-02,\n2024-01-03,2\n",               # an empty cell
    "date,close\n2024-01-02,5\n\n2024-01-03,2\n",            # a blank line
    "date,close\r\n2024-01-02,5\r\n2024-01-03,2\r\n",        # Windows line breaks
    "date, close\n2024-01-02,5\n2024-01-03,2\n",             # a blank in the header
    "\ufeffdate,close\n2024-01-02,5\n2024-01-03,2\n",        # byte-order mark
    "date;close\n2024-01-02;5,5\n2024-01-03;2\n",            # semicolons
    "date,close,volume\n2024-01-02,5,1\n2024-01-03,2,1\n",   # a third column
    "close,date\n5,2024-01-02\n2,2024-01-03\n",              # columns swapped
    "date,close\n2024-02-30,5\n2024-01-03,2\n",              # not a calendar date
    "date,close\n2024/01/02,5\n2024-01-03,2\n",              # not an ISO date
    "date,close\n2024-01-02,.5\n2024-01-03,2.\n",            # a point at an end
    "date,close\n2024-01-02,\"5\"\n2024-01-03,2\n",          # quotes
    "title\ndate,close\n2024-01-02,5\n2024-01-03,2\n",       # a preamble
    "date,close\n",                                          # no data line
])
def test_other_histories_take_the_table_path(tmp_path, general_paths, text):
    path = tmp_path / "history.csv"
    path.write_text(text, encoding="utf-8", newline="")
    assert read_plain_history(path, _is_header, map_history_columns) is None
    _check_history(path, general_paths)


def test_plain_history_with_one_price_fails_the_same(tmp_path, general_paths):
    path = tmp_path / "history.csv"
    path.write_text("date,close\n2024-01-02,5\n", encoding="ascii")
    assert read_plain_history(path, _is_header, map_history_columns) is not None
    assert "at least 2 are needed" in _check_history(path, general_paths)


# ------------------------------------------------------------ single shortcuts

def test_one_byte_types_match_the_word_table():
    import pyarrow as pa

    cells = [chr(b) for b in range(1, 128)]
    arr = pa.array(cells, type=pa.large_string())
    fast = parse_mod._one_byte_codes(arr)
    assert fast is not None
    words = {"c": 1, "p": 0}
    expected = np.array([words.get(c.strip().lower(), -1) for c in cells], dtype=np.int8)
    assert fast.tolist() == expected.tolist()
    assert parse_mod._one_byte_codes(pa.array(["C", "Put"])) is None
    assert parse_mod._one_byte_codes(pa.array(["C", None])) is None


@given(st.text(st.characters(min_codepoint=1, max_codepoint=127), min_size=1, max_size=12))
def test_plain_ascii_name_matches_pyarrow_kernels(cell):
    import pyarrow as pa
    import pyarrow.compute as pc

    arr = pa.array([cell])
    name = chain_mod._plain_ascii_name(arr)
    if name is not None:
        assert name == pc.utf8_upper(pc.utf8_trim_whitespace(arr))[0].as_py()


@given(st.lists(st.sampled_from(["2026-12-18", "2027-01-15", "2027-02-30", "2026-12-18",
                                 "1899-12-31", "2200-12-31", "20261218xx"]),
                min_size=1, max_size=80))
def test_dates_run_by_run_match_cell_by_cell(cells):
    import pyarrow as pa

    arr = pa.array(sorted(cells), type=pa.large_string())
    runs = parse_mod._all_plain_iso_arrow(arr)
    ok, days = parse_mod._iso_from_chars(
        np.frombuffer("".join(sorted(cells)).encode(), np.uint8).reshape(-1, 10))
    if runs is None:
        assert not ok.all()
    else:
        assert ok.all() and runs.tolist() == days.astype("datetime64[ns]").tolist()


@given(st.lists(st.tuples(st.integers(0, 3), st.sampled_from([50.0, 55.0, 60.0, 65.0]),
                          st.booleans(), st.sampled_from([100.0, 100.0, 10.0])),
                min_size=1, max_size=40), st.booleans())
def test_distinct_contracts_agree_with_the_full_search(rows, sort):
    if sort:
        rows = sorted(rows, key=lambda r: (r[0], r[2], r[1]))
    e = np.array([np.datetime64("2027-01-01") + r[0] for r in rows]).astype("datetime64[ns]")
    k, c, m = (np.array([r[i] for r in rows]) for i in (1, 2, 3))
    if _contracts_distinct(e, k, c, m):
        assert first_of_contract(e, k, c, m).tolist() == list(range(len(rows)))


@given(st.lists(st.integers(0, 12), max_size=60), st.lists(st.integers(0, 12), max_size=9))
def test_few_expiry_match_is_numpy_isin(values, few):
    v = (np.datetime64("2027-01-01", "ns") + np.array(values, dtype="timedelta64[D]"))
    f = (np.datetime64("2027-01-01", "ns") + np.array(few, dtype="timedelta64[D]"))
    assert _isin_few(v, f).tolist() == np.isin(v, f).tolist()


@pytest.mark.parametrize("values", [
    np.array([1, -2, 3], dtype=np.int64), np.array([1.5, np.nan, np.inf, -np.inf, -0.0]),
    np.array([True, False]), np.array([7, 8], dtype=np.uint8)])
def test_numpy_number_columns_as_pandas_converts_them(values):
    col = pd.Series(values)
    fast = parse_mod.to_number(col)
    ref = np.array(col.to_numpy(dtype=float, na_value=np.nan), dtype=float)
    ref[~np.isfinite(ref)] = np.nan
    assert fast.tobytes() == ref.tobytes()


@given(st.text(st.sampled_from(list(',;|\t"ab 1.') + ["\x00"]), min_size=1, max_size=30),
       st.sampled_from([",", ";", "\t", "|"]))
def test_field_count_is_the_csv_readers(line, delim):
    import csv

    from optbench.data.files import _field_count

    assert _field_count(line, delim) == len(next(csv.reader([line], delimiter=delim)))


@given(st.lists(st.integers(0, 6), min_size=1, max_size=40), st.booleans(), st.booleans())
def test_expiry_codes_of_sorted_quotes_are_pandas_factorize(days, sort, with_nat):
    from optbench.pricing.forwards import _expiry_codes

    v = np.datetime64("2027-01-01", "ns") + np.array(days, dtype="timedelta64[D]")
    if sort:
        v = np.sort(v)
    if with_nat:
        v[len(v) // 2] = np.datetime64("NaT")
    codes, uniq = _expiry_codes(pd.Series(v))
    ref_codes, ref_uniq = pd.factorize(pd.Series(v), sort=True, use_na_sentinel=True)
    assert codes.tolist() == ref_codes.tolist()
    assert np.asarray(uniq).tolist() == np.asarray(ref_uniq).tolist()
