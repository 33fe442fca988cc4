"""OCC-style option symbols, parsed and written vectorised.

The format is the Options Clearing Corporation's *Options Symbology Initiative*
(OSI, 2010): the option root (up to six characters, space-padded to six in the
21-character form), the expiry as ``YYMMDD``, ``C`` or ``P``, and the strike
times 1000 as eight digits. ``ZPHX  261218P05000000`` is the ZPHX put with strike
5000.000 expiring 2026-12-18. Unpadded roots (``ZPHX261218P05000000``) are accepted
too; the fixed-width tail is read from the right.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

OCC_PATTERN = r"^(?P<root>[A-Z0-9.]{1,6}?) *(?P<ymd>\d{6})(?P<cp>[CP])(?P<strike>\d{8})$"


def parse_occ(symbols: pd.Series | np.ndarray | list) -> pd.DataFrame:
    """Split OCC option symbols into their fields.

    Parameters
    ----------
    symbols : array-like of str
        Symbols such as ``"ZPHX  261218P05000000"``; surrounding blanks and lower
        case are tolerated. Missing values are allowed.

    Returns
    -------
    DataFrame
        Same index as ``symbols`` (a fresh RangeIndex for arrays) with columns
        ``root`` (str), ``expiry`` (datetime64[ns]), ``is_call`` (bool),
        ``strike`` (float, price units) and ``ok`` (bool: the symbol parsed).
        Fields are NaN/NaT/False where ``ok`` is False.

    Notes
    -----
    strike = int(8-digit field) / 1000; expiry = 20YY-MM-DD. Options Clearing
    Corporation, *Options Symbology Initiative* (2010).
    """
    s = pd.Series(symbols) if not isinstance(symbols, pd.Series) else symbols
    return pd.DataFrame(occ_fields(s), index=s.index)


def occ_fields(s: pd.Series) -> dict:
    """:func:`parse_occ`'s columns as arrays (``root``, ``expiry``, ``is_call``,
    ``strike``, ``ok``), no frame built."""
    try:
        root, ymd, cp, strike_txt = _split_arrow(s)
    except ImportError:
        root, ymd, cp, strike_txt = _split_pandas(s)
    # OSI years are 20YY: strptime's %y would put 69-99 in the 1900s. Each distinct
    # date is parsed once.
    codes, uniq = pd.factorize(ymd, use_na_sentinel=True)
    parsed = _osi_dates(np.asarray(uniq, dtype=object))
    exp = np.full(len(s), np.datetime64("NaT"), dtype="datetime64[ns]")
    exp[codes >= 0] = parsed[codes[codes >= 0]]
    strike = np.asarray(strike_txt, dtype=float) / 1000.0
    ok = ~np.isnat(exp) & np.isfinite(strike)
    return {
        "root": root,
        "expiry": np.where(ok, exp, np.datetime64("NaT", "ns")),
        "is_call": (np.asarray(cp, dtype=object) == "C") & ok,
        "strike": np.where(ok, strike, np.nan),
        "ok": ok,
    }


def _osi_dates(ymd: np.ndarray) -> np.ndarray:
    """``YYMMDD`` cells -> datetime64[ns] of 20YY-MM-DD, NaT where no such day.

    Six ASCII digits are read from their code points in one numpy pass (the month's
    length from the calendar); any other cell goes to ``pandas.to_datetime`` with
    ``%Y%m%d`` after a "20" prefix, which reads the plain cells the same.
    """
    out = np.full(len(ymd), np.datetime64("NaT"), dtype="datetime64[ns]")
    if not len(ymd):
        return out
    text = np.asarray(ymd, dtype=str)
    six = np.flatnonzero(np.strings.str_len(text) == 6)
    digits = text[six].astype("U6").view(np.uint32).reshape(-1, 6).astype(np.int64) - 48
    plain = ((digits >= 0) & (digits <= 9)).all(axis=1)
    d = np.where(plain[:, None], digits, 0)
    year, month, day = 2000 + 10 * d[:, 0] + d[:, 1], 10 * d[:, 2] + d[:, 3], \
        10 * d[:, 4] + d[:, 5]
    months = (year - 1970) * 12 + (month - 1)
    first = months.astype("datetime64[M]").astype("datetime64[D]")
    days_in_month = ((months + 1).astype("datetime64[M]").astype("datetime64[D]")
                     - first).astype(np.int64)
    real = plain & (month >= 1) & (month <= 12) & (day >= 1) & (day <= days_in_month)
    out[six[real]] = (first + (day - 1))[real].astype("datetime64[ns]")
    rest = np.ones(len(ymd), bool)
    rest[six[plain]] = False                 # plain digits: read above (or no such day)
    if rest.any():
        out[rest] = pd.to_datetime("20" + pd.Series(ymd[rest], dtype=object).astype(str),
                                   format="%Y%m%d", errors="coerce").to_numpy(
                                       dtype="datetime64[ns]")
    return out


def _split_pandas(s: pd.Series):
    text = s.astype("string").str.strip().str.upper()
    parts = text.str.extract(OCC_PATTERN)
    strike = pd.to_numeric(parts["strike"], errors="coerce").to_numpy(dtype=float,
                                                                     na_value=np.nan)
    return (parts["root"].to_numpy(dtype=object), parts["ymd"].astype(object),
            parts["cp"].to_numpy(dtype=object), strike)


def _split_arrow(s: pd.Series):
    """The four OSI fields with pyarrow's regex engine (C++), None where no match."""
    import pyarrow as pa
    import pyarrow.compute as pc
    try:
        arr = pa.array(s, type=pa.string(), from_pandas=True)
    except (pa.ArrowInvalid, pa.ArrowTypeError):
        obj = s.astype(object)
        obj = obj.where(obj.isna(), obj.astype(str))
        arr = pa.array(obj, type=pa.string(), from_pandas=True)
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    text = pc.utf8_upper(pc.utf8_trim_whitespace(arr))
    # fixed-width tail read from the right: YYMMDD (6), C/P (1), strike x 1000 (8)
    n = pc.utf8_length(text)
    ymd = pc.utf8_slice_codeunits(text, -15, -9)
    cp = pc.utf8_slice_codeunits(text, -9, -8)
    strike8 = pc.utf8_slice_codeunits(text, -8)
    root = pc.utf8_rtrim(pc.utf8_slice_codeunits(text, 0, -15), characters=" ")
    rlen = pc.utf8_length(root)
    valid = pc.and_kleene(pc.and_kleene(pc.greater_equal(n, 16), pc.less_equal(n, 21)),
                          pc.and_kleene(pc.utf8_is_digit(ymd), pc.utf8_is_digit(strike8)))
    valid = pc.and_kleene(valid, pc.is_in(cp, value_set=pa.array(["C", "P"])))
    valid = pc.and_kleene(valid, pc.and_kleene(pc.greater_equal(rlen, 1),
                                               pc.less_equal(rlen, 6)))
    valid = pc.and_kleene(valid, pc.match_substring_regex(root, r"^[A-Z0-9.]+$"))
    valid = pc.fill_null(valid, False)
    fields = (root, ymd, cp, strike8)

    def field(i):
        return pc.if_else(valid, fields[i], pa.scalar(None, pa.string()))

    strike = pc.cast(field(3), pa.int64()).to_numpy(zero_copy_only=False)
    strike = np.where(valid.to_numpy(zero_copy_only=False), strike, np.nan).astype(float)
    return (pd.arrays.ArrowStringArray(field(0)),
            pd.Series(field(1).to_numpy(zero_copy_only=False), dtype=object),
            field(2).to_numpy(zero_copy_only=False).astype(object), strike)


def format_occ(root, expiry, is_call, strike, *, pad: bool = True) -> np.ndarray:
    """Write OCC option symbols (Options Symbology Initiative, OCC 2010).

    Parameters
    ----------
    root : str or array-like of str
        Option root, 1 to 6 characters.
    expiry : date-like or array-like
        Expiry dates (years 2000-2099).
    is_call : bool or array-like of bool
    strike : float or array-like
        Strike in price units; must be a whole number of thousandths below 100,000.
    pad : bool
        Pad the root with spaces to six characters (the 21-character form).

    Returns
    -------
    ndarray of str
    """
    n = np.broadcast(np.asarray(root, dtype=object), np.asarray(is_call),
                     np.asarray(strike, dtype=float)).shape
    size = int(np.prod(n)) if n else 1
    roots = pd.Series(np.broadcast_to(np.asarray(root, dtype=object), n).ravel()
                      if n else [root], dtype="string").str.upper()
    if roots.isna().any() or (roots.str.len() > 6).any() or (roots.str.len() < 1).any():
        raise ValueError("OCC root must have 1 to 6 characters")
    exp = pd.to_datetime(pd.Series(np.broadcast_to(np.asarray(expiry, dtype=object), n)
                                   .ravel() if n else [expiry]))
    if exp.isna().any() or ((exp.dt.year < 2000) | (exp.dt.year > 2099)).any():
        raise ValueError("OCC expiry must be a date in 2000-2099")
    k = np.broadcast_to(np.asarray(strike, dtype=float), n).ravel() if n else \
        np.array([float(strike)])
    milli = np.round(k * 1000.0)
    if (~np.isfinite(k)).any() or (k <= 0).any() or (milli >= 1e8).any() \
            or (np.abs(milli - k * 1000.0) > 1e-6 * np.maximum(1.0, milli)).any():
        raise ValueError("OCC strike must be positive, below 100000 and in thousandths")
    cp = np.where(np.broadcast_to(np.asarray(is_call, dtype=bool), n).ravel()
                  if n else [bool(is_call)], "C", "P")
    root_part = roots.str.pad(6, side="right") if pad else roots
    out = (root_part + exp.dt.strftime("%y%m%d") + pd.Series(cp, dtype="string")
           + pd.Series(milli.astype(np.int64)).astype("string").str.zfill(8))
    result = out.to_numpy(dtype=object).astype(str)
    return result.reshape(n) if n else result.reshape(size)[0]
