"""Views of the portfolio-insurance result (:class:`~optbench.analysis.portfolio.plan.PortfolioHedge`):
terminal sections, CSV tables, Markdown and HTML sections, extra XLSX sheets.

Views only: every number comes from the result object; nothing is recomputed. Each
section ends with the caution and the note that basis risk is estimated from history.
"""
from __future__ import annotations

import html as _html
import math

import pandas as pd

from optbench.report.fields import fmt

#: column -> (heading, kind) for the portfolio tables
COLUMNS = {
    "symbol": ("Symbol", "text"), "quantity": ("Quantity", "money"),
    "weight": ("Weight", "pct"), "price": ("Price", "price"), "value": ("Value", "money"),
    "weight_in_fit": ("Weight in fit", "pct"), "n_returns": ("Returns", "int"),
    "beta": ("Beta", "num"), "beta_se": ("Beta s.e.", "num"), "r_squared": ("R²", "prob"),
    "status": ("Status", "text"), "note": ("Note", "text"),
    "expiry": ("Expiry", "date"), "calendar_days": ("Days", "int"),
    "structure": ("Structure", "text"), "floor": ("Floor", "pct"),
    "put_strike": ("Put K", "price"), "other_strike": ("Sold K", "price"),
    "contracts": ("Contracts", "int"), "premium_paid": ("Paid", "money"),
    "premium_pct": ("Premium % value", "pct"), "expected_payoff": ("Exp. payoff", "money"),
    "overpay": ("Overpay", "money"), "es99_reduction": ("ES99 cut", "money"),
    "es99_hedged": ("ES99 hedged", "money"),
    "cost_per_reduction": ("Cost/cut", "num"), "efficient": ("Efficient", "bool"),
    "position": ("Position", "text"), "delta_units": ("Delta units", "money"),
    "delta_money": ("Delta money", "money"),
    "delta_portfolio_value": ("Delta as portfolio value", "money"),
    "gamma_units": ("Gamma units/pt", "num"),
    "gamma_money_per_pct": ("Gamma money/1%", "money"),
    "vega_per_vol_point": ("Vega /vol pt", "money"), "theta_per_day": ("Theta /day", "money"),
    "move": ("Move", "pct"), "vol_shock": ("Vol shock", "volpt"), "level": ("Level", "price"),
    "hedge_value": ("Hedge value", "money"), "unhedged": ("P&L unhedged", "money"),
    "hedged": ("P&L hedged", "money"),
}
HOLDINGS_BRIEF = ("symbol", "value", "weight", "n_returns", "beta", "beta_se", "r_squared",
                  "status")
MENU_BRIEF = ("expiry", "calendar_days", "structure", "floor", "put_strike", "other_strike",
              "premium_paid", "expected_payoff", "overpay", "es99_reduction",
              "cost_per_reduction", "efficient")
#: the menu table's width on the terminal (it has many columns)
MENU_WIDTH = 170
GREEK_BRIEF = ("position", "delta_units", "delta_money", "delta_portfolio_value",
               "gamma_units", "gamma_money_per_pct", "vega_per_vol_point", "theta_per_day")
GRID_BRIEF = ("move", "vol_shock", "level", "hedge_value", "unhedged", "hedged")
LOSS_ROWS = (("mean", "Mean P&L"), ("std", "Std deviation"), ("var_95", "VaR 95%"),
             ("es_95", "ES 95%"), ("var_99", "VaR 99%"), ("es_99", "ES 99%"))

CSV_TABLES = ("menu", "greeks", "grid", "holdings", "loss")


def _cell(value, col) -> str:
    kind = COLUMNS.get(col, (col, "text"))[1]
    if isinstance(value, float) and math.isnan(value):
        value = None
    return fmt(value, kind)


def _records(frame: pd.DataFrame, columns) -> tuple[list[list[str]], list[str]]:
    """The frame's rows as display text, and the columns shown (those it has)."""
    cols = [c for c in columns if c in frame.columns]
    return [[_cell(r[c], c) for c in cols] for r in frame.to_dict(orient="records")], cols


def loss_rows(ph) -> list[tuple[str, str, str]]:
    """``(label, unhedged, hedged)`` rows of the loss distribution (text)."""
    L = ph.loss
    rows = [(label, fmt(L.unhedged[k], "money"), fmt(L.hedged[k], "money"))
            for k, label in LOSS_ROWS]
    rows.append((f"P(loss > {L.loss_level:,.0f})", fmt(L.unhedged["prob_loss_over"], "prob"),
                 fmt(L.hedged["prob_loss_over"], "prob")))
    return rows


def headline(ph) -> list[str]:
    """Plain-text lines: the portfolio's beta with its error and the simulation used."""
    out = []
    p = ph.portfolio
    if p is not None:
        b = p.beta
        out.append(f"Portfolio {p.value:,.0f} ({p.source}): beta {b.beta:.3f} ± {b.beta_se:.3f} "
                   f"(s.e.), R² {b.r_squared:.2f}, residual vol {100 * b.residual_vol:.1f}% over "
                   f"{b.n_obs} daily returns; hedge ratio {p.hedge_ratio:.3f} ({p.ratio_source})")
    if ph.loss is not None:
        L = ph.loss
        out.append(f"P&L at expiry {L.expiry} over {L.n_paths:,} joint paths; drift "
                   f"{L.drift_rule}; residual: {L.residual_method}")
    return out


def histogram_lines(ph, width: int = 40) -> list[str]:
    """The loss histogram as text bars (unhedged '#', hedged '=')."""
    if ph.loss is None:
        return []
    h = ph.loss.histogram
    edges, cu, ch = h["edges"], h["unhedged"], h["hedged"]
    top = max(max(cu), max(ch), 1)
    step = max(1, len(cu) // 20)
    lines = []
    for i in range(0, len(cu), step):
        u, g = sum(cu[i:i + step]), sum(ch[i:i + step])
        lines.append(f"{edges[i]:>14,.0f}  {'#' * round(width * u / (top * step)):<{width}} "
                     f"{'=' * round(width * g / (top * step))}")
    return lines


def portfolio_table(ph, *, menu_rows: str = "efficient", width: int | None = None,
                    color: bool = False) -> str:
    """Terminal sections: portfolio, loss distribution, greeks, grid, menu, notes."""
    from rich import box
    from rich.table import Table

    from optbench.report.tables import _render

    def table(title, frame, columns):
        body, cols = _records(frame, columns)
        t = Table(title=title, title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False)
        for c in cols:
            t.add_column(COLUMNS.get(c, (c,))[0],
                         justify="left" if COLUMNS.get(c, ("", "text"))[1] in ("text", "date")
                         else "right", no_wrap=True)
        for r in body:
            t.add_row(*r)
        return t

    parts = list(headline(ph))
    if ph.portfolio is not None and len(ph.portfolio.holdings):
        parts.append(table("Holdings", ph.portfolio.holdings, HOLDINGS_BRIEF))
    if ph.loss is not None:
        t = Table(title="P&L at expiry, simulated (losses negative; VaR/ES as losses)",
                  title_justify="left", box=box.SIMPLE_HEAD)
        for c in ("", "Unhedged", "Hedged"):
            t.add_column(c, justify="left" if not c else "right")
        for r in loss_rows(ph):
            t.add_row(*r)
        parts.append(t)
        parts.append("Histogram of P&L (bin start; # unhedged, = hedged):")
        parts.append("\n".join(histogram_lines(ph)))
    parts.append(table("Greeks of the hedge (money; delta also in units and as portfolio "
                       "value)", ph.greeks, GREEK_BRIEF))
    if ph.scenario_grid["vol_shock"].notna().any() or len(ph.scenario_grid) != 9:
        when = ("at expiry" if ph.scenario_grid["vol_shock"].isna().all()
                else "at once, legs revalued" if ph.horizon_days == 0
                else f"in {ph.horizon_days} calendar days, legs revalued")
        parts.append(table(f"Scenarios {when}", ph.scenario_grid, GRID_BRIEF))
    if ph.menu is not None:
        m = ph.menu
        frame = m.frame if menu_rows == "all" else m.efficient_frame()
        parts.append(table(f"Protection menu ({'all' if menu_rows == 'all' else 'efficient'} "
                           f"rows of {len(m.frame)}; cost = {m.cost_measure})", frame,
                           MENU_BRIEF))
        parts.append(f"Efficient: {m.efficient_rule}." + (f" Collars: {m.collar_rule}."
                                                         if m.collar_rule else ""))
    parts += [f"note: {w}" for w in ph.warnings]
    parts.append(ph.basis_note)
    parts.append(ph.caution)
    return _render(parts, width or MENU_WIDTH, color)


def portfolio_csv(ph, table: str) -> str:
    """One of :data:`CSV_TABLES` as CSV (the table alone); its notes — the hedge's,
    the caution and the basis-risk note — travel with it (the sidecar of a file)."""
    from optbench.report.csv import frame_csv, write_rows
    from optbench.report.notes import hedge_notes
    comment = hedge_notes(ph.estimate, f"optbench hedge {table}")
    comment["basis_risk"] = ph.basis_note
    if table == "menu":
        if ph.menu is None:
            from optbench.errors import InputError
            raise InputError("--table", "menu needs --menu")
        return frame_csv(ph.menu.frame, comment)
    if table == "greeks":
        return frame_csv(ph.greeks, comment)
    if table == "grid":
        return frame_csv(ph.scenario_grid, comment)
    if table == "holdings":
        frame = ph.portfolio.holdings if ph.portfolio is not None else pd.DataFrame()
        return frame_csv(frame, comment)
    L = ph.loss
    rows = [] if L is None else [(k, L.unhedged[k], L.hedged[k]) for k in L.unhedged]
    return write_rows(["measure", "unhedged", "hedged"], rows, comment)


def _md_table(frame: pd.DataFrame, columns) -> str:
    from optbench.report.markdown import _esc
    body, cols = _records(frame, columns)
    head = "| " + " | ".join(COLUMNS.get(c, (c,))[0] for c in cols) + " |"
    align = "|" + "|".join(":---" if COLUMNS.get(c, ("", "text"))[1] in ("text", "date")
                           else "---:" for c in cols) + "|"
    return "\n".join([head, align] + ["| " + " | ".join(_esc(x) for x in r) + " |"
                                      for r in body])


def portfolio_markdown(ph) -> str:
    lines = ["", "## Portfolio", ""] + [f"{x}  " for x in headline(ph)] + [""]
    if ph.portfolio is not None and len(ph.portfolio.holdings):
        lines += [_md_table(ph.portfolio.holdings, HOLDINGS_BRIEF), ""]
    if ph.loss is not None:
        lines += ["## P&L at expiry (simulated)", "", "| | Unhedged | Hedged |",
                  "|:---|---:|---:|"] + [f"| {a} | {b} | {c} |" for a, b, c in loss_rows(ph)]
        lines += [""]
    lines += ["## Greeks of the hedge", "", _md_table(ph.greeks, GREEK_BRIEF), "",
              "## Scenarios", "", _md_table(ph.scenario_grid, GRID_BRIEF), ""]
    if ph.menu is not None:
        lines += ["## Protection menu (efficient rows)", "",
                  _md_table(ph.menu.efficient_frame(), MENU_BRIEF), "",
                  f"Cost = {ph.menu.cost_measure}; efficient: {ph.menu.efficient_rule}."
                  + (f" Collars: {ph.menu.collar_rule}." if ph.menu.collar_rule else ""), ""]
    lines += [f"- {w}" for w in ph.warnings] + ["", ph.basis_note, "", f"*{ph.caution}*", ""]
    return "\n".join(lines)


def figure_loss(ph) -> str:
    """The loss distribution's histogram, unhedged and hedged, with the 99% VaR marked
    (SVG data URI, :mod:`optbench.report.svg`; the counts and edges are the result's,
    nothing recomputed)."""
    import numpy as np

    from optbench.report.svg import Figure
    h, L = ph.loss.histogram, ph.loss
    edges = np.asarray(h["edges"], float)
    width = edges[1] - edges[0]
    fig = Figure(700, 400)
    ax = fig.panel(0, legend="upper left", title=f"{L.n_paths:,} joint paths to {L.expiry}",
                   xlabel="portfolio P&L at expiry (lines: 99% VaR, unhedged dashed, "
                          "hedged dotted)", ylabel="paths")
    ax.bars(edges[:-1], h["unhedged"], width, opacity=0.5, label="unhedged")
    ax.bars(edges[:-1], h["hedged"], width, opacity=0.5, label="hedged")
    for side, style in ((L.unhedged, "--"), (L.hedged, ":")):
        ax.vline(-side["var_99"], dash=style, width=1.0, colour="#333333")
    return fig.data_uri()


def portfolio_html(ph, *, figures: bool = True) -> str:
    e = _html.escape

    def table(frame, columns):
        body, cols = _records(frame, columns)
        head = "".join(f"<th>{e(COLUMNS.get(c, (c,))[0])}</th>" for c in cols)
        rows = "".join("<tr>" + "".join(f"<td>{e(x)}</td>" for x in r) + "</tr>" for r in body)
        return f"<table><tr>{head}</tr>{rows}</table>"

    parts = ["<h2>Portfolio</h2>"] + [f"<p>{e(x)}</p>" for x in headline(ph)]
    if ph.portfolio is not None and len(ph.portfolio.holdings):
        parts.append(table(ph.portfolio.holdings, HOLDINGS_BRIEF))
    if ph.loss is not None:
        rows = "".join(f"<tr><td class=\"t\">{e(a)}</td><td>{e(b)}</td><td>{e(c)}</td></tr>"
                       for a, b, c in loss_rows(ph))
        parts += ["<h2>P&amp;L at expiry (simulated)</h2>",
                  f"<table><tr><th></th><th>Unhedged</th><th>Hedged</th></tr>{rows}</table>"]
        if figures:
            parts.append(f'<img alt="distribution of P&amp;L at expiry" '
                         f'src="{figure_loss(ph)}">')
    parts += ["<h2>Greeks of the hedge</h2>", table(ph.greeks, GREEK_BRIEF),
              "<h2>Scenarios</h2>", table(ph.scenario_grid, GRID_BRIEF)]
    if ph.menu is not None:
        parts += ["<h2>Protection menu (efficient rows)</h2>",
                  table(ph.menu.efficient_frame(), MENU_BRIEF)]
    parts += [f"<p>{e(ph.basis_note)}</p>", f'<p class="caution">{e(ph.caution)}</p>']
    return "".join(parts)


def add_xlsx_sheets(book: bytes, ph) -> bytes:
    """The hedge workbook with sheets for the portfolio, loss, greeks, grid and menu."""
    import io

    from openpyxl import load_workbook
    wb = load_workbook(io.BytesIO(book))

    def sheet(name, frame):
        # the table starts at A1; the caution and the basis-risk note are on Notes
        ws = wb.create_sheet(name)
        ws.append([cell(str(c)) for c in frame.columns])
        for r in frame.itertuples(index=False, name=None):
            ws.append([cell(v) for v in r])

    def cell(v):
        """Numbers as numbers, dates as ISO text, every other text neutralised as in
        the CSV export (no cell starts a formula)."""
        from optbench.report.csv import neutralise
        if v is None or isinstance(v, (bool, int, float)) or hasattr(v, "dtype"):
            x = v.item() if hasattr(v, "item") else v
            return None if isinstance(x, float) and not math.isfinite(x) else x
        if hasattr(v, "isoformat"):
            return v.isoformat()[:10]
        return neutralise(str(v))

    if ph.portfolio is not None:
        sheet("Holdings", ph.portfolio.holdings)
    if ph.loss is not None:
        L = ph.loss
        sheet("Loss", pd.DataFrame([(k, L.unhedged[k], L.hedged[k]) for k in L.unhedged],
                                   columns=["measure", "unhedged", "hedged"]))
    sheet("Greeks", ph.greeks)
    sheet("Scenario grid", ph.scenario_grid)
    if ph.menu is not None:
        sheet("Menu", ph.menu.frame)
    if "Notes" in wb.sheetnames:
        notes = wb["Notes"]
        notes.append(["basis_risk", cell(ph.basis_note)])
        wb.move_sheet("Notes", offset=len(wb.sheetnames) - 1 - wb.sheetnames.index("Notes"))
    else:
        notes = wb.create_sheet("Notes")
        for row in (["item", "value"], ["basis_risk", cell(ph.basis_note)],
                    ["caution", cell(ph.caution)]):
            notes.append(row)
    out = io.BytesIO()
    wb.save(out)
    return out.getvalue()
