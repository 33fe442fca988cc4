"""The comparison's per-strike tables, made per expiry when first read.

Reference: the construction they replace, kept here: one DataFrame of the sorted
per-quote columns, each expiry's rows ``table.iloc[start:stop].reset_index(drop=True)``.
Every frame must equal it exactly (values, dtypes, index), on the bundled demo and on
an invented chain where an expiry has no usable quote.
"""
from __future__ import annotations

import datetime as _dt
import pickle
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench.analysis.compare import compare
from optbench.analysis.results import STRIKE_COLUMNS
from optbench.analysis.strike_tables import StrikeTables

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"


@pytest.fixture(scope="module")
def demo():
    return compare(DEMO, model="gjr", dist="t")


def _reference(tables: StrikeTables) -> dict:
    whole = pd.DataFrame(tables._columns, columns=list(STRIKE_COLUMNS))
    return {e: whole.iloc[a:b].reset_index(drop=True) for e, (a, b) in tables._slices.items()}


def test_frames_equal_the_sliced_whole_table(demo):
    tables = demo.strikes
    assert isinstance(tables, StrikeTables)
    ref = _reference(tables)
    assert list(tables) == list(ref) == [row.expiry for row in demo.expiries]
    for expiry, frame in ref.items():
        got = tables[expiry]
        pd.testing.assert_frame_equal(got, frame, check_exact=True)
        assert list(got.columns) == list(STRIKE_COLUMNS)
        assert list(got.dtypes) == list(frame.dtypes)
        assert got is tables[expiry]            # made once, then kept
    whole = pd.concat([f for f in ref.values() if len(f)], ignore_index=True)
    pd.testing.assert_frame_equal(demo.strike_frame(), whole, check_exact=True)


def test_each_expiry_holds_its_own_quotes_in_order(demo):
    for row in demo.expiries:
        frame = demo.strikes[row.expiry]
        assert len(frame) == row.n_quotes
        assert (pd.to_datetime(frame["expiry"]).dt.date == row.expiry).all()
        # puts before calls, each by strike (the sort the comparison promises)
        calls = frame["is_call"].to_numpy(bool)
        assert not np.any(calls[:-1] & ~calls[1:])
        for side in (True, False):
            k = frame.loc[frame["is_call"] == side, "strike"].to_numpy()
            assert np.all(np.diff(k) >= 0)


def test_mapping_behaviour(demo):
    tables = demo.strikes
    assert len(tables) == len(demo.expiries)
    assert tables.get(_dt.date(1999, 1, 1)) is None
    with pytest.raises(KeyError):
        tables[_dt.date(1999, 1, 1)]
    first = demo.expiries[0].expiry
    assert first in tables
    clone = pickle.loads(pickle.dumps(tables))
    assert clone._frames == {}                  # the pickle carries the columns only
    for expiry in tables:
        pd.testing.assert_frame_equal(clone[expiry], tables[expiry], check_exact=True)


def test_an_empty_slice_keeps_the_columns_and_dtypes():
    cols = {"expiry": np.array(["2031-01-17", "2031-02-21"], dtype="datetime64[D]"),
            "strike": np.array([90.0, 95.0]), "type": np.array(["P", "C"])}
    tables = StrikeTables(cols, {_dt.date(2031, 1, 17): (0, 2),
                                 _dt.date(2031, 2, 21): (2, 2)})
    whole = pd.DataFrame(cols, columns=list(cols))
    empty = tables[_dt.date(2031, 2, 21)]
    pd.testing.assert_frame_equal(empty, whole.iloc[2:2].reset_index(drop=True),
                                  check_exact=True)
    assert len(empty) == 0 and list(empty.columns) == list(cols)
