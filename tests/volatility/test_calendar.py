"""Trading-day calendar against pandas' business-day ranges (an independent count)."""
from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest

from optbench.errors import InputError
from optbench.volatility.calendar import trading_days


def test_weekdays_after_asof_up_to_and_including_expiry():
    # 2026-12-01 is a Tuesday: Wed, Thu, Fri -> 3; the next Monday -> 4
    assert trading_days("2026-12-01", "2026-12-04") == 3
    assert trading_days(dt.date(2026, 12, 1), dt.date(2026, 12, 7)) == 4
    assert trading_days("2026-12-01", "2026-12-01") == 0
    assert trading_days("2026-12-04", "2026-12-06") == 0   # Friday to Sunday


def test_matches_pandas_bdate_range_with_holidays():
    asof = pd.Timestamp("2026-11-27")
    expiries = pd.to_datetime(["2026-12-18", "2027-01-15", "2027-03-19", "2028-12-15"])
    holidays = ["2026-12-25", "2027-01-01", "2027-01-18", "2027-12-24"]
    got = trading_days(asof, expiries.values, holidays=holidays)
    hol = pd.to_datetime(holidays)
    for e, n in zip(expiries, got):
        days = pd.bdate_range(asof + pd.Timedelta(days=1), e)
        assert n == len(days.difference(hol))
    assert isinstance(got, np.ndarray) and got.dtype.kind == "i"


def test_bad_date_is_input_error():
    with pytest.raises(InputError):
        trading_days("2026-13-01", "2026-12-04")
