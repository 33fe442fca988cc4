"""XLSX workbooks (openpyxl): one sheet per table, a header block on each sheet.

Values stay decimals; vols, percentages and probabilities get percent number formats
so a spreadsheet shows 21.50 % for 0.215. Every sheet starts with a header block
(title, underlying, as-of date, spot, rate, dividend yield, model, caution), then a
blank row, then the table with its field names in the header row (machine names, so a
re-read matches the JSON keys). Text cells are neutralised as in the CSV export.
"""
from __future__ import annotations

import datetime as _dt
import io
import math
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from optbench.report.csv import neutralise
from optbench.report.fields import EXCEL_FORMATS, KINDS

#: rows of the header block before the table's header row
HEADER_ROWS = 9


def _value(v: Any) -> Any:
    if v is None:
        return None
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        x = float(v)
        return x if math.isfinite(x) else None
    if isinstance(v, pd.Timestamp):
        return None if pd.isna(v) else v.date()
    if isinstance(v, _dt.datetime):
        return v.date()
    if isinstance(v, _dt.date):
        return v
    if isinstance(v, (dict, list, tuple)):
        return neutralise(str(v))
    return neutralise(str(v))


def _header(ws, title: str, result, model_text: str) -> None:
    from openpyxl.styles import Font
    ws.append([title])
    ws["A1"].font = Font(bold=True, size=13)
    rows = [("underlying", result.underlying), ("asof", result.asof),
            ("spot", float(result.spot)), ("rate", float(result.rate)),
            ("div_yield", float(result.div_yield)), ("model", model_text),
            ("caution", result.caution)]
    for key, value in rows:
        ws.append([key, _value(value)])
    ws["B3"].number_format = "yyyy-mm-dd"
    ws["B5"].number_format = "0.00%"
    ws["B6"].number_format = "0.00%"
    ws.append([])


def _table(ws, columns: Sequence[str], rows) -> None:
    from openpyxl.styles import Font
    ws.append(list(columns))
    hdr = ws.max_row
    for cell in ws[hdr]:
        cell.font = Font(bold=True)
    for row in rows:
        ws.append([_value(v) for v in row])
    for j, col in enumerate(columns, start=1):
        fmt = EXCEL_FORMATS.get(KINDS.get(col, ""), None)
        if fmt:
            for r in range(hdr + 1, ws.max_row + 1):
                ws.cell(row=r, column=j).number_format = fmt
        ws.column_dimensions[ws.cell(row=hdr, column=j).column_letter].width = max(
            10, min(28, len(str(col)) + 2))
    ws.freeze_panes = ws.cell(row=hdr + 1, column=1)


def _sheet(wb, name: str, title: str, result, model_text: str, frame: pd.DataFrame):
    ws = wb.create_sheet(name)
    _header(ws, title, result, model_text)
    _table(ws, list(frame.columns), frame.itertuples(index=False, name=None))
    return ws


def _save(wb) -> bytes:
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def comparison_xlsx(comparison) -> bytes:
    """Workbook with sheets Expiries, Strikes, Quality and Model."""
    from openpyxl import Workbook
    wb = Workbook()
    wb.remove(wb.active)
    m = comparison.model
    model_text = f"{m.name} / {m.dist} / mean {m.mean}"
    title = f"optbench compare: {comparison.underlying}"
    _sheet(wb, "Expiries", title + " - per expiry", comparison, model_text,
           comparison.expiry_frame())
    _sheet(wb, "Strikes", title + " - per strike", comparison, model_text,
           comparison.strike_frame())
    q = comparison.quality
    quality = [("rows_in", q.get("rows_in")), ("rows_used", q.get("rows_used"))]
    quality += [(f"rejected: {k}", v) for k, v in q.get("rejected", {}).items()]
    quality += [(f"warning: {k}", v) for k, v in q.get("warnings", {}).items()]
    _sheet(wb, "Quality", title + " - data quality", comparison, model_text,
           pd.DataFrame(quality, columns=["item", "count"]))
    md = m.to_dict()
    params = [(f"param {k}", v) for k, v in md.pop("params").items()]
    errs = [(f"std_error {k}", v) for k, v in md.pop("std_errors").items()]
    items = [(k, v) for k, v in md.items()] + params + errs
    items.append(("verdict_rule", comparison.verdict_rule))
    items.append(("band", f"{comparison.band[0]:g} to {comparison.band[1]:g}"))
    _sheet(wb, "Model", title + " - model", comparison, model_text,
           pd.DataFrame(items, columns=["item", "value"]))
    return _save(wb)


def hedge_xlsx(estimate) -> bytes:
    """Workbook with sheets Summary, Legs and Scenarios."""
    from openpyxl import Workbook
    wb = Workbook()
    wb.remove(wb.active)
    model_text = f"{estimate.model.get('name')} / {estimate.model.get('dist')}"
    title = f"optbench hedge: {estimate.underlying} {estimate.structure_name}"
    summary = list(estimate.summary().items()) + [
        ("strikes", " ".join(f"{k:g}" for k in estimate.strikes)),
        ("roll_method", estimate.roll_method), ("collar_note", estimate.collar_note)]
    ws = wb.create_sheet("Summary")
    _header(ws, title + " - summary", estimate, model_text)
    _table(ws, ["item", "value"], summary)
    for r in range(HEADER_ROWS + 2, ws.max_row + 1):
        fmt = EXCEL_FORMATS.get(KINDS.get(str(ws.cell(row=r, column=1).value), ""))
        if fmt:
            ws.cell(row=r, column=2).number_format = fmt
    ws.column_dimensions["A"].width = 24
    ws.column_dimensions["B"].width = 22
    _sheet(wb, "Legs", title + " - legs", estimate, model_text, estimate.leg_frame())
    _sheet(wb, "Scenarios", title + " - P&L at expiry", estimate, model_text,
           estimate.scenario_frame())
    return _save(wb)


def read_table(path_or_bytes, sheet: str) -> pd.DataFrame:
    """Read one optbench sheet back into a DataFrame (skips the header block)."""
    src = io.BytesIO(path_or_bytes) if isinstance(path_or_bytes, bytes) else path_or_bytes
    return pd.read_excel(src, sheet_name=sheet, skiprows=HEADER_ROWS, engine="openpyxl")
