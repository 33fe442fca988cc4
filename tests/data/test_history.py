"""Price-history loading: the open dataset bundled with arch, and every reported issue."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench.data.history import load_history
from optbench.errors import InputError


def _arch_file(name: str) -> Path:
    # located without importing arch (its import costs seconds here)
    import importlib.util
    spec = importlib.util.find_spec("arch")
    return Path(spec.submodule_search_locations[0]) / "data" / name / f"{name}.csv.gz"


def test_open_dataset_bundled_with_arch():
    # reference: the daily price file bundled with the arch package (arch.data.sp500),
    # read the way arch's own loader reads it (pandas.read_csv, dates parsed);
    # log returns computed here with pandas
    ref = pd.read_csv(_arch_file("sp500"), index_col=0, parse_dates=[0])
    hist = load_history(_arch_file("sp500"))
    assert hist.close_column == "Adj Close"
    assert len(hist) == len(ref)
    np.testing.assert_array_equal(hist.dates, ref.index.values.astype("datetime64[D]"))
    np.testing.assert_allclose(hist.close, ref["Adj Close"].to_numpy())
    expected = np.log(ref["Adj Close"]).diff().dropna().to_numpy()
    np.testing.assert_allclose(hist.returns, expected, rtol=1e-12, atol=1e-15)
    # open/high/low come back on the adjusted scale: low <= close <= high
    ok = np.isfinite(hist.high)
    assert ok.mean() > 0.99
    assert (hist.low[ok] <= hist.close[ok] * (1 + 1e-9)).all()
    assert (hist.close[ok] <= hist.high[ok] * (1 + 1e-9)).all()


def test_issues_are_reported_not_filled(tmp_path):
    path = tmp_path / "h.csv"
    path.write_text("Date,Close\n"
                    "2026-01-05,101\n"       # line 2, out of order
                    "2026-01-02,100\n"       # line 3
                    "2026-01-06,-4\n"        # line 4: non-positive
                    "2026-01-07,\n"          # line 5: missing
                    "2026-01-08,102\n"       # line 6, duplicated below
                    "2026-01-08,103\n"       # line 7: kept (last)
                    "2026-02-09,104\n"       # gap of 32 days
                    "someday,105\n")         # line 9: bad date
    h = load_history(path)
    assert [str(d) for d in h.dates] == ["2026-01-02", "2026-01-05", "2026-01-08",
                                         "2026-02-09"]
    np.testing.assert_allclose(h.close, [100, 101, 103, 104])
    np.testing.assert_allclose(h.returns, np.diff(np.log([100, 101, 103, 104])))
    text = " | ".join(h.issues)
    assert "out-of-range date dropped (bad_date; lines 9)" in text
    assert "a negative close dropped (negative_close; lines 4)" in text
    assert "unreadable close ('Close') dropped (bad_close; lines 5)" in text
    assert "sorted" in text
    assert "last row of each date is kept (conflicting_date; dropped lines 6)" in text
    assert h.dropped == {"bad_date": 1, "bad_close": 1, "negative_close": 1,
                         "conflicting_date": 1}
    assert h.rows_in == len(h.dates) + sum(h.dropped.values())
    assert "2026-01-08 to 2026-02-09 (32 days)" in text
    assert h.open is None and h.high is None


def test_adjusted_close_preferred_and_semicolons(tmp_path):
    path = tmp_path / "h.csv"
    path.write_text("date;close;adj_close\n02/01/2026;10,0;5,0\n02/02/2026;11,0;5,5\n")
    h = load_history(path)
    assert h.close_column == "adj_close"
    np.testing.assert_allclose(h.close, [5.0, 5.5])
    assert [str(d) for d in h.dates] == ["2026-02-01", "2026-02-02"]  # month first


@pytest.mark.parametrize("body, problem", [
    ("date,close\n2026-01-02,100\n", "only 1 usable price"),
    ("date,price\nx,1\ny,2\n", "no readable date"),
    ("day,open\n2026-01-02,1\n", "missing column 'close'"),
    ("when,close\n2026-01-02,1\n", "missing column 'date'"),
])
def test_user_errors(tmp_path, body, problem):
    path = tmp_path / "h.csv"
    path.write_text(body)
    with pytest.raises(InputError, match=problem) as err:
        load_history(path)
    assert str(path) in str(err.value) and "\n" not in str(err.value)


def test_inconsistent_bars_are_left_empty(tmp_path):
    path = tmp_path / "h.csv"
    path.write_text("date,open,high,low,close\n2026-01-02,10,11,9,10\n"
                    "2026-01-05,10,9,11,10\n2026-01-06,10,12,9,10.5\n")
    h = load_history(path)
    assert np.isnan(h.high[1]) and np.isnan(h.low[1]) and np.isfinite(h.high[2])
    assert any("inconsistent" in i for i in h.issues)
    assert pd.notna(h.close).all()
