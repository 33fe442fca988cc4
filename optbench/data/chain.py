"""Loading an option chain: any supported layout in, one canonical quotes table out.

``load_chain`` reads a CSV or Parquet chain in the long layout (one quote a row,
column names in any of their usual spellings), the wide layout (calls | strike |
puts on one row) or with OCC option symbols standing in for expiry, strike and
type; it validates every quote (:mod:`optbench.data.validate`) and returns an
:class:`OptionChain` whose ``quotes`` hold the usable quotes in canonical columns
and whose ``rejected`` frame keeps every other input row with its line number and
reason.
"""
from __future__ import annotations

import datetime as _dt
import functools
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from optbench.data.columns import SIDE_FIELDS, map_chain_columns, side_of
from optbench.data.files import RawTable, drop_blank_rows, read_table
from optbench.data.occ import occ_fields
from optbench.data.parse import (DATE_MAX, DATE_MIN, arrow_text, call_codes, date_array,
                                 percent_or_decimal, present, style_word, to_date,
                                 to_number, to_style)
from optbench.data.validate import REASONS, WARNINGS, assign_reasons, quote_warnings
from optbench.errors import InputError

DEFAULT_MAX_SPREAD = 1.0
"""Largest accepted relative spread (ask − bid) / mid: 1.0 = the spread may be as
wide as the mid itself (ask up to three times the bid)."""

DEFAULT_TINY_PRICE = 0.05
"""Mids below this (price units) are flagged ``tiny_price`` (common practice: a
nickel is the usual minimum tick on listed options, so such a price is mostly tick)."""

DEFAULT_MULTIPLIER = 100.0

DEFAULT_MAX_STRIKE_RATIO = 10.0
"""Strikes above this many times spot, or below spot divided by it, are rejected as
``implausible_strike`` (a strike typed with extra zeros, a placeholder such as 1e308).
Listed strikes lie well inside a factor of 10 of spot (common practice: exchanges
list from about a fifth to a few times spot, even on long-dated expiries)."""

STYLES = ("european", "american")
_STYLE_DTYPE = None


def _style_dtype() -> pd.CategoricalDtype:
    """The categorical dtype of the quotes' ``style`` column (:data:`STYLES`), built
    once: checking the categories costs more than building the column."""
    global _STYLE_DTYPE
    if _STYLE_DTYPE is None:
        _STYLE_DTYPE = pd.CategoricalDtype(STYLES)
    return _STYLE_DTYPE

QUOTE_COLUMNS = ("expiry", "strike", "is_call", "bid", "ask", "mid", "last", "volume",
                 "open_interest", "style", "multiplier", "t", "calendar_days", "line",
                 "warnings")


@dataclass(frozen=True)
class Quality:
    """What happened to the input rows.

    ``rows_in`` counts option quotes read (a wide-layout line carries two: its call
    and its put); ``rows_in == rows_used + sum(rejected.values())`` always.
    ``rejected`` maps reason code -> count, ``warnings`` flag -> count of kept quotes.
    """

    rows_in: int
    rows_used: int
    rejected: dict[str, int]
    warnings: dict[str, int]

    def as_dict(self) -> dict:
        return {"rows_in": self.rows_in, "rows_used": self.rows_used,
                "rejected": dict(self.rejected), "warnings": dict(self.warnings)}


@dataclass(frozen=True, eq=False)
class OptionChain:
    """A validated option chain.

    Attributes
    ----------
    source : str
        The file read.
    underlying : str
        The underlying's code or name ('' when neither file nor meta gives it).
    asof : datetime.date
        Quote date; option times run from its end of day.
    spot : float
        Underlying price at quote time (price units).
    rate, div_yield : float
        Continuously compounded risk-free rate and dividend yield (decimals).
    quotes : DataFrame
        Usable quotes, columns :data:`QUOTE_COLUMNS` (plus ``iv_file`` in decimals
        when the file has an IV column, and ``symbol`` when it has symbols), sorted
        by expiry, type (puts first) and strike.
    rejected : DataFrame
        ``line`` (1-based file line, header = 1), ``reason``, ``detail``, then the
        raw input fields as read.
    quality : Quality
    holidays : tuple of datetime.date
    spot_source, asof_source, rate_source, div_yield_source : str
        Where each market input came from: ``caller``, ``file``, ``meta`` or
        ``default``.
    style_source, multiplier_source : str
        The same for the exercise style and the contract multiplier; ``file+meta``
        (or ``file+default``) when the file's column is blank on some rows.
    layout : str
        ``long`` or ``wide``.
    notes : tuple of str
        Decisions the loader took that the user should know about.
    spot_reference, spot_reference_source : float, str
        With a caller's spot: the spot the file (or meta.toml) gives, and which of
        them gave it; NaN and "" when there is none or the spot is not overridden.
    dividends : DividendSchedule or None
        Known cash dividends (:mod:`optbench.data.dividends`), attached by the scenario
        loader or :func:`optbench.data.dividends.attach_dividends`.
    """

    source: str
    underlying: str
    asof: _dt.date
    spot: float
    rate: float
    div_yield: float
    quotes: pd.DataFrame
    rejected: pd.DataFrame
    quality: Quality
    holidays: tuple = ()
    spot_source: str = "file"
    asof_source: str = "file"
    rate_source: str = "default"
    div_yield_source: str = "default"
    layout: str = "long"
    style_source: str = "default"
    multiplier_source: str = "default"
    notes: tuple = field(default_factory=tuple)
    #: when the caller overrides the spot: the file's (or meta.toml's) own spot and
    #: where it came from, for the consistency checks (NaN and "" otherwise)
    spot_reference: float = float("nan")
    spot_reference_source: str = ""
    dividends: object = None

    @property
    def expiries(self) -> list[_dt.date]:
        """The distinct expiries of the usable quotes, in order."""
        return [d.date() for d in pd.DatetimeIndex(self.quotes["expiry"].unique()).sort_values()]


def _is_header(cells: list[str]) -> bool:
    return _is_header_cells(tuple(cells))


@functools.lru_cache(maxsize=256)
def _is_header_cells(cells: tuple) -> bool:
    """:func:`_is_header` once per distinct line (a universe's files share a header)."""
    found = map_chain_columns(cells)
    sides = sum(side_of(c) is not None for c in cells)
    return len(found) >= 2 or (sides >= 2 and "strike" in found)


def chain_file_in(folder: Path) -> Path:
    """The chain file of a scenario folder (``chain.csv`` or ``chain.parquet``)."""
    for name in ("chain.csv", "chain.parquet", "chain.pq"):
        if (folder / name).is_file():
            return folder / name
    raise InputError(folder, "folder holds no chain.csv or chain.parquet")


# --------------------------------------------------------------------------- layout

def _long_fields(frame: pd.DataFrame, colmap: dict[str, str], raw_columns=None):
    """Field -> raw column for the long layout, and the row positions.
    ``raw_columns``: the frame's ``(name, column)`` pairs when its names are unique."""
    if raw_columns is not None:
        by_name = dict(raw_columns)
        fields = {f: by_name[c] for f, c in colmap.items()}
    else:
        fields = {f: frame[c] for f, c in colmap.items()}
    return fields, np.arange(len(frame)), None


def _wide_fields(frame: pd.DataFrame, colmap: dict[str, str], sides: dict[str, tuple]):
    """Melt calls | strike | puts rows into two quotes per row (call first)."""
    n = len(frame)
    pos = np.concatenate([np.arange(n), np.arange(n)])
    fields: dict[str, pd.Series] = {}
    shared = {f: c for f, c in colmap.items() if f not in SIDE_FIELDS and f != "type"}
    for f, c in shared.items():
        fields[f] = pd.Series(np.concatenate([frame[c].to_numpy(dtype=object)] * 2),
                              dtype=object)
    by_side = {"call": {}, "put": {}}
    for col, (side, f) in sides.items():
        by_side[side].setdefault(f, col)
    for f in SIDE_FIELDS:
        cc, pc = by_side["call"].get(f), by_side["put"].get(f)
        if cc is None and pc is None:
            continue
        parts = [frame[c].to_numpy(dtype=object) if c is not None
                 else np.full(n, None, dtype=object) for c in (cc, pc)]
        fields[f] = pd.Series(np.concatenate(parts), dtype=object)
    fields["type"] = pd.Series(np.repeat(np.array(["C", "P"], dtype=object), n))
    side = np.repeat(np.array(["call", "put"], dtype=object), n)
    return fields, pos, side


def _require_columns(path: Path, frame: pd.DataFrame, fields: dict) -> None:
    if frame.shape[1] <= 1:
        raise InputError(path, "only one column found: the delimiter is not one of "
                         ", ; tab | or the file is not a chain")
    for f in ("bid", "ask"):
        if f not in fields:
            raise InputError(path, f"missing column '{f}' (no column named like it)")
    if "symbol" not in fields:
        for f in ("expiry", "strike", "type"):
            if f not in fields:
                raise InputError(path, f"missing column '{f}' (and no option-symbol column "
                                 "to take it from)")


# --------------------------------------------------------------------- market inputs

def _single_value(values: np.ndarray) -> tuple[float | None, int, float, float]:
    ok = values[np.isfinite(values)]
    if ok.size == 0:
        return None, 0, np.nan, np.nan
    if (ok == ok[0]).all():     # one value in every cell (the usual column): no sort
        return float(np.median(ok)), 1, float(ok[0]), float(ok[0])
    uniq = np.unique(ok)
    return float(np.median(ok)), uniq.size, float(uniq.min()), float(uniq.max())


def _resolve_number(name, caller, file_values, meta, default, notes, path):
    if caller is not None:
        return float(caller), "caller"
    if file_values is not None:
        value, count, lo, hi = _single_value(file_values)
        if value is not None:
            if count > 1:
                notes.append(f"{name}: the file gives {count} different values "
                             f"({lo:g} to {hi:g}); the median {value:g} is used")
            return value, "file"
    if meta is not None and name in meta:
        try:
            return float(meta[name]), "meta"
        except (TypeError, ValueError):
            raise InputError(path, f"meta value {name!r} is not a number") from None
    return default, "default"


def _as_date(value, source: str) -> _dt.date:
    if isinstance(value, _dt.datetime):
        value = value.date()
    if isinstance(value, _dt.date):
        if not DATE_MIN <= np.datetime64(value, "D") <= DATE_MAX:
            raise InputError(source, f"{value.isoformat()} is outside the dates optbench "
                                     f"reads ({DATE_MIN} to {DATE_MAX})")
        return value
    parsed = to_date(pd.Series([str(value)])).iloc[0]
    if pd.isna(parsed):
        raise InputError(source, f"not a date between {DATE_MIN} and {DATE_MAX}: {value!r}")
    return parsed.date()


# ------------------------------------------------------------------------ load_chain

def file_iv_decimals(raw: pd.Series, values: np.ndarray) -> tuple[np.ndarray, str]:
    """A file's implied-vol column as decimals, cell by cell, and a note ('' if none).

    A cell written with ``%`` is a percent; the other cells are read together by
    :func:`optbench.data.parse.percent_or_decimal` (percent when their median
    exceeds 3.0). A column mixing ``21.5%`` and ``0.215`` so reads both as 0.215.
    """
    if raw.dtype.kind in "biuf":
        pct_cell = np.zeros(len(values), bool)
    else:
        pct_cell = raw.astype("string").str.contains("%", regex=False).fillna(False) \
            .to_numpy(dtype=bool)
    out = np.array(values, dtype=float)
    out[pct_cell] = values[pct_cell] / 100.0
    plain_cells = ~pct_cell & np.isfinite(values)
    rest, rest_pct = percent_or_decimal(np.where(plain_cells, values, np.nan), False)
    out[~pct_cell] = rest[~pct_cell]
    if pct_cell.any() and plain_cells.any():
        form = "percent" if rest_pct else "decimals"
        return out, (f"the file's IV column mixes cells with % ({int(pct_cell.sum())}) and "
                     f"without ({int(plain_cells.sum())}, read as {form}); each cell is "
                     "converted by its own form")
    if pct_cell.any() or rest_pct:
        return out, "the file's IV column is in percent; converted to decimals"
    return out, ""


def _flag_words(prefix: str, suffix: str, flags) -> np.ndarray:
    """'' per row, or prefix + the names of the flags set on it + suffix; the text is
    built only for flagged rows."""
    n = len(flags[0][0])
    out = np.full(n, "", dtype=object)
    anyf = np.zeros(n, bool)
    for mask, _ in flags:
        anyf |= mask
    if not anyf.any():
        return out
    words = np.full(int(anyf.sum()), "", dtype=object)
    for mask, name in flags:
        m = mask[anyf]
        words[m] = np.where(words[m] == "", name, words[m] + ", " + name)
    out[anyf] = prefix + words + suffix
    return out


def _column_source(column, in_meta: bool) -> str:
    """Where a per-row input came from: ``file`` (the column, on every row), ``meta``
    or ``default`` (no column), ``file+meta``/``file+default`` (blank on some rows)."""
    fallback = "meta" if in_meta else "default"
    if column is None:
        return fallback
    has = present(column)
    if not has.any():
        return fallback
    return "file" if has.all() else f"file+{fallback}"


def _rejected_frame(frame: pd.DataFrame, rows: np.ndarray, front: dict,
                    raw_columns=None) -> pd.DataFrame:
    """The rejected rows: the ``front`` columns (line, reason, detail[, side]), then the
    raw fields of ``frame``'s rows ``rows`` as read (a raw column named like a front
    column gets `` (file)``), numbered from 0. One frame built from the columns; a file
    with repeated column names takes the concatenation it is equivalent to."""
    names = [c if c not in front else f"{c} (file)" for c in frame.columns.tolist()]
    if len(set(names) | set(front)) == len(names) + len(front):
        if not len(rows):
            return _no_rejected_rows(names, front, raw_columns if raw_columns is not None
                                     else list(frame.items()))
        columns = dict(front)
        for name, (_, raw) in zip(names, raw_columns if raw_columns is not None
                                  else frame.items()):
            columns[name] = raw.to_numpy().take(rows) if isinstance(raw.dtype, np.dtype) \
                else raw.array.take(rows)
        return pd.DataFrame(columns)
    raw_rows = frame.iloc[rows].reset_index(drop=True)
    raw_rows.columns = names
    return pd.concat([pd.DataFrame(front), raw_rows], axis=1)


#: empty rejected frames by the layout of their columns (see :func:`_no_rejected_rows`)
_EMPTY_REJECTED: dict = {}


def _no_rejected_rows(names: list, front: dict, raw_columns: list) -> pd.DataFrame:
    """The rejected frame of a file with no rejected row: what :func:`_rejected_frame`
    builds from its columns' empty takes, built once per layout (column names, the
    front and raw columns' dtypes and array types) and copied (a deep copy, so no
    caller shares it). Most files reject nothing, and building an empty frame of a
    dozen columns costs more than copying one."""
    layout = (tuple(names), tuple((k, np.asarray(v).dtype) for k, v in front.items()),
              tuple(raw.dtype if isinstance(raw.dtype, np.dtype)
                    else (raw.dtype, type(raw.array), _arrow_type(raw.array))
                    for _, raw in raw_columns))
    empty = _EMPTY_REJECTED.get(layout)
    if empty is None:
        rows = np.zeros(0, dtype=np.intp)
        columns = dict(front)
        for name, (_, raw) in zip(names, raw_columns):
            columns[name] = raw.to_numpy().take(rows) if isinstance(raw.dtype, np.dtype) \
                else raw.array.take(rows)
        empty = pd.DataFrame(columns)
        if len(_EMPTY_REJECTED) >= 64:
            _EMPTY_REJECTED.clear()
        _EMPTY_REJECTED[layout] = empty
    return empty.copy(deep=True)


def _arrow_type(array) -> str:
    """The pyarrow type behind an array on pyarrow storage ('' for any other)."""
    if not hasattr(array, "__arrow_array__"):
        return ""
    return str(array.__arrow_array__().type)


def _one_cell(arrow):
    """The first cell of a pyarrow text array (as an array of one) when every cell
    holds the same bytes and none is missing, else None: the array's distinct cells
    when there is one, found by comparing bytes."""
    from optbench.data.parse import _full_text_bytes
    bytes_ = _full_text_bytes(arrow)
    if bytes_ is None:
        return None
    offsets, data = bytes_
    n, size = len(arrow), int(offsets[1] - offsets[0])
    if size == 0 or offsets[-1] - offsets[0] != n * size \
            or not (np.diff(offsets) == size).all():
        return None
    rows = data[offsets[0]:offsets[-1]].reshape(n, size)
    return arrow.slice(0, 1) if (rows == rows[0]).all() else None


def _plain_ascii_name(cell) -> str | None:
    """The name in a one-cell pyarrow text array whose bytes are ASCII, the first and
    the last printed (33-126, no blank): upper case by ASCII's rule, which is what
    trimming blanks (none at the ends) and upper-casing by pyarrow's kernels give such a
    cell. None for any other cell."""
    from optbench.data.parse import _full_text_bytes
    offsets, data = _full_text_bytes(cell)
    raw = data[offsets[0]:offsets[1]]
    if not raw.size or (raw >= 128).any() or not (33 <= raw[0] <= 126) \
            or not (33 <= raw[-1] <= 126):
        return None
    return raw.tobytes().decode("ascii").upper()


def _single_underlying(column: pd.Series) -> str | None:
    """The underlying of a text column on pyarrow storage whose non-blank cells all
    name one underlying (stripped, upper case): what the counting in
    :func:`load_chain` finds there, without counting. None otherwise."""
    arrow = arrow_text(column)
    if arrow is None:
        return None
    # the distinct cells first: the same set of names, normalised on a few cells
    cells = _one_cell(arrow)
    if cells is not None:
        name = _plain_ascii_name(cells)
        if name is not None:
            return name
    import pyarrow.compute as pc
    norm = pc.utf8_upper(pc.utf8_trim_whitespace(cells if cells is not None
                                                 else pc.unique(arrow)))
    named = pc.unique(pc.filter(norm, pc.fill_null(pc.not_equal(norm, ""), False)))
    return str(named[0].as_py()) if len(named) == 1 else None


def load_chain(path: str | Path, *, spot: float | None = None,
               asof: _dt.date | str | None = None, rate: float | None = None,
               div_yield: float | None = None, style: str | None = None,
               multiplier: float | None = None,
               max_spread: float | None = DEFAULT_MAX_SPREAD,
               holidays: Iterable = (), tiny_price: float = DEFAULT_TINY_PRICE,
               meta: Mapping | None = None,
               max_strike_ratio: float | None = DEFAULT_MAX_STRIKE_RATIO,
               dividends=None) -> OptionChain:
    """Load and validate an option chain.

    Parameters
    ----------
    path : str or Path
        CSV or Parquet chain file, or a scenario folder holding ``chain.csv`` /
        ``chain.parquet``.
    spot : float, optional
        Underlying price; else the file's ``underlying_price`` column (its median
        when the rows disagree, with a note), else ``meta['spot']``.
    asof : date or ISO str, optional
        Quote date; else the file's ``quote_date`` (the latest one when several:
        rows of other dates are rejected as ``other_quote_date``), else
        ``meta['asof']``.
    rate, div_yield : float, optional
        Continuously compounded decimals; else a ``rate`` / ``div_yield`` column,
        else meta, else 0.0. The source used is recorded (``rate_source``, ...).
    style : {"european", "american"}, optional
        Exercise style for every row; else the file's ``style`` column, else
        ``meta['style']``, else european.
    multiplier : float, optional
        Contract multiplier for every row; else the file's column, else meta, else 100.
    max_spread : float or None
        Largest accepted relative spread (ask − bid) / mid (1.0 = spread up to 100 %
        of mid); ``None`` accepts any spread.
    holidays : iterable of dates
        Exchange holidays, carried for the trading-day calendar.
    tiny_price : float
        Mids below this many price units are flagged ``tiny_price``.
    meta : mapping, optional
        A scenario's ``meta.toml`` values, used where neither caller nor file gives one.
    max_strike_ratio : float or None
        Strikes above ``spot * max_strike_ratio`` or below ``spot / max_strike_ratio``
        are rejected as ``implausible_strike`` (default
        :data:`DEFAULT_MAX_STRIKE_RATIO`); ``None`` switches the rule off.
    dividends : DividendSchedule or path of a dividend CSV, optional
        Known cash dividends (:mod:`optbench.data.dividends`): the price bounds allow
        for them and the chain carries them (``dividends``) with a note.

    Returns
    -------
    OptionChain

    Raises
    ------
    InputError
        The file is missing, empty, binary, not a table, lacks a required column,
        or gives no spot / quote date (every missing market input named in one
        message); or an override is invalid.
    """
    path = Path(path)
    if path.is_dir():
        path = chain_file_in(path)
    meta = dict(meta or {})
    notes: list[str] = []
    raw: RawTable = read_table(path, header_test=_is_header)
    # the header's labels and the raw columns once, for the blank-row check, the fields
    # and the rejected rows (the columns only when the labels are unique)
    labels = raw.frame.columns.tolist()
    unique = raw.frame.columns.is_unique
    raw_columns = list(raw.frame.items()) if unique else None
    frame = drop_blank_rows(raw.frame, raw_columns)
    file_lines = raw.line0 + frame.index.to_numpy()
    if not (isinstance(frame.index, pd.RangeIndex) and frame.index.start == 0
            and frame.index.step == 1):
        frame = frame.reset_index(drop=True)
    if frame is not raw.frame and unique:
        raw_columns = list(frame.items())
    if raw.last_line is not None and file_lines.size and file_lines[-1] != raw.last_line:
        notes.append("some quoted cells span several lines: line numbers count records "
                     "from the header, not physical lines")
    if frame.shape[1] <= 1:
        _require_columns(path, frame, {})
    colmap = map_chain_columns(labels)
    sides = {c: s for c in labels if c not in colmap.values()
             and (s := side_of(c)) is not None}
    side_set = {(s, f) for s, f in sides.values()}
    wide = "type" not in colmap and "symbol" not in colmap and \
        {("call", "bid"), ("put", "bid")} <= side_set
    if wide:
        fields, pos, side = _wide_fields(frame, colmap, sides)
    else:
        fields, pos, side = _long_fields(frame, colmap, raw_columns)
    _require_columns(path, frame, fields)
    if len(frame) == 0:
        raise InputError(path, "the file has a header but no quotes")

    n = len(pos)
    line = file_lines[pos]
    p: dict[str, np.ndarray] = {"line": line}
    dc = raw.decimal_comma

    def col(name):
        return fields.get(name)

    def missing(name):
        c = col(name)
        return np.ones(n, bool) if c is None else ~present(c)

    # ---- option symbols: fill or cross-check expiry / strike / type
    occ = None
    sym = col("symbol")
    bad_symbol = np.zeros(n, bool)
    mismatch = np.zeros(n, bool)
    mismatch_detail = np.full(n, "", dtype=object)
    if sym is not None:
        has_sym = present(sym)
        parsed = occ_fields(sym.reset_index(drop=True))
        ok = parsed["ok"]
        if has_sym.any() and ok[has_sym].mean() >= 0.5:
            occ = parsed
            bad_symbol = has_sym & ~ok
        else:
            notes.append("the symbol column is not in OCC form; it is kept but not read")

    expiry = date_array(col("expiry")) if col("expiry") is not None else \
        np.full(n, np.datetime64("NaT"), dtype="datetime64[ns]")
    strike = to_number(col("strike"), decimal_comma=dc) if col("strike") is not None \
        else np.full(n, np.nan)
    # 1 call, 0 put, -1 empty or unreadable
    call_code = call_codes(col("type")) if col("type") is not None \
        else np.full(n, -1, dtype=np.int8)
    miss = {f: missing(f) for f in ("expiry", "strike", "type", "bid", "ask")}
    bad_date = ~miss["expiry"] & np.isnat(expiry)
    bad_strike = ~miss["strike"] & np.isnan(strike)
    known_type = call_code >= 0
    bad_type = ~miss["type"] & ~known_type
    if occ is not None:
        ok = occ["ok"]
        o_exp = occ["expiry"]
        o_k = occ["strike"]
        o_c = occ["is_call"]
        both = ok & ~miss["expiry"] & ~bad_date
        m_exp = both & (o_exp != expiry)
        both = ok & ~miss["strike"] & ~bad_strike
        m_k = both & (np.abs(o_k - strike) > 1e-6 * np.maximum(1.0, np.abs(o_k)))
        both = ok & ~miss["type"] & known_type
        m_c = both & (o_c != (call_code == 1))
        mismatch = m_exp | m_k | m_c
        mismatch_detail = _flag_words("symbol disagrees on ", "",
                                      [(m_exp, "expiry"), (m_k, "strike"), (m_c, "type")])
        fill = ok & miss["expiry"]
        expiry = np.where(fill, o_exp, expiry)
        miss["expiry"] = miss["expiry"] & ~ok
        fill = ok & miss["strike"]
        strike = np.where(fill, o_k, strike)
        miss["strike"] = miss["strike"] & ~ok
        fill = ok & miss["type"]
        call_code = np.where(fill, o_c.astype(np.int8), call_code).astype(np.int8)
        miss["type"] = miss["type"] & ~ok
    bad_symbol_needed = bad_symbol  # an unreadable OCC symbol is always reported
    for f in ("expiry", "strike", "type"):
        miss[f] = miss[f] & ~bad_symbol_needed

    bid = to_number(col("bid"), decimal_comma=dc)
    ask = to_number(col("ask"), decimal_comma=dc)
    bad_bid = ~miss["bid"] & np.isnan(bid)
    bad_ask = ~miss["ask"] & np.isnan(ask)

    # ---- style and multiplier per row
    if style is not None:
        american = np.full(n, style_word(style, "--style") == "american")
        bad_style = np.zeros(n, bool)
        style_source = "caller"
    else:
        style_source = _column_source(col("style"), "style" in meta)
        default_style = style_word(meta.get("style"), "meta style") or "european"
        if col("style") is not None:
            st = to_style(col("style")).to_numpy(dtype=object)
            has = present(col("style"))
            bad_style = has & pd.isna(st)
            american = np.where(has & ~bad_style, st == "american",
                                default_style == "american")
        else:
            american = np.full(n, default_style == "american")
            bad_style = np.zeros(n, bool)
    if multiplier is not None:
        if not np.isfinite(multiplier) or multiplier <= 0:
            raise InputError("--multiplier", f"must be a positive number, not {multiplier}")
        mult = np.full(n, float(multiplier))
        bad_mult = np.zeros(n, bool)
        multiplier_source = "caller"
    else:
        multiplier_source = _column_source(col("multiplier"), "multiplier" in meta)
        try:
            default_mult = float(meta.get("multiplier", DEFAULT_MULTIPLIER))
        except (TypeError, ValueError):
            raise InputError("meta.toml", f"multiplier {meta.get('multiplier')!r} is not a "
                             "number") from None
        if not np.isfinite(default_mult) or default_mult <= 0:
            raise InputError("meta.toml", f"multiplier must be positive, not {default_mult:g}")
        if col("multiplier") is not None:
            mult = to_number(col("multiplier"), decimal_comma=dc)
            has = present(col("multiplier"))
            bad_mult = has & np.isnan(mult)
            if has.any():
                # a multiplier column that has values elsewhere: an empty or NaN-like
                # cell ("nan", "NA") is not a multiplier, not a licence for the default
                bad_mult |= ~has
            else:
                notes.append(f"the multiplier column is empty: {default_mult:g} is used")
            mult = np.where(has, mult, default_mult)
        else:
            mult = np.full(n, default_mult)
            bad_mult = np.zeros(n, bool)
    bad_number = bad_strike | bad_bid | bad_ask | bad_mult
    bad_number_detail = _flag_words("", " not a number",
                                    [(bad_strike, "strike"), (bad_bid, "bid"),
                                     (bad_ask, "ask"), (bad_mult, "multiplier")])

    # ---- underlying, quote date, spot, rate, yield
    other_underlying = np.zeros(n, bool)
    underlying = ""
    single = _single_underlying(col("underlying")) if col("underlying") is not None \
        else None
    if single is not None:
        underlying = single
    elif col("underlying") is not None:
        und = col("underlying").astype("string").str.strip().str.upper()
        counts = und[und.notna() & (und != "")].value_counts()
        if len(counts):
            underlying = str(counts.index[0])
            if len(counts) > 1:
                other_underlying = (und.notna() & (und != "") & (und != underlying)
                                    ).to_numpy(dtype=bool)
                notes.append(f"the file holds {len(counts)} underlyings; {underlying} "
                             "(the most quoted) is used, the others are rejected")
    if not underlying:
        if meta.get("code"):
            underlying = str(meta["code"])
        elif occ is not None and pd.Series(occ["root"]).notna().any():
            underlying = str(pd.Series(occ["root"]).dropna().mode().iloc[0])

    other_quote_date = np.zeros(n, bool)
    qd = date_array(col("quote_date")) \
        if col("quote_date") is not None else None
    if asof is not None:
        asof_d, asof_source = _as_date(asof, "--asof"), "caller"
    elif qd is not None and (~np.isnat(qd)).any():
        days = qd[~np.isnat(qd)]
        # one quote date in every dated cell (the usual file): no sort
        days = days[:1] if (days == days[0]).all() else np.unique(days)
        asof_d, asof_source = pd.Timestamp(days[-1]).date(), "file"
        if days.size > 1:
            notes.append(f"the file holds {days.size} quote dates; the latest, {asof_d}, "
                         "is used and rows of other dates are rejected")
    elif meta.get("asof") is not None:
        asof_d, asof_source = _as_date(meta["asof"], "meta asof"), "meta"
    else:
        asof_d, asof_source = None, ""
    missing_inputs = []
    if asof_d is None:
        what = "no readable date in its quote_date column" if qd is not None \
            else "no quote_date column"
        missing_inputs.append(f"no quote date (the file has {what}; give --asof YYYY-MM-DD)")
    bad_quote_date = np.zeros(n, bool)
    if qd is not None:
        bad_quote_date = present(col("quote_date")) & np.isnat(qd)
        if asof_d is not None:
            other_quote_date = ~np.isnat(qd) & (qd != np.datetime64(asof_d, "ns"))
            dated = ~np.isnat(qd)
            if asof_source == "caller" and dated.any() and other_quote_date[dated].all():
                days = np.unique(qd[dated]).astype("datetime64[D]")
                shown = ", ".join(str(d) for d in days[:3]) + (
                    f" and {days.size - 3} more" if days.size > 3 else "")
                raise InputError("--asof", f"{asof_d.isoformat()} is not a quote date of "
                                 f"{path.name}: its quotes are of {shown}")

    file_spot = to_number(col("underlying_price"), decimal_comma=dc) \
        if col("underlying_price") is not None else None
    spot_v, spot_source = _resolve_number("spot", spot, file_spot, meta, None, notes, path)
    if spot_v is None:
        what = "no readable underlying_price" if col("underlying_price") is not None \
            else "no underlying_price column"
        missing_inputs.append(f"no spot price (the file has {what}; give --spot)")
    if missing_inputs:
        raise InputError(path, "; ".join(missing_inputs))
    spot_ref, spot_ref_source = float("nan"), ""
    if spot_source == "caller":
        ref, ref_source = _resolve_number("spot", None, file_spot, meta, None, [], path)
        if ref is not None and np.isfinite(ref) and ref > 0:
            spot_ref, spot_ref_source = float(ref), ref_source
    if not np.isfinite(spot_v) or spot_v <= 0:
        raise InputError("--spot" if spot_source == "caller" else path,
                         f"spot must be a positive price, not {spot_v:g}")
    rate_v, rate_source = _resolve_number(
        "rate", rate, to_number(col("rate")) if col("rate") is not None else None,
        meta, 0.0, notes, path)
    q_v, q_source = _resolve_number(
        "div_yield", div_yield, to_number(col("div_yield"))
        if col("div_yield") is not None else None, meta, 0.0, notes, path)
    for name, source in (("rate", rate_source), ("div_yield", q_source)):
        if source == "default":
            word = {"rate": "risk-free rate", "div_yield": "dividend yield"}[name]
            notes.append(f"no {word} given (caller, file or meta.toml): 0.0 is used")
    for name, v in (("rate", rate_v), ("div_yield", q_v)):
        if not np.isfinite(v) or abs(v) > 1.0:
            raise InputError("--" + name.replace("_", "-"),
                             f"{v:g} is not a continuously compounded decimal (0.04 = 4%)")

    asof64 = np.datetime64(asof_d, "D")
    calendar_days = ((expiry.astype("datetime64[D]") - asof64)
                     .astype("timedelta64[D]").astype(float))
    calendar_days[np.isnat(expiry)] = np.nan

    p["expiry"] = expiry
    p["strike"] = strike
    is_call = call_code == 1
    p["is_call"] = is_call
    p["bid"] = bid
    p["ask"] = ask
    p["multiplier"] = mult
    p["american"] = american
    p["calendar_days"] = calendar_days
    for f, m in miss.items():
        p[f"missing_{f}"] = m
    p["bad_symbol"] = bad_symbol
    p["bad_date"] = bad_date
    p["bad_quote_date"] = bad_quote_date
    p["bad_number"] = bad_number
    p["bad_number_detail"] = bad_number_detail
    p["bad_type"] = bad_type
    p["bad_style"] = bad_style
    p["symbol_mismatch"] = mismatch
    p["symbol_mismatch_detail"] = mismatch_detail
    p["other_underlying"] = other_underlying
    p["other_quote_date"] = other_quote_date
    if max_spread is not None and (not np.isfinite(max_spread) or max_spread <= 0):
        raise InputError("--max-spread", f"must be a positive number, not {max_spread}")

    if max_strike_ratio is not None and (not np.isfinite(max_strike_ratio)
                                         or max_strike_ratio <= 1):
        raise InputError("--max-strike-ratio", f"must be a number above 1, not "
                                               f"{max_strike_ratio}")

    if dividends is not None:
        from optbench.data.dividends import resolve_dividends
        dividends = resolve_dividends(dividends, None, None)
    reason, detail = assign_reasons(p, spot=spot_v, rate=rate_v, div_yield=q_v,
                                    max_spread=max_spread, max_strike_ratio=max_strike_ratio,
                                    dividends=dividends.arrays(asof_d) if dividends else None)
    kept = reason == ""

    # ---- optional fields
    opt = {}
    bad_optional = np.zeros(n, bool)
    for f in ("last", "volume", "open_interest", "iv"):
        c = col(f)
        if c is None:
            opt[f] = np.full(n, np.nan)
            continue
        v = to_number(c, decimal_comma=dc)
        bad_optional |= present(c) & np.isnan(v)
        opt[f] = v
    mid = 0.5 * (bid + ask)
    warn = quote_warnings(opt["volume"][kept], opt["open_interest"][kept], mid[kept],
                          bad_optional[kept], tiny_price=tiny_price)

    # sorted by expiry, type (puts first), strike, line; numpy takes before the frame
    idx = np.flatnonzero(kept)
    kc = is_call[idx]
    order = idx[np.lexsort((line[idx], strike[idx], kc, expiry[idx]))]
    pos_in_kept = np.empty(n, dtype=np.int64)
    pos_in_kept[idx] = np.arange(idx.size)
    warn_sorted = pd.Categorical.from_codes(np.asarray(warn.codes)[pos_in_kept[order]],
                                            dtype=warn.dtype, validate=False)
    quotes = pd.DataFrame({
        "expiry": expiry[order].astype("datetime64[ns]"),
        "strike": strike[order].astype(float),
        "is_call": is_call[order],
        "bid": bid[order], "ask": ask[order], "mid": mid[order],
        "last": opt["last"][order], "volume": opt["volume"][order],
        "open_interest": opt["open_interest"][order],
        "style": pd.Categorical.from_codes(
            american[order].astype(np.int8), dtype=_style_dtype(), validate=False),
        "multiplier": mult[order].astype(float),
        "t": calendar_days[order] / 365.0,
        "calendar_days": calendar_days[order].astype(np.int64),
        "line": line[order].astype(np.int64),
        "warnings": warn_sorted,
    }, copy=False)  # every column a new array of its own
    if col("iv") is not None:
        iv_dec, note = file_iv_decimals(col("iv"), opt["iv"])
        quotes["iv_file"] = iv_dec[order]
        if note:
            notes.append(note)
    if sym is not None:
        quotes["symbol"] = sym.iloc[order].reset_index(drop=True)

    rej = ~kept
    # the rejected rows in line order (stable: a wide line's call before its put)
    rej_at = np.flatnonzero(rej)
    rej_at = rej_at[np.argsort(line[rej_at], kind="stable")]
    rejected = _rejected_frame(frame, pos[rej_at], {
        "line": line[rej_at].astype(np.int64), "reason": reason[rej_at].astype(object),
        "detail": detail[rej_at].astype(object),
        **({"side": side[rej_at]} if side is not None else {})}, raw_columns)

    found, found_count = np.unique(reason[rej].astype(str), return_counts=True)
    counts = dict(zip(found.tolist(), found_count.tolist()))
    rejected_counts = {code: int(counts[code]) for code in REASONS if code in counts}
    # quotes per flag combination (each combination is one category of ``warn``)
    per_combo = zip(warn.categories, np.bincount(np.asarray(warn.codes),
                                                 minlength=len(warn.categories)))
    per_combo = [(combo, c) for combo, c in per_combo]
    warning_counts = {}
    for f in WARNINGS:
        count = sum(int(c) for combo, c in per_combo if f in str(combo).split(","))
        if count:
            warning_counts[f] = count
    quality = Quality(rows_in=n, rows_used=int(kept.sum()), rejected=rejected_counts,
                      warnings=warning_counts)
    assert quality.rows_in == quality.rows_used + sum(rejected_counts.values())

    hol = tuple(sorted({_as_date(h, "holidays") for h in (holidays or ())}))
    return OptionChain(source=str(path), underlying=underlying, asof=asof_d,
                       spot=float(spot_v), rate=float(rate_v), div_yield=float(q_v),
                       quotes=quotes, rejected=rejected, quality=quality, holidays=hol,
                       spot_source=spot_source, asof_source=asof_source,
                       rate_source=rate_source, div_yield_source=q_source,
                       layout="wide" if wide else "long",
                       style_source=style_source, multiplier_source=multiplier_source,
                       spot_reference=spot_ref, spot_reference_source=spot_ref_source,
                       dividends=dividends,
                       notes=tuple(notes) + ((dividends.describe(asof_d),) if dividends
                                             else ()))
