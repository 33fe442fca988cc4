"""Loading an implied-vol history: one row per date and tenor (or expiry).

A file (CSV or Parquet) with ``date``, a tenor in calendar days *or* an expiry
date, the ATM implied vol and, optionally, the 25-delta put and call vols::

    date,tenor_days,atm_iv,iv_25d_put,iv_25d_call
    2025-03-04,30,0.182,0.221,0.164

It is read with the chain loader's care: column names by alias (``asof``,
``dte``, ``ATM Vol``, ``25D Put`` ...), vols in percent or decimals decided per
column by :func:`optbench.data.parse.percent_or_decimal`, tenors also written as
``1M``/``3M``/``1Y``, and every row either used or rejected with its reason.
Two rows for the same date and tenor that disagree are an error (optbench cannot
tell which one is right); a row repeated exactly is rejected as ``duplicate``.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from optbench.data.columns import header_key
from optbench.data.files import drop_blank_rows, read_table
from optbench.data.parse import percent_or_decimal, present, to_date, to_number
from optbench.errors import InputError

IV_ALIASES: dict[str, tuple[str, ...]] = {
    "date": ("date", "asof", "asofdate", "quotedate", "tradedate", "day", "observationdate",
             "valuationdate"),
    "tenor_days": ("tenordays", "tenor", "days", "calendardays", "dte", "daystoexpiry",
                   "daystoexpiration", "maturitydays", "term", "horizon"),
    "expiry": ("expiry", "expiration", "expirationdate", "expirydate", "maturity",
               "maturitydate", "exp"),
    "atm_iv": ("atmiv", "atmvol", "atm", "atmimpliedvol", "atmvolatility", "ivatm", "iv",
               "impliedvol", "impliedvolatility", "atmimpliedvolatility"),
    "iv_25d_put": ("iv25dput", "25dput", "put25d", "iv25p", "25dputvol", "putvol25d",
                   "iv25put", "25dputiv", "put25div", "vol25dput"),
    "iv_25d_call": ("iv25dcall", "25dcall", "call25d", "iv25c", "25dcallvol", "callvol25d",
                    "iv25call", "25dcalliv", "call25div", "vol25dcall"),
}
VOL_FIELDS = ("atm_iv", "iv_25d_put", "iv_25d_call")
#: above this decimal vol (500 %) a value is taken as a typing error, not a market
MAX_PLAUSIBLE_VOL = 5.0
#: calendar days per unit of a tenor written as 1W / 3M / 1Y (common practice)
_TENOR_UNITS = {"d": 1.0, "w": 7.0, "m": 365.0 / 12.0, "y": 365.0}
_TENOR_TEXT = re.compile(r"^\s*(\d+(?:\.\d+)?)\s*([dwmy])[a-z]*\s*$", re.IGNORECASE)
_SHOW = 5

_LOOKUP = {header_key(k): f for f, keys in IV_ALIASES.items() for k in keys}

#: reason code -> what it means (the rejected table's ``reason``)
REASONS = {
    "bad_date": "missing or unreadable date",
    "no_tenor": "neither a tenor nor a readable expiry",
    "bad_tenor": "tenor not a positive number of days (or expiry not after the date)",
    "bad_vol": "ATM implied vol missing, unreadable or not positive",
    "implausible_vol": f"ATM implied vol above {MAX_PLAUSIBLE_VOL:.0%}",
    "duplicate": "the same date, tenor and vols as an earlier row",
}


@dataclass(frozen=True, eq=False)
class IvHistory:
    """An implied-vol history as loaded.

    Attributes
    ----------
    source : str
    frame : DataFrame
        One row per used input row, sorted by date then tenor: ``date``
        (datetime64[ns]), ``tenor_days`` (int, calendar days), ``expiry``
        (datetime64[ns]), ``atm_iv``, ``iv_25d_put``, ``iv_25d_call`` (decimal vols,
        NaN where absent), ``tenor_given`` (True when the row gave a tenor, False when
        it gave an expiry), ``line`` (1-based input line).
    rejected : DataFrame
        ``line``, ``reason`` (a key of :data:`REASONS`), ``detail``.
    quality : dict
        ``rows_in``, ``rows_used``, ``rejected`` ({reason: count});
        ``rows_in == rows_used + sum(rejected.values())``.
    units : dict
        Per vol column read, ``"percent"`` or ``"decimal"``.
    issues : list of str
        What was found and done (cells left empty, units), one sentence each.
    """

    source: str
    frame: pd.DataFrame
    rejected: pd.DataFrame
    quality: dict
    units: dict = field(default_factory=dict)
    issues: list = field(default_factory=list)

    def __len__(self) -> int:
        return len(self.frame)


def map_iv_columns(columns) -> dict[str, str]:
    """Canonical field -> the file's column (the leftmost column of a field wins)."""
    found: dict[str, str] = {}
    for col in columns:
        f = _LOOKUP.get(header_key(col))
        if f is not None and f not in found:
            found[f] = col
    return found


def _is_header(cells: list[str]) -> bool:
    found = map_iv_columns(cells)
    return "date" in found and "atm_iv" in found


def _lines(lines: np.ndarray) -> str:
    shown = ", ".join(str(int(x)) for x in lines[:_SHOW])
    return shown + (f" and {len(lines) - _SHOW} more" if len(lines) > _SHOW else "")


def _has_percent_sign(col: pd.Series) -> bool:
    if col.dtype.kind in "biufcmM":
        return False
    return bool(col.astype("string").str.contains("%", regex=False).fillna(False).any())


def _tenor_days(col: pd.Series, decimal_comma: bool) -> np.ndarray:
    """Tenors in calendar days: numbers, or text like ``30d``, ``2W``, ``3M``, ``1Y``."""
    days = to_number(col, decimal_comma=decimal_comma)
    text_rows = np.isnan(days) & present(col)
    if text_rows.any():
        parts = col[text_rows].astype("string").str.extract(_TENOR_TEXT)
        n = pd.to_numeric(parts[0], errors="coerce").to_numpy(float, na_value=np.nan)
        unit = parts[1].str.lower().map(_TENOR_UNITS).to_numpy(float, na_value=np.nan)
        days[text_rows] = np.round(n * unit)
    return days


def load_iv_history(path: str | Path) -> IvHistory:
    """Load an implied-vol history file (CSV or Parquet).

    Parameters
    ----------
    path : str or Path
        The file, or a scenario folder holding ``iv_history.csv``.

    Returns
    -------
    IvHistory

    Raises
    ------
    InputError
        Missing/empty/unreadable file; no date, no ATM vol, or neither a tenor nor
        an expiry column; no usable row; two rows for one date and tenor with
        different vols.

    Notes
    -----
    Units per vol column: percent when its cells carry ``%`` or the median of its
    positive values exceeds 3.0, else decimals (:func:`optbench.data.parse.
    percent_or_decimal`). A tenor is calendar days; ``1W`` = 7, ``1M`` = 365/12
    rounded, ``1Y`` = 365 (common practice). A row with an expiry and no tenor gets
    ``tenor_days = expiry - date``; a row with a tenor gets ``expiry = date + tenor``.
    """
    path = Path(path)
    if path.is_dir():
        for name in ("iv_history.csv", "iv_history.parquet"):
            if (path / name).is_file():
                path = path / name
                break
        else:
            raise InputError(path, "folder holds no iv_history.csv")
    raw = read_table(path, header_test=_is_header)
    frame = drop_blank_rows(raw.frame)
    lines = (raw.line0 + frame.index.to_numpy()).astype(np.int64)
    frame = frame.reset_index(drop=True)
    cols = map_iv_columns(frame.columns)
    if "date" not in cols:
        raise InputError(path, "missing column 'date'")
    if "atm_iv" not in cols:
        raise InputError(path, "missing column 'atm_iv' (the ATM implied vol)")
    if "tenor_days" not in cols and "expiry" not in cols:
        raise InputError(path, "missing column 'tenor_days' or 'expiry'")
    dc = raw.decimal_comma
    n = len(frame)
    issues: list[str] = []
    date = to_date(frame[cols["date"]]).to_numpy(dtype="datetime64[ns]").astype("datetime64[D]")
    tenor = (_tenor_days(frame[cols["tenor_days"]], dc) if "tenor_days" in cols
             else np.full(n, np.nan))
    expiry = (to_date(frame[cols["expiry"]]).to_numpy(dtype="datetime64[ns]")
              .astype("datetime64[D]") if "expiry" in cols
              else np.full(n, np.datetime64("NaT"), dtype="datetime64[D]"))
    tenor_present = present(frame[cols["tenor_days"]]) if "tenor_days" in cols \
        else np.zeros(n, bool)
    expiry_present = present(frame[cols["expiry"]]) if "expiry" in cols else np.zeros(n, bool)

    vols: dict[str, np.ndarray] = {}
    units: dict[str, str] = {}
    for f in VOL_FIELDS:
        if f not in cols:
            vols[f] = np.full(n, np.nan)
            continue
        raw_col = frame[cols[f]]
        v = to_number(raw_col, decimal_comma=dc)
        v, is_pct = percent_or_decimal(v, _has_percent_sign(raw_col))
        vols[f] = v
        units[f] = "percent" if is_pct else "decimal"

    # --- reasons, first that applies wins
    reason = np.full(n, "", dtype=object)
    detail = np.full(n, "", dtype=object)

    def mark(code: str, mask: np.ndarray, text) -> None:
        take = mask & (reason == "")
        reason[take] = code
        detail[take] = text[take] if isinstance(text, np.ndarray) else text

    mark("bad_date", np.isnat(date), "date missing or unreadable")
    use_tenor = tenor_present
    from_expiry = ~use_tenor & ~np.isnat(expiry)
    mark("no_tenor", ~use_tenor & ~from_expiry,
         np.where(expiry_present, "expiry unreadable and no tenor", "no tenor and no expiry"))
    mark("bad_tenor", use_tenor & ~(tenor >= 1), "tenor unreadable or below one day")
    with np.errstate(invalid="ignore"):
        exp_days = (expiry - date).astype("timedelta64[D]").astype(float)
    exp_days[np.isnat(expiry) | np.isnat(date)] = np.nan
    mark("bad_tenor", from_expiry & ~(exp_days >= 1), "expiry not after the date")
    atm = vols["atm_iv"]
    mark("bad_vol", ~(atm > 0), "ATM implied vol missing, unreadable or not positive")
    mark("implausible_vol", atm > MAX_PLAUSIBLE_VOL, "ATM implied vol above 500%")

    tenor_days = np.where(use_tenor, tenor, exp_days)
    ok = reason == ""
    for f in ("iv_25d_put", "iv_25d_call"):
        if f in cols:
            bad = ok & present(frame[cols[f]]) & ~(vols[f] > 0)
            if bad.any():
                issues.append(f"{int(bad.sum())} rows with an unreadable or non-positive "
                              f"'{cols[f]}' left that cell empty (lines {_lines(lines[bad])})")
                vols[f] = np.where(bad, np.nan, vols[f])
            high = ok & (vols[f] > MAX_PLAUSIBLE_VOL)
            if high.any():
                issues.append(f"{int(high.sum())} rows with '{cols[f]}' above 500% left that "
                              f"cell empty (lines {_lines(lines[high])})")
                vols[f] = np.where(high, np.nan, vols[f])

    td = np.where(ok, tenor_days, 0).astype(np.int64)
    exp_out = np.where(use_tenor, date + td.astype("timedelta64[D]"), expiry)
    df = pd.DataFrame({"date": date.astype("datetime64[ns]"), "tenor_days": td,
                       "expiry": exp_out.astype("datetime64[ns]"),
                       "atm_iv": atm, "iv_25d_put": vols["iv_25d_put"],
                       "iv_25d_call": vols["iv_25d_call"], "tenor_given": use_tenor,
                       "line": lines})
    # --- repeats: exact -> rejected as duplicate; conflicting -> error
    cand = df[ok]
    key = ["date", "tenor_days"]
    dup_any = cand.duplicated(key, keep=False)
    if dup_any.any():
        same = cand.duplicated(key + list(VOL_FIELDS), keep="first")
        rest = cand[~same]
        clash = rest.duplicated(key, keep=False)
        if clash.any():
            first = rest[clash].sort_values(["date", "tenor_days", "line"]).iloc[:2]
            d0 = pd.Timestamp(first["date"].iloc[0]).date().isoformat()
            raise InputError(path, f"{d0} tenor {int(first['tenor_days'].iloc[0])} days is "
                                   f"given twice with different vols (lines "
                                   f"{int(first['line'].iloc[0])} and "
                                   f"{int(first['line'].iloc[1])}); keep one")
        dup_idx = same[same].index.to_numpy()
        reason[dup_idx] = "duplicate"
        detail[dup_idx] = "repeats an earlier row"
        ok = reason == ""
    used = df[ok].sort_values(["date", "tenor_days"], kind="stable").reset_index(drop=True)
    if used.empty:
        top = pd.Series(reason[reason != ""]).value_counts()
        why = f" (most rows: {REASONS[top.index[0]]})" if len(top) else ""
        raise InputError(path, f"no usable row{why}")
    rejected = pd.DataFrame({"line": lines[~ok], "reason": reason[~ok].astype(str),
                             "detail": detail[~ok].astype(str)})
    counts = {str(k): int(v) for k, v in rejected["reason"].value_counts().items()}
    for f, u in units.items():
        if u == "percent":
            issues.append(f"'{cols[f]}' read as percent and divided by 100")
    return IvHistory(source=str(path), frame=used, rejected=rejected,
                     quality={"rows_in": int(n), "rows_used": int(len(used)),
                              "rejected": counts},
                     units=units, issues=issues)
