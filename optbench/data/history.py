"""Loading the underlying's daily price history.

A history file is a CSV (or Parquet) with a date and a close; the adjusted close
is used when the file has one (``Adj Close``, ``adjusted_close``, ...), and
``open``/``high``/``low`` are read when present (range-based realized-vol
estimators need them). Problems are reported in ``PriceHistory.issues`` and never
filled in silently: rows with an unreadable or out-of-range date (``bad_date``), or a
missing/unreadable (``bad_close``), zero (``zero_close``) or negative
(``negative_close``) close are dropped, each reason counted in
``PriceHistory.dropped`` and listed with its first line numbers; unsorted dates are
sorted; a date given twice keeps its last row (``duplicate_date`` when the rows
agree on the close, ``conflicting_date`` when they do not); and gaps longer than a
week are listed.
"""
from __future__ import annotations

import functools

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from optbench.data.columns import map_history_columns
from optbench.data.files import drop_blank_rows, read_table
from optbench.data.parse import date_array, to_number
from optbench.data.plain_csv import read_plain_history
from optbench.errors import InputError

GAP_DAYS = 7
"""Consecutive dates more than this many calendar days apart are reported as a gap."""

_SHOW = 5


@dataclass(frozen=True, eq=False)
class PriceHistory:
    """Daily prices of the underlying and their log returns.

    Attributes
    ----------
    source : str
    dates : ndarray of datetime64[D]
        Sorted, distinct trading dates.
    close : ndarray of float
        (Adjusted) close in price units, all positive.
    open, high, low : ndarray of float or None
        None when the file has no such column; NaN on rows where they were
        missing or inconsistent with the close (reported in ``issues``).
    returns : ndarray of float
        Daily log returns r_t = ln(C_t / C_{t-1}), decimals, aligned with ``dates[1:]``.
    issues : list of str
        What was found and done, one sentence each.
    close_column : str
        The file's column the closes came from.
    rows_in : int
        Data rows read from the file (``rows_in == len(dates) + sum(dropped.values())``).
    dropped : dict of str -> int
        Rows dropped, by reason: ``bad_date``, ``bad_close``, ``zero_close``,
        ``negative_close``, ``duplicate_date``, ``conflicting_date``.
    """

    source: str
    dates: np.ndarray
    close: np.ndarray
    open: np.ndarray | None
    high: np.ndarray | None
    low: np.ndarray | None
    returns: np.ndarray
    issues: list
    close_column: str = "close"
    rows_in: int = 0
    dropped: dict = field(default_factory=dict)

    def __len__(self) -> int:
        return len(self.dates)


def _lines(lines: np.ndarray) -> str:
    shown = ", ".join(str(int(x)) for x in lines[:_SHOW])
    return shown + (f" and {len(lines) - _SHOW} more" if len(lines) > _SHOW else "")


def _is_header(cells: list[str]) -> bool:
    return _is_header_cells(tuple(cells))


@functools.lru_cache(maxsize=256)
def _is_header_cells(cells: tuple) -> bool:
    """:func:`_is_header` once per distinct line (a universe's files share a header)."""
    found = map_history_columns(cells)
    return "date" in found and ("close" in found or "adj_close" in found)


def load_history(path: str | Path) -> PriceHistory:
    """Load a daily price history and compute its log returns.

    Parameters
    ----------
    path : str or Path
        CSV/Parquet file with ``date`` and ``close`` (or an adjusted close), or a
        scenario folder holding ``history.csv``.

    Returns
    -------
    PriceHistory

    Raises
    ------
    InputError
        Missing/empty/unreadable file, no date or close column, no readable date,
        or fewer than two usable prices.

    Notes
    -----
    Daily log return r_t = ln(C_t) − ln(C_{t−1}) on consecutive rows of the sorted,
    de-duplicated history (Tsay, *Analysis of Financial Time Series*, 3rd ed., §1.1).
    """
    path = Path(path)
    if path.is_dir():
        for name in ("history.csv", "history.parquet"):
            if (path / name).is_file():
                path = path / name
                break
        else:
            raise InputError(path, "folder holds no history.csv")
    issues: list[str] = []
    # the usual date,close file from its bytes (the same dates, closes and lines as
    # the table read below gives it), any other file as a table
    plain = read_plain_history(path, _is_header, map_history_columns)
    if plain is not None:
        date_name, close_name, close_field, dates, close = plain
        frame, cols, dc = None, {"date": date_name, close_field: close_name}, False
        lines = 2 + np.arange(dates.size)      # the header is line 1
        rows_in = dates.size
    else:
        raw = read_table(path, header_test=_is_header)
        frame = drop_blank_rows(raw.frame)
        lines = raw.line0 + frame.index.to_numpy()
        if not (isinstance(frame.index, pd.RangeIndex) and frame.index.start == 0
                and frame.index.step == 1):
            frame = frame.reset_index(drop=True)
        if frame.shape[1] <= 1:
            raise InputError(path, "only one column found: the delimiter is not one of "
                             ", ; tab | or the file is not a price history")
        cols = map_history_columns(frame.columns)
        if "date" not in cols:
            raise InputError(path, "missing column 'date'")
        close_field = "adj_close" if "adj_close" in cols else "close"
        if close_field not in cols:
            raise InputError(path, "missing column 'close' (or an adjusted close)")
        dc = raw.decimal_comma
        dates = date_array(frame[cols["date"]])
        close = to_number(frame[cols[close_field]], decimal_comma=dc)
        rows_in = len(frame)

    bad_date = np.isnat(dates)
    if bad_date.all():
        raise InputError(path, f"no readable date in column '{cols['date']}'")
    dropped: dict[str, int] = {}

    def drop(code: str, mask: np.ndarray, what: str) -> None:
        if mask.any():
            dropped[code] = int(mask.sum())
            issues.append(f"{int(mask.sum())} rows with {what} dropped ({code}; lines "
                          f"{_lines(lines[mask])})")
    drop("bad_date", bad_date, "a missing, unreadable or out-of-range date")
    live = ~bad_date
    drop("bad_close", live & np.isnan(close), f"a missing or unreadable close "
                                              f"('{cols[close_field]}')")
    drop("zero_close", live & (close == 0), "a zero close")
    drop("negative_close", live & (close < 0), "a negative close")
    keep = live & (close > 0)

    ohlc = {}
    for f in ("open", "high", "low"):
        ohlc[f] = to_number(frame[cols[f]], decimal_comma=dc) if f in cols else None

    if close_field == "adj_close" and "close" in cols and any(
            v is not None for v in ohlc.values()):
        # open/high/low are quoted unadjusted: scale them by adjusted / raw close
        # (common practice for split- and dividend-adjusted bars)
        raw_close = to_number(frame[cols["close"]], decimal_comma=dc)
        with np.errstate(divide="ignore", invalid="ignore"):
            factor = np.where(raw_close > 0, close / raw_close, np.nan)
        ohlc = {f: (v * factor if v is not None else None) for f, v in ohlc.items()}
        issues.append(f"open/high/low scaled by '{cols[close_field]}' / '{cols['close']}'")
    # the kept rows as positions into the file's rows: sorted by date (stable), then
    # the last row of each date
    sel = np.flatnonzero(keep)
    day = dates[sel]
    if not (day[1:] >= day[:-1]).all():
        issues.append("dates were not in order; sorted")
        sel = sel[np.argsort(day, kind="stable")]
        day = dates[sel]
    dup = np.zeros(sel.size, bool)
    dup[:-1] = day[1:] == day[:-1]          # a later row has the same date
    if dup.any():
        # a repeated date whose rows disagree on the close is a conflict, not a copy
        starts = np.flatnonzero(np.r_[True, day[1:] != day[:-1]])
        group = np.cumsum(np.r_[False, day[1:] != day[:-1]])
        kept_close = close[sel]
        spread = (np.maximum.reduceat(kept_close, starts)
                  - np.minimum.reduceat(kept_close, starts))[group]
        conflict = dup & (spread > 0)
        same = dup & ~conflict
        dl = lines[sel]
        if same.any():
            dropped["duplicate_date"] = int(same.sum())
            issues.append(f"{int(same.sum())} rows repeat an earlier row's date and close; "
                          f"dropped (duplicate_date; lines {_lines(dl[same])})")
        if conflict.any():
            dropped["conflicting_date"] = int(conflict.sum())
            issues.append(f"{int(conflict.sum())} rows give a date again with a different "
                          "close; the last row of each date is kept (conflicting_date; "
                          f"dropped lines {_lines(dl[conflict])})")
        sel = sel[~dup]
    if sel.size < 2:
        raise InputError(path, f"only {sel.size} usable price(s); at least 2 are needed")

    d = dates[sel].astype("datetime64[D]")
    gaps = np.diff(d).astype(np.int64)
    long_gap = np.flatnonzero(gaps > GAP_DAYS)
    if long_gap.size:
        shown = "; ".join(f"{d[i]} to {d[i + 1]} ({gaps[i]} days)" for i in long_gap[:_SHOW])
        more = f" and {long_gap.size - _SHOW} more" if long_gap.size > _SHOW else ""
        issues.append(f"{long_gap.size} gaps longer than {GAP_DAYS} calendar days: "
                      f"{shown}{more} (the return across a gap counts as one day's)")
    c = close[sel]
    out = {f: (np.asarray(v, dtype=float)[sel] if v is not None else None)
           for f, v in ohlc.items()}
    if any(v is not None for v in out.values()):
        hi = out["high"] if out["high"] is not None else np.full(len(c), np.inf)
        lo = out["low"] if out["low"] is not None else np.full(len(c), -np.inf)
        op = out["open"] if out["open"] is not None else c
        with np.errstate(invalid="ignore"):
            bad = (hi < lo) | (c > hi * (1 + 1e-9)) | (c < lo * (1 - 1e-9)) \
                | (op > hi * (1 + 1e-9)) | (op < lo * (1 - 1e-9))
            for v in out.values():
                if v is not None:
                    bad |= ~(v > 0)
        bad &= np.ones(len(c), bool)
        if bad.any():
            issues.append(f"{int(bad.sum())} rows with open/high/low missing, non-positive "
                          "or inconsistent with the close: those values left empty (lines "
                          f"{_lines(lines[sel][bad])})")
            for v in out.values():
                if v is not None:
                    v[bad] = np.nan
    returns = np.diff(np.log(c))
    return PriceHistory(source=str(path), dates=d, close=c, open=out["open"],
                        high=out["high"], low=out["low"], returns=returns, issues=issues,
                        close_column=str(cols[close_field]), rows_in=int(rows_in),
                        dropped=dropped)
