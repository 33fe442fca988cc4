"""Exports of a screen (:class:`optbench.screening.screen.ScreenResult`): a terminal
table, JSON (rows under ``rows``), CSV and XLSX. Values stay decimals in files;
the terminal table shows percentage points and money per 1,000,000 of notional."""
from __future__ import annotations

from optbench.report.csv import write_rows
from optbench.report.fields import fmt
from optbench.report.jsonout import dumps

#: kind of each screen column, for formatting (see optbench.report.fields)
SCREEN_KINDS = {
    "code": "text", "name": "text", "tenor_days": "int", "expiry": "date",
    "calendar_days": "int", "trading_days": "int", "atm_iv": "vol",
    "forecast_vol": "vol", "forecast_low": "vol", "forecast_high": "vol",
    "iv_minus_forecast": "volpt", "iv_forecast_ratio": "num", "verdict": "text",
    "floor": "pct", "put_strike": "price", "protection_cost": "money",
    "protection_expected_payoff": "money", "protection_overpay": "money",
    "protection_cost_pct_annual": "pct", "model": "text", "fallback_reason": "text",
    "rows_in": "int", "rows_used": "int", "spot": "price", "asof": "date", "style": "text",
    "multiplier": "num", "sources": "text", "error": "text", "folder": "text",
    "floor_put_verdict": "text", "put25_verdict": "text", "drift_rule": "text",
    "drift_annual": "pct",
    "warnings": "text",
}

SCREEN_LABELS = {
    "code": "Code", "tenor_days": "Tenor", "expiry": "Expiry", "calendar_days": "Days",
    "atm_iv": "ATM\nIV", "forecast_low": "Fcst\nlow", "forecast_vol": "Fcst",
    "forecast_high": "Fcst\nhigh", "iv_minus_forecast": "IV-\nFcst", "verdict": "Verdict",
    "protection_cost": "Cost", "protection_expected_payoff": "Expected\npayoff",
    "protection_overpay": "Over-\npay", "protection_cost_pct_annual": "Cost\n% a year",
    "floor_put_verdict": "Put\nverdict",
    "model": "Model", "error": "Problem",
}

SCREEN_BRIEF = ("code", "tenor_days", "expiry", "calendar_days", "atm_iv", "forecast_low",
                "forecast_vol", "forecast_high", "iv_minus_forecast", "verdict",
                "protection_cost", "protection_expected_payoff", "protection_overpay",
                "floor_put_verdict",
                "error")

#: verdicts readable without colour, marked as in the workbench
VERDICT_MARK = {"rich": "▲ rich", "cheap": "▼ cheap", "fair": "= fair"}


def _comment(result) -> str:
    return (f"optbench screen of {result.universe}; sorted by {result.sort}"
            f"{' (descending)' if result.descending else ''}; protection: put at "
            f"{result.floor:.0%} of spot per {result.notional:,.0f} notional. "
            f"{result.caution}")


def inputs_note(rows) -> str:
    """One line: the style, multiplier and input sources the screened underlyings
    used, each distinct combination with the codes that used it."""
    groups: dict[str, list[str]] = {}
    for r in rows:
        if r.get("style") is None:
            continue
        key = f"{r['style']}, multiplier {r['multiplier']:g} ({r.get('sources') or ''})"
        codes = groups.setdefault(key, [])
        if r["code"] not in codes:
            codes.append(r["code"])
    if not groups:
        return "Inputs: none screened."
    if len(groups) == 1:
        return f"Inputs of every underlying: {next(iter(groups))}."
    return "Inputs: " + "; ".join(f"{', '.join(codes)}: {key}" for key, codes in groups.items()) + "."


def screen_json(result) -> str:
    return dumps(result, kind="screen")


def screen_csv(result) -> str:
    cols = result.columns
    return write_rows(cols, ([r.get(c) for c in cols] for r in result.rows), _comment(result))


def screen_xlsx(result) -> bytes:
    """One sheet ``Screen`` (header block then the table) and one ``Failures``."""
    import io

    from openpyxl import Workbook
    from openpyxl.styles import Font

    from optbench.report.fields import EXCEL_FORMATS
    from optbench.report.xlsx import _value

    wb = Workbook()
    ws = wb.active
    ws.title = "Screen"
    ws.append(["optbench screen"])
    ws["A1"].font = Font(bold=True, size=13)
    for key, value in (("universe", result.universe), ("sort", result.sort),
                       ("floor", result.floor), ("notional", result.notional),
                       ("model", f"{result.model}/{result.dist}"),
                       ("caution", result.caution)):
        ws.append([key, _value(value)])
    ws.append([])
    ws.append(list(result.columns))
    header = ws.max_row
    for cell in ws[header]:
        cell.font = Font(bold=True)
    for row in result.rows:
        ws.append([_value(row.get(c)) for c in result.columns])
    for j, col in enumerate(result.columns, start=1):
        number_format = EXCEL_FORMATS.get(SCREEN_KINDS.get(col, "text"))
        if number_format:
            for r in range(header + 1, ws.max_row + 1):
                ws.cell(row=r, column=j).number_format = number_format
    ws.freeze_panes = ws.cell(row=header + 1, column=1)
    failures = wb.create_sheet("Failures")
    failures.append(["code", "folder", "reason"])
    for f in result.failures:
        failures.append([_value(f["code"]), _value(f["folder"]), _value(f["reason"])])
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


#: rows of the XLSX header block before the table's header row
XLSX_HEADER_ROWS = 8


def screen_table(result, *, width: int | None = None, color: bool = False) -> str:
    from rich import box
    from rich.table import Table
    from rich.text import Text

    from optbench.report.tables import _render

    title = (f"Screen of {result.universe}: implied against forecast (vols in %, "
             f"differences in vol points), protection = put at {result.floor:.0%} of "
             f"spot per {result.notional:,.0f} notional, paid at the ask")
    table = Table(title=title, title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False)
    for c in SCREEN_BRIEF:
        kind = SCREEN_KINDS[c]
        if c == "error":
            table.add_column(SCREEN_LABELS[c], overflow="ellipsis", no_wrap=True,
                             max_width=24)
            continue
        table.add_column(SCREEN_LABELS.get(c, c), no_wrap=True,
                         min_width=10 if c == "expiry" else (8 if c == "verdict" else 6),
                         justify="left" if kind in ("text", "date") else "right")
    styles = {"rich": "red", "cheap": "green", "fair": ""}
    for r in result.rows:
        cells = []
        for c in SCREEN_BRIEF:
            if c == "error":
                cells.append("failed (below)" if r.get(c) and r.get("atm_iv") is None
                             else (r.get(c) or ""))
            elif c in ("verdict", "floor_put_verdict"):
                v = r.get(c) or "–"
                cells.append(Text(VERDICT_MARK.get(v, v), style=styles.get(v, "")))
            else:
                cells.append(fmt(r.get(c), SCREEN_KINDS[c], percent_sign=False))
        table.add_row(*cells)
    notes = [f"Ranked by {result.sort}{' (largest first)' if result.descending else ''}. "
             "Verdict: rich above the forecast band, cheap below, fair inside. "
             "Put verdict: the floor put's ask against the band of its model-expected "
             "payoff (rich = expensive protection)."]
    drifts = sorted({(r.get("drift_rule"), r.get("drift_annual")) for r in result.rows
                     if r.get("drift_rule")}, key=str)
    if drifts:
        notes.append("Drift of simulated prices: " + "; ".join(
            f"{rule} {fmt(annual, 'pct')} a year" for rule, annual in drifts)
            + " (risk-free = r - q, no expected excess return).")
    for f in result.failures:
        notes.append(f"Could not screen {f['code']}: {f['reason']}")
    warned = {}
    for r in result.rows:
        if r.get("warnings"):
            warned.setdefault(r.get("code"), r["warnings"])
    for code, text in warned.items():
        notes.append(f"Warnings for {code}: {text}")
    notes.append(inputs_note(result.rows))
    notes.append(result.caution)
    return _render([table, *notes], width=width, color=color)
