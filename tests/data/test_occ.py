"""OCC option symbols: the published format and the round trip.

Format: Options Clearing Corporation, *Options Symbology Initiative* (OSI), 2010 —
root (up to 6 characters, padded with spaces to 6), expiry YYMMDD, C or P, strike
x 1000 as 8 digits: 21 characters in all. Roots below are invented.
"""
from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from optbench.data.occ import format_occ, parse_occ


def test_osi_field_layout():
    # OCC OSI (2010): 6-char root, YYMMDD, C/P, 5 integer + 3 decimal strike digits
    sym = format_occ("ZPHX", "2026-12-18", False, 5000.0)
    assert len(sym) == 21
    assert sym[:6] == "ZPHX  " and sym[6:12] == "261218" and sym[12] == "P"
    assert sym[13:] == "05000000"
    assert format_occ("ZPHX", "2027-01-15", True, 12.5) == "ZPHX  270115C00012500"


def test_parse_padded_unpadded_and_bad():
    got = parse_occ(["ZPHX  261218P05000000", "zphx261218c04987500", " ZPHXW270115C00012500 ",
                     "ZPHX  261318P05000000", "ZPHX 261218X05000000", "", None,
                     "TOOLONGROOT261218P05000000"])
    assert got["ok"].tolist() == [True, True, True, False, False, False, False, False]
    assert got.loc[0, "strike"] == 5000.0 and not got.loc[0, "is_call"]
    assert got.loc[1, "strike"] == 4987.5 and got.loc[1, "is_call"]
    assert got.loc[2, "root"] == "ZPHXW" and got.loc[2, "expiry"] == pd.Timestamp("2027-01-15")


def test_format_rejects_what_osi_cannot_hold():
    with pytest.raises(ValueError):
        format_occ("ZPHXLONG", "2026-12-18", True, 100)  # root over 6 characters
    with pytest.raises(ValueError):
        format_occ("ZPHX", "2026-12-18", True, 100000.0)  # strike beyond 5 integer digits
    with pytest.raises(ValueError):
        format_occ("ZPHX", "2026-12-18", True, 10.0005)  # finer than a thousandth


roots = st.text(alphabet="ABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789", min_size=1, max_size=6) \
    .filter(lambda r: r[0].isalpha())
dates = st.dates(min_value=dt.date(2000, 1, 1), max_value=dt.date(2099, 12, 31))
strikes_milli = st.integers(min_value=1, max_value=99_999_999)


@settings(max_examples=50, deadline=None)
@given(st.lists(st.tuples(roots, dates, st.booleans(), strikes_milli), min_size=1,
                max_size=20), st.booleans())
def test_round_trip(rows, pad):
    # OCC OSI (2010): format then parse gives back root, expiry, type and strike
    root, exp, call, milli = zip(*rows)
    strike = np.array(milli) / 1000.0
    syms = format_occ(list(root), list(exp), list(call), strike, pad=pad)
    if pad:
        assert all(len(s) == 21 for s in syms)
    back = parse_occ(syms)
    assert back["ok"].all()
    assert back["root"].tolist() == list(root)
    assert [d.date() for d in back["expiry"]] == list(exp)
    assert back["is_call"].tolist() == list(call)
    np.testing.assert_array_equal(np.round(back["strike"].to_numpy() * 1000).astype(int),
                                  np.array(milli))
    assert list(format_occ(back["root"].tolist(), back["expiry"].to_numpy(),
                           back["is_call"].to_numpy(), back["strike"].to_numpy(),
                           pad=pad)) == list(syms)
