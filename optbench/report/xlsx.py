"""XLSX workbooks: each table on a sheet of its own starting at A1, the notes on a
``Notes`` sheet.

Layout, the same for every command (``compare``, ``hedge``, ``screen``, ``check``,
``fit``, ``backtest``): the first sheet is the command's main table, so
``pandas.read_excel(path)`` reads it with default settings; row 1 of every sheet is
the header with the field names (the JSON keys), frozen; the last sheet, ``Notes``,
holds ``item, value`` rows: what the table rests on (source, as-of date, market
inputs and where they came from, model, verdict rule, warnings) and the caution (see
:mod:`optbench.report.notes`). Values stay decimals; vols, percentages and
probabilities carry percent number formats so a spreadsheet shows 21.50 % for 0.215.
Text cells are neutralised as in the CSV export.

The sheets are streamed by :class:`optbench.report.xlsx_stream.StreamingWorkbook`
chunk by chunk: pass ``out`` (a path or binary file) to write there, else the
workbook comes back as bytes.
"""
from __future__ import annotations

import io
from collections.abc import Iterable, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import IO, Any

import pandas as pd

from optbench.report.fields import EXCEL_FORMATS, KINDS
from optbench.report.notes import (backtest_notes, chain_notes, comparison_notes,
                                   fit_notes, hedge_notes, note_rows, screen_notes)

#: rows above a table's header row (the table starts at A1)
HEADER_ROWS = 0

#: name of the notes sheet in every workbook
NOTES_SHEET = "Notes"


def formats_for(columns: Iterable[str], kinds: dict[str, str] | None = None) -> dict:
    """Number format of each column by its kind (``optbench.report.fields``)."""
    kinds = KINDS if kinds is None else kinds
    return {c: EXCEL_FORMATS[kinds[c]] for c in columns if kinds.get(c) in EXCEL_FORMATS}


@contextmanager
def _workbook(out: str | Path | IO[bytes] | None):
    from optbench.report.xlsx_stream import StreamingWorkbook
    holder: dict[str, Any] = {}
    if out is None:
        target = io.BytesIO()
    elif isinstance(out, (str, Path)):
        target = open(out, "wb")
    else:
        target = out
    try:
        wb = StreamingWorkbook(target, formats=set(EXCEL_FORMATS.values()))
        holder["wb"] = wb
        yield holder
        wb.close()
        if out is None:
            holder["bytes"] = target.getvalue()
    finally:
        if isinstance(out, (str, Path)):
            target.close()


def _item_rows(wb, name: str, items: Sequence[tuple[str, Any]], head=("item", "value")):
    """An ``item, value`` sheet; each value gets the number format of its item's kind."""
    formats = [EXCEL_FORMATS.get(KINDS.get(str(k), ""), None) for k, _ in items]
    wb.add_rows(name, list(head), [list(r) for r in items], value_formats=formats)


def _notes(wb, notes: dict) -> None:
    _item_rows(wb, NOTES_SHEET, note_rows(notes))


def _result(holder) -> bytes | None:
    return holder.get("bytes")


def comparison_xlsx(comparison, out=None) -> bytes | None:
    """Sheets Expiries, Strikes (every expiry), Quality, Model and Notes."""
    c = comparison
    with _workbook(out) as h:
        wb = h["wb"]
        frame = c.expiry_frame()
        wb.add_table("Expiries", list(frame.columns), frame, formats_for(frame.columns))
        frames = [f for f in c.strikes.values() if len(f)]
        columns = list(frames[0].columns) if frames else list(c.strike_frame().columns)
        wb.add_table("Strikes", columns, frames, formats_for(columns))
        q = c.quality
        quality = [("rows_in", q.get("rows_in")), ("rows_used", q.get("rows_used"))]
        quality += [(f"rejected: {k}", v) for k, v in q.get("rejected", {}).items()]
        quality += [(f"flagged: {k}", v) for k, v in q.get("warnings", {}).items()]
        wb.add_rows("Quality", ["item", "count"], quality)
        md = c.model.to_dict()
        params = [(f"param {k}", v) for k, v in md.pop("params").items()]
        errs = [(f"std_error {k}", v) for k, v in md.pop("std_errors").items()]
        items = [(k, v if not isinstance(v, (dict, list)) else str(v)) for k, v in md.items()]
        _item_rows(wb, "Model", items + params + errs)
        _notes(wb, comparison_notes(c, "optbench compare"))
    return _result(h)


def hedge_xlsx(estimate, out=None) -> bytes | None:
    """Sheets Summary, Legs, Scenarios and Notes."""
    from optbench.report.csv import hedge_summary_items
    with _workbook(out) as h:
        wb = h["wb"]
        _item_rows(wb, "Summary", hedge_summary_items(estimate))
        legs = estimate.leg_frame()
        wb.add_table("Legs", list(legs.columns), legs, formats_for(legs.columns))
        scen = estimate.scenario_frame()
        wb.add_table("Scenarios", list(scen.columns), scen, formats_for(scen.columns))
        _notes(wb, hedge_notes(estimate, "optbench hedge"))
    return _result(h)


def screen_xlsx(result, out=None) -> bytes | None:
    """Sheets Screen (the ranked rows), Failures and Notes."""
    from optbench.report.screen import SCREEN_KINDS
    with _workbook(out) as h:
        wb = h["wb"]
        cols = list(result.columns)
        frame = pd.DataFrame([[r.get(c) for c in cols] for r in result.rows], columns=cols,
                             dtype=object)
        wb.add_table("Screen", cols, frame, formats_for(cols, SCREEN_KINDS))
        wb.add_rows("Failures", ["code", "folder", "reason", "attempts", "retry_reasons"],
                    [[f["code"], f["folder"], f["reason"], f.get("attempts", 1),
                      "; ".join(f.get("retry_reasons") or ())] for f in result.failures])
        _notes(wb, screen_notes(result, "optbench screen"))
    return _result(h)


def reason_rows(chain) -> list[tuple[str, str, int, str]]:
    """``(code, kind, rows, meaning)`` of every rejection reason and flag in a chain."""
    from optbench.data.validate import REASONS, WARNINGS
    q = chain.quality
    rows = [(k, "rejected", int(v), REASONS.get(k, "")) for k, v in q.rejected.items()]
    rows += [(k, "flagged", int(v), WARNINGS.get(k, "")) for k, v in q.warnings.items()]
    return rows


def chain_xlsx(chain, expiries: list[dict], out=None) -> bytes | None:
    """``optbench check``: sheets Rejected (every rejected row with its reason and the
    raw input fields), Reasons, Expiries and Notes."""
    with _workbook(out) as h:
        wb = h["wb"]
        rej = chain.rejected
        wb.add_table("Rejected", [str(c) for c in rej.columns], rej)
        wb.add_rows("Reasons", ["code", "kind", "rows", "meaning"], reason_rows(chain))
        cols = ["expiry", "calendar_days", "quotes", "calls", "puts", "strike_min",
                "strike_max"]
        wb.add_rows("Expiries", cols, [[e[c] for c in cols] for e in expiries])
        _notes(wb, chain_notes(chain, "optbench check"))
    return _result(h)


def fit_xlsx(doc: dict, out=None) -> bytes | None:
    """``optbench fit``: sheets Term structure, Model and Notes."""
    m = doc["model"]
    with _workbook(out) as h:
        wb = h["wb"]
        ts = pd.DataFrame(doc["term_structure"],
                          columns=["trading_days", "forecast_vol", "low", "high"])
        wb.add_table("Term structure", list(ts.columns), ts,
                     {"forecast_vol": "0.00%", "low": "0.00%", "high": "0.00%"})
        items = [(k, v) for k, v in m.items() if not isinstance(v, (dict, list))]
        items += [(f"param {k}", v) for k, v in (m.get("params") or {}).items()]
        items += [(f"std_error {k}", v) for k, v in (m.get("std_errors") or {}).items()]
        items += [("last_vol", doc.get("last_vol"))]
        _item_rows(wb, "Model", items)
        _notes(wb, fit_notes(doc, "optbench fit"))
    return _result(h)


def backtest_xlsx(result, daily: pd.DataFrame, caution: str, out=None) -> bytes | None:
    """``optbench backtest``: sheets Days (one row per out-of-sample day), VaR,
    Surprises and Notes."""
    with _workbook(out) as h:
        wb = h["wb"]
        wb.add_table("Days", list(daily.columns), daily, {"date": "yyyy-mm-dd"})
        var = [{"level": v.level, "exceedances": v.exceedances, "expected": v.expected,
                "kupiec_lr": v.kupiec.statistic, "kupiec_p": v.kupiec.p_value,
                "christoffersen_lr_ind": v.independence.statistic,
                "christoffersen_p": v.independence.p_value, "zone": v.zone}
               for v in result.var]
        vf = pd.DataFrame(var, columns=["level", "exceedances", "expected", "kupiec_lr",
                                        "kupiec_p", "christoffersen_lr_ind",
                                        "christoffersen_p", "zone"])
        wb.add_table("VaR", list(vf.columns), vf, {"level": "0.00%"})
        sf = pd.DataFrame(list(result.surprises), columns=["date", "z", "return", "sigma"])
        sf["date"] = pd.to_datetime(sf["date"])
        wb.add_table("Surprises", list(sf.columns), sf, {"date": "yyyy-mm-dd"})
        _notes(wb, backtest_notes(result, caution, "optbench backtest"))
    return _result(h)


def read_table(path_or_bytes, sheet: str | int = 0) -> pd.DataFrame:
    """Read one optbench sheet back into a DataFrame (the table starts at A1)."""
    src = io.BytesIO(path_or_bytes) if isinstance(path_or_bytes, bytes) else path_or_bytes
    return pd.read_excel(src, sheet_name=sheet, engine="openpyxl")
