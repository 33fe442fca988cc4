"""Exports of a screen (:class:`optbench.screening.screen.ScreenResult`): a terminal
table, JSON (rows under ``rows``), CSV and XLSX. Values stay decimals in files;
the terminal table shows percentage points and money per 1,000,000 of notional."""
from __future__ import annotations

from optbench.report.csv import write_rows
from optbench.report.fields import fmt
from optbench.report.jsonout import dumps


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
    return "Inputs: " + "; ".join(f"{', '.join(codes)}: {key}"
                                  for key, codes in groups.items()) + "."

def fits_note(rows) -> str:
    """One line saying which underlyings' models came from the fit cache and from
    which fit date ('' when every model was fitted in this screen)."""
    reused: dict[tuple, list[str]] = {}
    for r in rows:
        if r.get("fit_source") in ("cached", "filtered"):
            codes = reused.setdefault((r["fit_source"], r.get("fit_date")), [])
            if r["code"] not in codes:
                codes.append(r["code"])
    if not reused:
        return ""
    parts = [f"{len(codes)} {'filtered from' if source == 'filtered' else 'held from'} "
             f"the cached fit of {day} ({', '.join(codes[:5])}"
             f"{', …' if len(codes) > 5 else ''})"
             for (source, day), codes in sorted(reused.items(), key=str)]
    return ("Fit cache: models not refitted — " + "; ".join(parts)
            + ". Parameters held as estimated on that date; the variance recursion runs "
              "over the days since.")


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
    "attempts": "int", "retry_reasons": "text",
    "fit_source": "text", "fit_date": "date",
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


def attempts_note(failure: dict) -> str:
    """`` (after 3 attempts: …)`` for a failure that was retried, else ''."""
    n = failure.get("attempts") or 1
    if n <= 1:
        return ""
    earlier = "; ".join(failure.get("retry_reasons") or ())
    return f" (after {n} attempts{': ' + earlier if earlier else ''})"


def retried_note(rows) -> str:
    """One line naming the underlyings screened only after a retry, or ''."""
    seen: dict[str, tuple] = {}
    for r in rows:
        if (r.get("attempts") or 1) > 1 and r.get("atm_iv") is not None:
            seen.setdefault(r["code"], (r["attempts"], r.get("retry_reasons") or ""))
    if not seen:
        return ""
    return "Screened after a retry: " + "; ".join(
        f"{code} ({n} attempts: {why})" for code, (n, why) in seen.items()) + "."


def screen_json(result) -> str:
    return dumps(result, kind="screen")


def screen_csv(result):
    """Every row and column of the screen (decimals), notes attached (see
    :mod:`optbench.report.notes`)."""
    from optbench.report.notes import screen_notes
    cols = result.columns
    return write_rows(cols, ([r.get(c) for c in cols] for r in result.rows),
                      screen_notes(result, "optbench screen"))


def screen_xlsx(result, out=None):
    """Sheets Screen (the ranked rows at A1), Failures and Notes."""
    from optbench.report.xlsx import screen_xlsx as write
    return write(result, out)


def _title(result) -> str:
    return (f"Screen of {result.universe}: implied against forecast volatility")


def _lede(result) -> str:
    return (f"Ranked by {result.sort}{' (largest first)' if result.descending else ''}. "
            f"Vols in %, differences in vol points; protection is a put at "
            f"{result.floor:.0%} of spot per {result.notional:,.0f} notional, paid at the "
            f"ask; model {result.model} / {result.dist}. Verdict: rich above the forecast "
            "band, cheap below, fair inside.")


def _cell_text(row: dict, c: str) -> str:
    if c == "verdict":
        v = row.get(c)
        return VERDICT_MARK.get(v, v) if v else "–"
    if c == "error":
        return row.get(c) or ""
    return fmt(row.get(c), SCREEN_KINDS.get(c, "text"), percent_sign=False)


def _label(c: str) -> str:
    return SCREEN_LABELS.get(c, c).replace("\n", " ")


def screen_markdown(result) -> str:
    """The ranked table as Markdown, with its notes, failures and the caution."""
    from optbench.report.markdown import _esc
    head = "| " + " | ".join(_esc(_label(c)) for c in SCREEN_BRIEF) + " |"
    align = "|" + "|".join(":---" if SCREEN_KINDS[c] in ("text", "date") else "---:"
                           for c in SCREEN_BRIEF) + "|"
    body = ["| " + " | ".join(_esc(_cell_text(r, c)) for c in SCREEN_BRIEF) + " |"
            for r in result.rows]
    lines = [f"# {_esc(_title(result))}", "", _esc(_lede(result)), "", head, align, *body, ""]
    if result.failures:
        lines += ["## Could not screen", ""]
        lines += [f"- {_esc(f['code'])}: {_esc(f['reason'] + attempts_note(f))}"
                  for f in result.failures]
        lines.append("")
    warnings = list(getattr(result, "warnings", ()) or ())
    if warnings:
        lines += ["## Notes", ""] + [f"- {_esc(w)}" for w in warnings] + [""]
    lines += [f"*{_esc(result.caution)}*", ""]
    return "\n".join(lines)


def screen_html(result) -> str:
    """The ranked table as a self-contained HTML page (no figures)."""
    import html as _html

    from optbench.report.html import _page
    e = _html.escape
    head = "".join(f'<th class="{"t" if SCREEN_KINDS[c] in ("text", "date") else ""}">'
                   f"{e(_label(c))}</th>" for c in SCREEN_BRIEF)
    body = []
    for r in result.rows:
        cells = []
        for c in SCREEN_BRIEF:
            cls = ["t"] if SCREEN_KINDS[c] in ("text", "date") else []
            if c == "verdict" and r.get(c) in ("rich", "cheap"):
                cls.append(r[c])
            cells.append(f'<td class="{" ".join(cls)}">{e(_cell_text(r, c))}</td>')
        body.append("<tr>" + "".join(cells) + "</tr>")
    parts = [f"<h1>{e(_title(result))}</h1>", f"<p>{e(_lede(result))}</p>",
             f'<p class="caution">{e(result.caution)}</p>',
             f"<table><tr>{head}</tr>{''.join(body)}</table>"]
    if result.failures:
        parts.append("<h2>Could not screen</h2><ul>" + "".join(
            f"<li>{e(str(f['code']))}: {e(str(f['reason']) + attempts_note(f))}</li>"
            for f in result.failures)
            + "</ul>")
    warnings = list(getattr(result, "warnings", ()) or ())
    if warnings:
        parts.append("<h2>Notes</h2><ul>" + "".join(f"<li>{e(w)}</li>" for w in warnings)
                     + "</ul>")
    return _page(f"optbench screen {result.universe}", "".join(parts))


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
        notes.append(f"Could not screen {f['code']}: {f['reason']}{attempts_note(f)}")
    retried = retried_note(result.rows)
    if retried:
        notes.append(retried)
    warned = {}
    for r in result.rows:
        if r.get("warnings"):
            warned.setdefault(r.get("code"), r["warnings"])
    for code, text in warned.items():
        notes.append(f"Warnings for {code}: {text}")
    notes.append(inputs_note(result.rows))
    if fits_note(result.rows):
        notes.append(fits_note(result.rows))
    notes.append(result.caution)
    return _render([table, *notes], width=width, color=color)


#: rows above the XLSX table's header row (the table starts at A1)
XLSX_HEADER_ROWS = 0
