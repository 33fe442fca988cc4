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
    text = s.astype("string").str.strip().str.upper()
    parts = text.str.extract(OCC_PATTERN)
    # OSI years are 20YY: strptime's %y would put 69-99 in the 1900s
    expiry = pd.to_datetime("20" + parts["ymd"], format="%Y%m%d", errors="coerce")
    strike = pd.to_numeric(parts["strike"], errors="coerce") / 1000.0
    ok = expiry.notna() & strike.notna()
    return pd.DataFrame({
        "root": parts["root"].where(ok),
        "expiry": expiry.where(ok),
        "is_call": (parts["cp"] == "C").fillna(False).astype(bool) & ok,
        "strike": strike.where(ok).astype(float),
        "ok": ok.astype(bool),
    }, index=s.index)


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
