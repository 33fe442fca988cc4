"""Vectorised cell parsers: numbers, dates, option types, exercise styles.

Each parser takes one column (any dtype: a CSV column of numbers stays numeric,
a column with a stray word in it arrives as text) and returns the parsed values
with NaN/NaT/<NA> where a present cell could not be read, so that the caller can
tell *missing* (empty cell) from *unparseable* (something there, but not valid).
"""
from __future__ import annotations

import numpy as np
import pandas as pd

# Formats tried for dates, in order of preference. Slash dates are read
# month-first (MM/DD/YYYY) unless a value in the column only fits day-first.
DATE_FORMATS = ("%Y-%m-%d", "%Y%m%d", "%m/%d/%Y", "%d/%m/%Y", "%d-%b-%Y", "%d %b %Y",
                "%b %d %Y", "%b %d, %Y", "%Y/%m/%d", "%d.%m.%Y", "%d-%b-%y", "%m/%d/%y")


def arrow_text(col: pd.Series):
    """The pyarrow array behind a text column on pyarrow storage (pandas' default
    for text from pandas 3), else None."""
    dtype = col.dtype
    if isinstance(dtype, pd.StringDtype) and str(getattr(dtype, "storage", "")).startswith(
            "pyarrow") and hasattr(col.array, "__arrow_array__"):
        import pyarrow as pa
        arr = pa.array(col.array)
        return arr.combine_chunks() if isinstance(arr, pa.ChunkedArray) else arr
    return None


def present(col: pd.Series) -> np.ndarray:
    """True where a cell holds something (not NaN and not only blanks)."""
    dtype = col.dtype
    if isinstance(dtype, np.dtype) and dtype.kind in "iub":
        return np.ones(len(col), dtype=bool)      # numpy integers hold no missing cell
    if isinstance(dtype, np.dtype) and dtype.kind == "f":
        return ~np.isnan(col.to_numpy())
    if col.dtype.kind in "biufcmM":
        return col.notna().to_numpy()
    arrow = arrow_text(col)
    if arrow is not None:
        if _every_cell_printed(arrow):
            return np.ones(len(arrow), dtype=bool)
        # what ``col.str.strip() != ""`` computes on pyarrow storage, without the
        # Series around each step
        import pyarrow.compute as pc
        filled = pc.not_equal(pc.utf8_trim_whitespace(arrow), "")
        return np.asarray(pc.fill_null(filled, False).to_numpy(zero_copy_only=False),
                          dtype=bool)
    has = col.notna().to_numpy(dtype=bool)
    if isinstance(col.dtype, pd.StringDtype):
        text = col.str.strip()
    else:  # object: mixed cells; only the text ones can be blank
        text = col[has].astype(str).str.strip()
        out = has.copy()
        out[has] = (text != "").to_numpy(dtype=bool)
        return out
    return has & (text != "").fillna(False).to_numpy(dtype=bool)


def _every_cell_printed(arr) -> bool:
    """True when a pyarrow text array has no missing cell and every cell starts and ends
    with a printable ASCII character other than a blank (bytes 33-126): no cell can
    strip to nothing, so every cell holds something (what :func:`present` asks)."""
    bytes_ = _full_text_bytes(arr)
    if bytes_ is None:
        return False
    offsets, data = bytes_
    if not (offsets[1:] > offsets[:-1]).all():
        return False
    first, last = data[offsets[:-1]], data[offsets[1:] - 1]
    return bool(((first >= 33) & (first <= 126) & (last >= 33) & (last <= 126)).all())


def to_number(col: pd.Series, *, decimal_comma: bool = False) -> np.ndarray:
    """Parse a column of numbers to float64 (NaN where missing or unparseable).

    Text cells may carry thousands separators, a currency sign or blanks
    (``"1,234.50"``, ``"$12.5"``); with ``decimal_comma`` a comma is the decimal
    mark and a dot groups thousands (``"1.234,5"``).
    """
    if isinstance(col.dtype, np.dtype) and col.dtype.kind in "biuf":
        # numpy numbers: converted by numpy (the one missing value, NaN, ends as NaN
        # with the infinities below, as through pandas' na_value)
        out = np.array(col.to_numpy(), dtype=float)
        out[~np.isfinite(out)] = np.nan
        return out
    if col.dtype.kind in "biuf":
        out = np.array(col.to_numpy(dtype=float, na_value=np.nan), dtype=float)
        out[~np.isfinite(out)] = np.nan
        return out
    if col.dtype.kind == "b":
        return np.full(len(col), np.nan)
    out = np.array(pd.to_numeric(col, errors="coerce").to_numpy(dtype=float,
                                                               na_value=np.nan))
    bad = np.isnan(out) & present(col)
    if bad.any():
        text = col[bad].astype("string").str.strip()
        if decimal_comma:
            text = text.str.replace(".", "", regex=False).str.replace(",", ".", regex=False)
        else:
            text = text.str.replace(",", "", regex=False)
        text = text.str.replace(r"^[$€£¥]|[\s%]", "", regex=True)
        out[bad] = pd.to_numeric(text, errors="coerce").to_numpy(dtype=float,
                                                               na_value=np.nan)
    out[~np.isfinite(out)] = np.nan
    return out


#: Dates outside this range are read as unreadable (NaT) and their rows reported
#: (``bad_date``): no listed option or price history lies before 1900 or after 2200,
#: and pandas' nanosecond timestamps stop in 2262.
DATE_MIN = np.datetime64("1900-01-01", "D")
DATE_MAX = np.datetime64("2200-12-31", "D")


def _in_range_ns(values) -> np.ndarray:
    """Parsed datetimes of any resolution -> datetime64[ns] at midnight, NaT outside
    :data:`DATE_MIN` .. :data:`DATE_MAX` (never an out-of-bounds error)."""
    arr = np.asarray(values)
    if arr.dtype.kind != "M":
        arr = np.asarray(pd.to_datetime(pd.Series(arr), errors="coerce"))
    days = arr.astype("datetime64[D]")
    ok = ~np.isnat(days) & (days >= DATE_MIN) & (days <= DATE_MAX)
    out = np.full(days.shape, np.datetime64("NaT"), dtype="datetime64[ns]")
    out[ok] = days[ok].astype("datetime64[ns]")
    return out


#: the digits of ``YYYY-MM-DD`` (positions in the 10 characters) and their place values
_ISO_DIGITS = np.array([0, 1, 2, 3, 5, 6, 8, 9])
_ISO_PLACES = np.array([[1000, 100, 10, 1, 0, 0, 0, 0],
                        [0, 0, 0, 0, 10, 1, 0, 0],
                        [0, 0, 0, 0, 0, 0, 10, 1]], dtype=np.int64)


def _plain_iso_dates(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Cells that are exactly ``YYYY-MM-DD`` (ten characters, no blanks, no time of
    day), a real calendar date in :data:`DATE_MIN` .. :data:`DATE_MAX`: a mask and
    their dates as datetime64[ns] (NaT elsewhere).

    Read from the characters' code points in one numpy pass (year, month and day
    by place value; the month's length from the calendar); every other cell is left
    to the format search of :func:`_parse_unique`, which reads these cells the same.
    """
    out = np.full(values.shape, np.datetime64("NaT"), dtype="datetime64[ns]")
    text = np.asarray(values, dtype=str)
    ten = np.flatnonzero(np.strings.str_len(text) == 10) if text.size else \
        np.zeros(0, np.int64)
    if ten.size == 0:
        return np.zeros(values.shape, bool), out
    chars = text[ten].astype("U10").view(np.uint32).reshape(-1, 10).astype(np.int64)
    ok, dates = _iso_from_chars(chars)
    mask = np.zeros(values.shape, bool)
    mask[ten[ok]] = True
    out[ten[ok]] = dates[ok].astype("datetime64[ns]")
    return mask, out


def _iso_from_chars(chars: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows of a (m, 10) matrix of character codes that spell a plain ISO date in
    :data:`DATE_MIN` .. :data:`DATE_MAX` (the rule of :func:`_plain_iso_dates`): a mask
    and their dates (datetime64[D], meaningful where the mask is set).

    Notes
    -----
    The month's length follows the proleptic Gregorian calendar (numpy's): 29 days in
    February when the year is divisible by 4 and not by 100, or by 400. The day number
    is the year's first day (numpy's calendar, one table for the years 0000-9999) plus
    the days of the months before and the day of the month.
    """
    # digit values (0-9 where the row has the shape; rows without it are masked out)
    digit = (chars >= 48) & (chars <= 57)
    d = (np.where(digit, chars, 48) - 48).astype(np.int32)
    shaped = digit[:, _ISO_DIGITS].all(axis=1) & (chars[:, 4] == 45) & (chars[:, 7] == 45)
    year = d[:, 0] * 1000 + d[:, 1] * 100 + d[:, 2] * 10 + d[:, 3]
    month = d[:, 5] * 10 + d[:, 6]
    day = d[:, 8] * 10 + d[:, 9]
    year_start, leap_year = _year_tables()
    leap = leap_year[year]
    month_at = np.minimum(month, 12)
    days_in_month = _MONTH_DAYS[month_at] + (leap & (month == 2))
    days = year_start[year] + _DAYS_BEFORE_MONTH[month_at] + (leap & (month > 2)) + day - 1
    ok = shaped & (month >= 1) & (month <= 12) & (day >= 1) & (day <= days_in_month) \
        & (days >= _DAY_MIN) & (days <= _DAY_MAX)
    return ok, days.astype(np.int64).astype("datetime64[D]")


#: days of each month in a common year (index 0 unused), and the date range as day
#: numbers from 1970-01-01
_MONTH_DAYS = np.array([0, 31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31], dtype=np.int32)
_DAYS_BEFORE_MONTH = np.concatenate([[0], np.cumsum(_MONTH_DAYS)[:-1]]).astype(np.int32)
_DAY_MIN = int(DATE_MIN.astype(np.int64))
_DAY_MAX = int(DATE_MAX.astype(np.int64))


_YEAR_TABLES = None


def _text_bytes(arr):
    """``(offsets, data)`` of a pyarrow string array (its cells' byte offsets as int64,
    ``n + 1`` of them, and its bytes as uint8), or None for another type."""
    import pyarrow as pa
    if pa.types.is_large_string(arr.type):
        off_type = np.int64
    elif pa.types.is_string(arr.type):
        off_type = np.int32
    else:
        return None
    bufs = arr.buffers()
    if bufs[1] is None:
        return np.zeros(1, np.int64), np.zeros(0, np.uint8)
    offsets = np.frombuffer(bufs[1], dtype=off_type)[arr.offset:arr.offset + len(arr) + 1] \
        .astype(np.int64)
    data = np.frombuffer(bufs[2], dtype=np.uint8) if bufs[2] is not None else \
        np.zeros(0, np.uint8)
    return offsets, data


def _full_text_bytes(arr):
    """:func:`_text_bytes` of a pyarrow string array with at least one cell and no
    missing cell; None otherwise (an empty array, a missing cell, another type)."""
    if arr.null_count or len(arr) == 0:
        return None
    return _text_bytes(arr)


def _all_plain_iso_arrow(arr) -> np.ndarray | None:
    """The dates of a pyarrow text column whose every cell is a plain ISO date
    (:func:`_plain_iso_dates`'s rule, read from the bytes): datetime64[ns] per cell;
    None when any cell is missing or not such a date (then each distinct cell is
    parsed on its own). A plain cell reads the same whatever the other cells hold."""
    bytes_ = _full_text_bytes(arr)
    if bytes_ is None:
        return None
    offsets, data = bytes_
    n = len(arr)
    if offsets[-1] - offsets[0] != 10 * n or not (np.diff(offsets) == 10).all():
        return None
    chars = data[offsets[0]:offsets[-1]].reshape(n, 10)
    head = chars[:_RUN_PROBE]
    if n > _RUN_PROBE and (head[1:] == head[:-1]).all(axis=1).any():
        # a column of repeated dates (a chain's expiries, its quote date): each run of
        # equal cells read once, from its first cell
        starts = np.empty(n, dtype=bool)
        starts[0] = True
        starts[1:] = (chars[1:] != chars[:-1]).any(axis=1)
        at = np.flatnonzero(starts)
        ok, dates = _iso_from_chars(chars[at])
        if not ok.all():
            return None
        return dates.astype("datetime64[ns]")[np.cumsum(starts) - 1]
    ok, dates = _iso_from_chars(chars)
    if not ok.all():
        return None
    return dates.astype("datetime64[ns]")


#: leading cells of a date column compared with their neighbours to tell a column of
#: repeated dates (read run by run) from one of distinct dates (read cell by cell)
_RUN_PROBE = 16


def _year_tables() -> tuple[np.ndarray, np.ndarray]:
    """For the years 0000-9999: the day number of each year's 1 January (from
    1970-01-01, numpy's proleptic Gregorian calendar) and whether it is a leap year
    (366 days). Built once."""
    global _YEAR_TABLES
    if _YEAR_TABLES is None:
        firsts = (np.arange(10001) - 1970).astype("datetime64[Y]").astype("datetime64[D]") \
            .astype(np.int64)
        _YEAR_TABLES = (firsts[:-1].astype(np.int32), np.diff(firsts) == 366)
    return _YEAR_TABLES


def _parse_unique_arrow(uniq) -> np.ndarray:
    """:func:`_parse_unique` of the distinct cells of a text column held by pyarrow
    (a string array without nulls): the plain ISO cells are read from the array's
    bytes (ten bytes, the rule of :func:`_plain_iso_dates`), the others by the format
    search. The same dates as :func:`_parse_unique` on the cells as Python strings."""
    import pyarrow as pa
    n = len(uniq)
    bytes_ = _text_bytes(uniq)
    if bytes_ is None:
        return _parse_unique(np.asarray(uniq.to_numpy(zero_copy_only=False), dtype=object))
    if n == 0:
        return np.full(0, np.datetime64("NaT"), dtype="datetime64[ns]")
    offsets, data = bytes_
    if not (data[offsets[0]:offsets[-1]] != 0).all():
        # a NUL character: numpy's text arrays drop trailing ones, so let
        # :func:`_parse_unique` read the cells exactly as it always has
        return _parse_unique(np.asarray(uniq.to_numpy(zero_copy_only=False), dtype=object))
    out = np.full(n, np.datetime64("NaT"), dtype="datetime64[ns]")
    plain = np.zeros(n, bool)
    ten = np.flatnonzero(np.diff(offsets) == 10)
    if ten.size == n and offsets[-1] - offsets[0] == 10 * n:
        chars = data[offsets[0]:offsets[-1]].reshape(n, 10)  # every cell ten bytes
    elif ten.size:
        chars = data[offsets[ten][:, None] + np.arange(10)]
    if ten.size:
        ok, dates = _iso_from_chars(chars)
        plain[ten[ok]] = True
        out[ten[ok]] = dates[ok].astype("datetime64[ns]")
    if not plain.all():
        rest = np.asarray(uniq.filter(pa.array(~plain)).to_numpy(zero_copy_only=False),
                          dtype=object)
        out[~plain] = _parse_by_format(pd.Series(rest, dtype=object)).to_numpy()
    return out


def _parse_unique(values: np.ndarray) -> np.ndarray:
    """Parse unique date cells (an object array), choosing the format that reads
    most of them: datetime64[ns], NaT where none does.

    Plain ISO cells are read first by :func:`_plain_iso_dates`; the format search of
    :func:`_parse_by_format` reads the others (and would read the plain ISO cells the
    same)."""
    plain, dates = _plain_iso_dates(values)
    if not plain.all():
        rest = _parse_by_format(pd.Series(values[~plain], dtype=object))
        dates[~plain] = rest.to_numpy()
    return dates


def _parse_by_format(values: pd.Series) -> pd.Series:
    """Parse unique date strings by the formats of :data:`DATE_FORMATS`."""
    text = values.astype("string").str.strip()
    # a trailing time of day is dropped: quotes are dated by their day
    text = text.str.replace(r"[T ]\d{1,2}:\d{2}(:\d{2}(\.\d*)?)?([+-]\d{2}:?\d{2}|Z)?$",
                            "", regex=True)
    out = np.full(len(text), np.datetime64("NaT"), dtype="datetime64[ns]")
    remaining = text.notna().to_numpy(dtype=bool).copy()
    # fast path: ISO dates, by far the most common
    iso = _in_range_ns(pd.to_datetime(text, format=DATE_FORMATS[0], errors="coerce"))
    take = remaining & ~np.isnat(iso)
    out[take] = iso[take]
    remaining = remaining & ~take
    if not remaining.any():
        return pd.Series(out, index=values.index)
    rest = text[remaining]
    # rank the other formats on a sample of the values; ties keep DATE_FORMATS order
    sample = rest.iloc[:256]
    ranked = sorted(DATE_FORMATS[1:], key=lambda fmt: -int(
        pd.to_datetime(sample, format=fmt, errors="coerce").notna().sum()))
    for fmt in ranked:
        left = np.isnat(out) & remaining
        if not left.any():
            break
        idx = np.flatnonzero(left)
        parsed = _in_range_ns(pd.to_datetime(text.iloc[idx], format=fmt, errors="coerce"))
        got = ~np.isnat(parsed)
        if got.any():
            out[idx[got]] = parsed[got]
    return pd.Series(out, index=values.index)


def to_date(col: pd.Series) -> pd.Series:
    """Parse a column of dates to datetime64[ns] at midnight (NaT where unreadable
    or outside :data:`DATE_MIN` .. :data:`DATE_MAX`).

    Accepts ISO ``YYYY-MM-DD`` (with or without a time of day), ``YYYYMMDD`` (also
    as a number), ``MM/DD/YYYY`` (``DD/MM/YYYY`` when the column's values only fit
    that), ``DD-Mon-YYYY``, ``Mon DD, YYYY`` and ``DD.MM.YYYY``. Each distinct value
    is parsed once, so a chain of 100,000 rows with 20 expiries costs 20 parses.
    """
    if col.dtype.kind == "M":
        naive = col.dt.tz_localize(None) if getattr(col.dt, "tz", None) is not None else col
        return pd.Series(_in_range_ns(naive.to_numpy()), index=col.index)
    if col.dtype.kind in "iuf":
        num = col.to_numpy(dtype=float, na_value=np.nan)
        whole = np.isfinite(num) & (num == np.round(num))
        col = pd.Series(np.where(whole, np.char.mod("%d", np.where(whole, num, 0)
                                                    .astype(np.int64)), None),
                        index=col.index, dtype=object)
    return pd.Series(date_array(col), index=col.index)


def date_array(col: pd.Series) -> np.ndarray:
    """:func:`to_date` as a datetime64[ns] array (no Series built)."""
    if col.dtype.kind == "M" or col.dtype.kind in "iuf":
        return to_date(col).to_numpy()
    arrow = arrow_text(col)
    if arrow is not None:
        # each distinct cell parsed once, as below, on pyarrow's own arrays
        direct = _all_plain_iso_arrow(arrow)
        if direct is not None:
            return direct
        import pyarrow.compute as pc
        enc = pc.dictionary_encode(arrow)
        parsed = _parse_unique_arrow(enc.dictionary)
        codes = pc.fill_null(enc.indices, -1).to_numpy(zero_copy_only=False)
        return np.append(parsed, np.datetime64("NaT", "ns"))[codes]
    codes, uniques = pd.factorize(col, use_na_sentinel=True)
    parsed = _parse_unique(np.asarray(uniques, dtype=object))
    out = np.full(len(col), np.datetime64("NaT"), dtype="datetime64[ns]")
    ok = codes >= 0
    out[ok] = parsed[codes[ok]]
    return out


_TYPE_WORDS = {"c": True, "call": True, "calls": True, "p": False, "put": False,
               "puts": False}
_STYLE_WORDS = {"european": "european", "e": "european", "eu": "european",
                "eur": "european", "euro": "european", "american": "american",
                "a": "american", "am": "american", "amer": "american"}


def _distinct_words(arrow) -> tuple[list, np.ndarray]:
    """The distinct cells of a pyarrow text array, stripped and lower-cased by the
    kernels pandas' ``.str`` methods call on pyarrow storage, and each cell's position
    among them (-1 for a missing cell)."""
    import pyarrow.compute as pc

    enc = pc.dictionary_encode(arrow)
    keys = pc.utf8_lower(pc.utf8_trim_whitespace(enc.dictionary)).to_pylist()
    return keys, pc.fill_null(enc.indices, -1).to_numpy(zero_copy_only=False)


def _vocab(col: pd.Series, words: dict) -> pd.Series:
    arrow = arrow_text(col)
    if arrow is not None:
        keys, at = _distinct_words(arrow)
        mapped = np.array([words.get(k) if isinstance(k, str) else None for k in keys]
                          + [None], dtype=object)
        return pd.Series(mapped[at], index=col.index, dtype=object)
    codes, uniques = pd.factorize(col, use_na_sentinel=True)
    keys = pd.Series(uniques, dtype=object).astype("string").str.strip().str.lower()
    # loops over the distinct values only (a handful), never over rows
    mapped = np.array([words.get(k) if isinstance(k, str) else None for k in keys],
                      dtype=object)
    out = np.full(len(col), None, dtype=object)
    ok = codes >= 0
    out[ok] = mapped[codes[ok]]
    return pd.Series(out, index=col.index, dtype=object)


def call_codes(col: pd.Series) -> np.ndarray:
    """Option type as int8 codes: 1 call, 0 put, -1 empty or unreadable."""
    arrow = arrow_text(col)
    if arrow is not None:
        single = _one_byte_codes(arrow)
        if single is not None:
            return single
        keys, codes = _distinct_words(arrow)
    else:
        codes, uniques = pd.factorize(col, use_na_sentinel=True)
        keys = pd.Series(uniques, dtype=object).astype("string").str.strip().str.lower()
    table = np.array([{True: 1, False: 0}.get(_TYPE_WORDS.get(k) if isinstance(k, str)
                                               else None, -1) for k in keys] + [-1],
                     dtype=np.int8)
    return table[codes]  # code -1 (missing) picks the trailing -1


#: option-type code of each byte value as a one-character cell: ``C``/``c`` 1 (call),
#: ``P``/``p`` 0 (put), any other byte -1 (a blank strips to nothing; no other single
#: character is a type word)
_ONE_BYTE_TYPE = np.full(256, -1, dtype=np.int8)
_ONE_BYTE_TYPE[[ord("C"), ord("c")]] = 1
_ONE_BYTE_TYPE[[ord("P"), ord("p")]] = 0


def _one_byte_codes(arr) -> np.ndarray | None:
    """:func:`call_codes` of a pyarrow text array whose every cell is one byte long
    (no missing cell), read from its bytes by :data:`_ONE_BYTE_TYPE`; None otherwise.
    A one-byte cell is one ASCII character (UTF-8 starts no longer character with a
    byte below 128 and holds no one-byte character at or above it): stripped and lower
    cased it is ``c``, ``p`` or no type word."""
    bytes_ = _full_text_bytes(arr)
    if bytes_ is None:
        return None
    offsets, data = bytes_
    n = len(arr)
    if offsets[-1] - offsets[0] != n or not (np.diff(offsets) == 1).all():
        return None
    return _ONE_BYTE_TYPE[data[offsets[0]:offsets[-1]]]


def to_is_call(col: pd.Series) -> pd.Series:
    """``C``/``P``, ``call``/``put`` (any case) -> True/False; None where unreadable."""
    return _vocab(col, _TYPE_WORDS)


def to_style(col: pd.Series) -> pd.Series:
    """``european``/``american`` (also ``E``/``A``, ``EU``/``AM``) -> canonical word."""
    return _vocab(col, _STYLE_WORDS)


def style_word(text: str | None, source: str = "style") -> str | None:
    """One style given by the caller or meta.toml, checked."""
    if text is None:
        return None
    word = _STYLE_WORDS.get(str(text).strip().lower())
    if word is None:
        from optbench.errors import InputError
        raise InputError(source, f"unknown exercise style {text!r} (european or american)")
    return word


def percent_or_decimal(values: np.ndarray, had_percent_sign: bool) -> tuple[np.ndarray, bool]:
    """Implied vols from a file, as decimals, and whether they were in percent.

    A column is read as percent when its cells carry ``%`` or when the median of
    its positive values exceeds 3.0 (300 % as a decimal vol is beyond any listed
    market, 3 % as a percent vol below any; common practice).
    """
    pos = values[np.isfinite(values) & (values > 0)]
    is_percent = had_percent_sign or (pos.size > 0 and float(np.median(pos)) > 3.0)
    return (values / 100.0 if is_percent else values), is_percent
