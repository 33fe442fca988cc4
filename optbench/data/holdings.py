"""Loading a portfolio: its holdings and the price history of each holding.

Three inputs, each loaded with the chain loader's care (column aliases, every row
used or reported with its reason, one-line errors naming the file):

* a **holdings file** — one row per holding: ``symbol`` and either ``quantity``
  (units held) or ``weight`` (share of the portfolio's value, decimal or percent),
  optionally ``price`` (today's price of one unit);
* **price histories** of the holdings — a folder with one history file per holding
  (``<symbol>.csv``, read by :func:`optbench.data.load_history`), or one *wide* CSV of
  closes (a ``date`` column and one column of closes per symbol);
* or, in place of both, a **history of the portfolio's own value**
  (``date`` and ``value``).

Pure: frames in, frozen result objects out; problems travel in ``issues`` (the whole
file) and ``holding_issues`` (per symbol); nothing is filled in silently.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from optbench.data.columns import header_key, map_history_columns
from optbench.data.files import drop_blank_rows, read_table
from optbench.data.parse import present, to_date, to_number
from optbench.errors import InputError

HOLDING_ALIASES: dict[str, tuple[str, ...]] = {
    "symbol": ("symbol", "ticker", "code", "holding", "security", "instrument", "name",
               "securityid", "isin", "asset"),
    "quantity": ("quantity", "qty", "shares", "units", "position", "holdings",
                 "nominal", "amount"),
    "weight": ("weight", "weightpct", "weightpercent", "pctweight", "allocation",
               "portfolioweight", "share", "pct"),
    "price": ("price", "lastprice", "last", "close", "marketprice", "unitprice", "px"),
}

VALUE_ALIASES = ("value", "portfoliovalue", "nav", "netassetvalue", "marketvalue", "total",
                 "totalvalue", "equity", "close", "adjclose", "price")

#: Reasons a holdings row is not used (``Holdings.rejected["reason"]``).
HOLDING_REASONS = {
    "no_symbol": "no symbol on the row",
    "no_size": "neither a quantity nor a weight could be read",
    "zero_size": "quantity or weight is zero",
    "bad_price": "price present but not a positive number (history's last close used)",
}

_SHOW = 5


def _lines(lines) -> str:
    lines = [int(x) for x in lines]
    shown = ", ".join(str(x) for x in lines[:_SHOW])
    return shown + (f" and {len(lines) - _SHOW} more" if len(lines) > _SHOW else "")


def _map(columns, aliases: dict[str, tuple[str, ...]]) -> dict[str, str]:
    lookup = {header_key(k): f for f, keys in aliases.items() for k in keys}
    found: dict[str, str] = {}
    for col in columns:
        f = lookup.get(header_key(col))
        if f is not None and f not in found:
            found[f] = col
    return found


@dataclass(frozen=True, eq=False)
class Holdings:
    """The holdings file as used.

    Attributes
    ----------
    source : the file.
    table : DataFrame, one row per symbol: ``symbol`` (upper case, stripped),
        ``quantity`` (NaN when sized by weight), ``weight`` (NaN when sized by
        quantity), ``price`` (NaN when not given), ``lines`` (input lines, text).
    sized_by : ``"quantity"`` or ``"weight"``.
    rejected : DataFrame ``line``, ``reason``, ``detail`` of rows not used.
    issues : what was found and done, one sentence each.
    rows_in : data rows read (``rows_in == rows used + len(rejected)``; rows of
        the same symbol are combined into one holding, see ``issues``).
    """

    source: str
    table: pd.DataFrame
    sized_by: str
    rejected: pd.DataFrame
    issues: tuple[str, ...]
    rows_in: int

    @property
    def symbols(self) -> list[str]:
        return self.table["symbol"].tolist()


def load_holdings(path: str | Path) -> Holdings:
    """Load a holdings file (CSV or Parquet): ``symbol``, ``quantity | weight[, price]``.

    Quantities may be negative (short positions). Weights given in percent (summing
    to about 100) are divided by 100; weights that do not sum to one are scaled to
    sum to one, and both are reported. Rows of the same symbol are combined (lots).

    Raises
    ------
    InputError
        Missing/unreadable file, no symbol column, neither a quantity nor a weight
        column, both a quantity and a weight column, no usable row.
    """
    path = Path(path)
    raw = read_table(path, header_test=lambda cells: "symbol" in _map(cells, HOLDING_ALIASES))
    frame = drop_blank_rows(raw.frame)
    lines = raw.line0 + frame.index.to_numpy()
    frame = frame.reset_index(drop=True)
    cols = _map(frame.columns, HOLDING_ALIASES)
    if "symbol" not in cols:
        raise InputError(path, "missing column 'symbol'")
    if "quantity" in cols and "weight" in cols:
        raise InputError(path, f"has both a quantity column ('{cols['quantity']}') and a "
                               f"weight column ('{cols['weight']}'); give one of them")
    if "quantity" not in cols and "weight" not in cols:
        raise InputError(path, "missing column 'quantity' or 'weight'")
    sized_by = "quantity" if "quantity" in cols else "weight"
    dc = raw.decimal_comma
    sym_raw = frame[cols["symbol"]]
    has_sym = present(sym_raw)
    symbol = sym_raw.astype("string").str.strip().str.upper().fillna("").to_numpy(dtype=object)
    size_col = frame[cols[sized_by]]
    pct_sign = False
    if sized_by == "weight" and size_col.dtype == object:
        pct_sign = bool(size_col.astype("string").str.contains("%", regex=False).fillna(False).any())
    size = to_number(size_col, decimal_comma=dc)
    price = (to_number(frame[cols["price"]], decimal_comma=dc) if "price" in cols
             else np.full(len(frame), np.nan))
    price_given = present(frame[cols["price"]]) if "price" in cols else np.zeros(len(frame), bool)

    reason = np.full(len(frame), "", dtype=object)
    detail = np.full(len(frame), "", dtype=object)
    no_sym = ~has_sym | (symbol == "")
    reason[no_sym] = "no_symbol"
    no_size = ~no_sym & ~np.isfinite(size)
    reason[no_size] = "no_size"
    size_given = present(size_col)
    detail[no_size & size_given] = f"{sized_by} is not a number"
    detail[no_size & ~size_given] = f"{sized_by} missing"
    zero = (reason == "") & (size == 0)
    reason[zero] = "zero_size"
    detail[zero] = f"{sized_by} is 0"
    used = reason == ""
    if not used.any():
        raise InputError(path, "no usable holding (every row lacks a symbol or a size)")
    issues: list[str] = []
    bad_price = used & price_given & ~(price > 0)
    if bad_price.any():
        issues.append(f"{int(bad_price.sum())} rows with a price that is not a positive "
                      f"number: the history's last close is used (lines "
                      f"{_lines(lines[bad_price])})")
        price = np.where(bad_price, np.nan, price)
    rejected = pd.DataFrame({"line": lines[~used].astype(int), "reason": reason[~used],
                             "detail": detail[~used]})
    rows = pd.DataFrame({"symbol": symbol[used], "size": size[used], "price": price[used],
                         "line": lines[used].astype(int)})
    grouped = rows.groupby("symbol", sort=False)
    table = pd.DataFrame({
        "symbol": list(grouped.groups.keys()),
        "size": grouped["size"].sum().to_numpy(float),
        "price": grouped["price"].last().to_numpy(float),
        "lines": grouped["line"].agg(lambda s: ",".join(str(x) for x in s)).to_numpy(),
    })
    repeated = table["lines"].str.contains(",", regex=False)
    if repeated.any():
        shown = "; ".join(f"{s} (lines {ln})" for s, ln in
                          zip(table["symbol"][repeated], table["lines"][repeated]))
        issues.append(f"{int(repeated.sum())} symbols appear on more than one row; their "
                      f"{sized_by}s are added: {shown}")
    if sized_by == "weight":
        total = float(table["size"].sum())
        if pct_sign or 50.0 < total < 150.0:
            table["size"] = table["size"] / 100.0
            issues.append("weights read as percentages (divided by 100)")
            total /= 100.0
        if total <= 0:
            raise InputError(path, f"weights sum to {total:g}; they must sum to a positive "
                                   "number")
        if abs(total - 1.0) > 1e-6:
            issues.append(f"weights sum to {total:.4%}; scaled to sum to 100%")
            table["size"] = table["size"] / total
        table["weight"], table["quantity"] = table["size"], np.nan
    else:
        table["quantity"], table["weight"] = table["size"], np.nan
    table = table[["symbol", "quantity", "weight", "price", "lines"]]
    if len(rejected):
        counts = rejected["reason"].value_counts()
        issues.append("rows not used: " + ", ".join(
            f"{n} {r} ({HOLDING_REASONS[r]}; lines "
            f"{_lines(rejected.loc[rejected['reason'] == r, 'line'])})"
            for r, n in counts.items()))
    return Holdings(source=str(path), table=table.reset_index(drop=True), sized_by=sized_by,
                    rejected=rejected, issues=tuple(issues), rows_in=int(len(frame)))


@dataclass(frozen=True, eq=False)
class PricePanel:
    """Closes of several series on a common date index.

    Attributes
    ----------
    source : the file or folder.
    closes : DataFrame, index = sorted distinct dates (datetime64[ns]), one column per
        symbol (upper case), NaN where that series has no usable close on the date.
    issues : whole-file findings.
    series_issues : ``{symbol: [finding, ...]}`` per series.
    """

    source: str
    closes: pd.DataFrame
    issues: tuple[str, ...] = ()
    series_issues: dict = field(default_factory=dict)

    @property
    def symbols(self) -> list[str]:
        return [str(c) for c in self.closes.columns]


def _wide_frame(path: Path, value_only: bool = False):
    def header(cells):
        return "date" in map_history_columns(cells)
    raw = read_table(path, header_test=header)
    frame = drop_blank_rows(raw.frame)
    lines = raw.line0 + frame.index.to_numpy()
    frame = frame.reset_index(drop=True)
    hcols = map_history_columns(frame.columns)
    if "date" not in hcols:
        raise InputError(path, "missing column 'date'")
    if frame.shape[1] < 2:
        raise InputError(path, "no column of closes besides the date")
    return raw, frame, lines, hcols["date"]


def _panel_from_frame(path: Path, raw, frame: pd.DataFrame, lines: np.ndarray,
                      date_col: str, value_cols: dict[str, str]) -> PricePanel:
    """Closes of ``value_cols`` (``{symbol: column}``) with every dropped cell reported."""
    issues: list[str] = []
    series_issues: dict[str, list[str]] = {s: [] for s in value_cols}
    dates = to_date(frame[date_col]).to_numpy(dtype="datetime64[ns]")
    bad_date = np.isnat(dates)
    if bad_date.all():
        raise InputError(path, f"no readable date in column '{date_col}'")
    if bad_date.any():
        issues.append(f"{int(bad_date.sum())} rows with a missing or unreadable date "
                      f"dropped (lines {_lines(lines[bad_date])})")
    data = {}
    for sym, col in value_cols.items():
        v = to_number(frame[col], decimal_comma=raw.decimal_comma)
        given = present(frame[col])
        bad = ~bad_date & given & ~(v > 0)
        if bad.any():
            series_issues[sym].append(f"{int(bad.sum())} closes that are not positive "
                                      f"numbers left out (lines {_lines(lines[bad])})")
        data[sym] = np.where(v > 0, v, np.nan)
    df = pd.DataFrame(data)
    df["__date"], df["__line"] = dates, lines
    df = df[~bad_date]
    if not df["__date"].is_monotonic_increasing:
        issues.append("dates were not in order; sorted")
        df = df.sort_values("__date", kind="stable")
    dup = df["__date"].duplicated(keep="last").to_numpy()
    if dup.any():
        issues.append(f"{int(dup.sum())} dates given more than once; the last row of each "
                      f"is kept (dropped lines {_lines(df['__line'].to_numpy()[dup])})")
        df = df[~dup]
    closes = df.set_index(pd.DatetimeIndex(df["__date"].to_numpy(), name="date"))[
        list(value_cols)]
    for sym in value_cols:
        if closes[sym].notna().sum() < 2:
            series_issues[sym].append("fewer than two usable closes")
    return PricePanel(source=str(path), closes=closes, issues=tuple(issues),
                      series_issues={k: v for k, v in series_issues.items() if v})


def load_price_panel(path: str | Path, symbols: list[str] | None = None) -> PricePanel:
    """Closes of the holdings: a folder of history files or one wide CSV of closes.

    Folder: ``<symbol>.csv`` (or ``.parquet``, any case) per holding, read by
    :func:`optbench.data.load_history` (adjusted close preferred, its findings kept
    per symbol); files that match no holding are listed. Wide file: a ``date`` column
    and one column of closes per symbol (headers are the symbols).

    Symbols asked for but absent are reported in ``series_issues`` with an all-NaN
    column, so the caller can report them per holding and carry on.
    """
    path = Path(path)
    wanted = [s.upper() for s in symbols] if symbols is not None else None
    if path.is_dir():
        from optbench.data.history import load_history
        files = {p.stem.upper(): p for p in sorted(path.iterdir())
                 if p.is_file() and p.suffix.lower() in (".csv", ".parquet", ".pq", ".gz")}
        files = {k.removesuffix(".CSV"): v for k, v in files.items()}
        if not files:
            raise InputError(path, "folder holds no history file (<symbol>.csv)")
        series, series_issues, issues = {}, {}, []
        for sym in (wanted if wanted is not None else list(files)):
            p = files.get(sym)
            if p is None:
                series_issues[sym] = [f"no history file {sym}.csv in {path}"]
                continue
            try:
                h = load_history(p)
            except InputError as err:
                series_issues[sym] = [f"history not usable: {err}"]
                continue
            series[sym] = pd.Series(h.close, index=pd.DatetimeIndex(
                h.dates.astype("datetime64[ns]")))
            if h.issues:
                series_issues[sym] = [f"{p.name}: {x}" for x in h.issues]
        if wanted is not None:
            extra = sorted(set(files) - set(wanted))
            if extra:
                issues.append(f"{len(extra)} history files match no holding and are not "
                              f"used: {', '.join(extra[:_SHOW])}"
                              + (" ..." if len(extra) > _SHOW else ""))
        closes = pd.DataFrame(series)
        closes.index.name = "date"
        panel = PricePanel(source=str(path), closes=closes.sort_index(), issues=tuple(issues),
                           series_issues=series_issues)
    else:
        raw, frame, lines, date_col = _wide_frame(path)
        value_cols = {}
        for c in frame.columns:
            if c == date_col:
                continue
            sym = str(c).strip().upper()
            if sym in value_cols:
                raise InputError(path, f"symbol {sym} has two columns of closes")
            value_cols[sym] = c
        panel = _panel_from_frame(path, raw, frame, lines, date_col, value_cols)
        if wanted is not None:
            extra = sorted(set(value_cols) - set(wanted))
            missing = [s for s in wanted if s not in value_cols]
            issues = list(panel.issues)
            if extra:
                issues.append(f"{len(extra)} columns match no holding and are not used: "
                              f"{', '.join(extra[:_SHOW])}" + (" ..." if len(extra) > _SHOW else ""))
            si = dict(panel.series_issues)
            for s in missing:
                si[s] = [f"no column {s} in {path.name}"]
            panel = PricePanel(source=panel.source, closes=panel.closes, issues=tuple(issues),
                               series_issues=si)
    if wanted is not None:
        closes = panel.closes.reindex(columns=wanted)
        panel = PricePanel(source=panel.source, closes=closes, issues=panel.issues,
                           series_issues=panel.series_issues)
    return panel


def load_value_history(path: str | Path) -> PricePanel:
    """A history of the portfolio's own value: ``date`` and ``value`` (also ``nav``,
    ``portfolio_value``, ``close`` ...). Returns a one-column panel (``PORTFOLIO``)."""
    path = Path(path)
    raw, frame, lines, date_col = _wide_frame(path)
    keys = {header_key(c): c for c in frame.columns if c != date_col}
    col = next((keys[k] for k in VALUE_ALIASES if k in keys), None)
    if col is None:
        if len(keys) == 1:
            col = next(iter(keys.values()))
        else:
            raise InputError(path, "missing column 'value' (the portfolio's value per date)")
    panel = _panel_from_frame(path, raw, frame, lines, date_col, {"PORTFOLIO": col})
    if panel.closes["PORTFOLIO"].notna().sum() < 2:
        raise InputError(path, "fewer than two usable values")
    return panel


__all__ = ["Holdings", "PricePanel", "load_holdings", "load_price_panel",
           "load_value_history", "HOLDING_ALIASES", "HOLDING_REASONS"]
