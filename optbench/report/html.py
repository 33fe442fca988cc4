"""A self-contained HTML report with figures.

Figures are drawn once, directly as SVG (:mod:`optbench.report.svg`), and embedded as
SVG data URIs, so the report is one file and needs no plotting library: drawing them
takes milliseconds, where importing and drawing with matplotlib took seconds.

Figures of a comparison:

1. the ATM implied vol term structure against the forecast and its band, with the
   trailing realized vol and the model-free implied vol;
2. each expiry's smile (mid implied vol with bid-ask range, by strike / forward)
   against the forecast level and band;
3. the price history with the model's ±3-sigma one-day bands
   (``close[t-1] * exp(mu ± 3 sigma[t])``), and the daily returns against ±3 sigma
   with the out-of-sample surprises marked.

A hedge report has one figure: the portfolio's P&L at expiry with and without the
hedge across underlying moves, with the scenario table's points.
"""
from __future__ import annotations

import html as _html
import math

import numpy as np

from optbench.report.fields import (EXPIRY_BRIEF, HEDGE_FIELDS, KINDS, LABELS, LEG_FIELDS,
                                    PROTECTION_BRIEF,
                                    SCENARIO_FIELDS, fmt)
from optbench.report.provenance import inputs_line
from optbench.report.svg import PALETTE, Figure

_CSS = """
body{font-family:system-ui,sans-serif;margin:2em;max-width:1200px;color:#1d2330}
table{border-collapse:collapse;margin:1em 0;font-size:0.9em}
th,td{padding:3px 8px;border-bottom:1px solid #d8dce4;text-align:right}
th{background:#eef1f6}td.t,th.t{text-align:left}
.rich{color:#a02c2c;font-weight:bold}.cheap{color:#22763a;font-weight:bold}
.caution{border-left:4px solid #c69214;padding:0.5em 1em;background:#fbf6e8}
img{max-width:100%}
"""


def figure_term_structure(comparison) -> str:
    """ATM IV by calendar days against the forecast band and realized vol (SVG data URI)."""
    rows = comparison.expiries
    d = np.array([r.calendar_days for r in rows], float)
    fig = Figure(760, 380)
    ax = fig.panel(0, xscale="log", legend="upper right",
                   title=f"{comparison.underlying} term structure, "
                         f"{comparison.asof.isoformat()}",
                   xlabel="calendar days to expiry", ylabel="vol, % a year")
    lo = np.array([r.forecast_low for r in rows]) * 100
    hi = np.array([r.forecast_high for r in rows]) * 100
    ax.band(d, lo, hi, label=f"forecast band {comparison.band[0]:.0%}–"
                             f"{comparison.band[1]:.0%} (parameter uncertainty)")
    ax.line(d, np.array([r.forecast_vol for r in rows]) * 100, label="forecast")
    ax.line(d, np.array([r.atm_iv for r in rows]) * 100, marker="o", label="ATM implied")
    ax.line(d, np.array([r.model_free_iv for r in rows]) * 100, dash="--", marker="s",
            size=2.5, label="model-free implied")
    ax.line(d, np.array([r.realized_vol for r in rows]) * 100, dash=":", marker="^",
            label="trailing realized")
    return fig.data_uri()


def figure_smiles(comparison) -> str:
    """Each expiry's smile against its forecast level and band (SVG data URI)."""
    rows = comparison.expiries
    n = max(len(rows), 1)
    ncol = min(3, n)
    nrow = math.ceil(n / ncol)
    fig = Figure(380 * ncol, 260 * nrow, nrow, ncol)
    for i, row in enumerate(rows):
        ax = fig.panel(i, font_size=10, legend="upper right" if i == 0 else None,
                       title=f"{row.expiry.isoformat()} ({row.calendar_days} d) · "
                             f"{row.verdict}",
                       xlabel="strike / forward",
                       ylabel="implied vol, %" if i % ncol == 0 else "")
        ax.hspan(row.forecast_low * 100, row.forecast_high * 100, colour=PALETTE[2],
                 opacity=0.2, label="forecast band")
        ax.hline(row.forecast_vol * 100, colour=PALETTE[2], label="forecast")
        f = comparison.strikes.get(row.expiry)
        if f is not None and len(f):
            m = f["moneyness"].to_numpy(float)
            mid = f["iv_mid"].to_numpy(float) * 100
            lo = f["iv_bid"].to_numpy(float) * 100
            hi = f["iv_ask"].to_numpy(float) * 100
            calls = f["is_call"].to_numpy(bool)
            for sel, mk, lab, colour in ((~calls, "v", "puts (bid–ask)", PALETTE[0]),
                                         (calls, "^", "calls (bid–ask)", PALETTE[1])):
                ax.error_bars(m[sel], mid[sel], np.where(np.isfinite(lo[sel]), lo[sel],
                                                         mid[sel]),
                              np.where(np.isfinite(hi[sel]), hi[sel], mid[sel]),
                              marker=mk, colour=colour, label=lab)
    return fig.data_uri()


def figure_history(comparison) -> str | None:
    """Closes with ±3-sigma one-day bands, and returns with surprises (SVG data URI)."""
    h = comparison.history
    if h is None or not len(h):
        return None
    dates = np.asarray(h["date"].to_numpy(), dtype="datetime64[D]")
    close = h["close"].to_numpy(float)
    ret = h["ret"].to_numpy(float)
    sigma = h["sigma"].to_numpy(float)
    mu = float(comparison.model.params.get("mu", 0.0) or 0.0)
    fig = Figure(860, 560, 2, 1, height_ratios=[3, 2])
    a1 = fig.panel(0, xscale="date", legend="upper left", ylabel="close",
                   title=f"{comparison.underlying} closes and the {comparison.model.name} "
                         "bands")
    a1.band(dates, h["band_low"].to_numpy(float), h["band_high"].to_numpy(float),
            colour=PALETTE[1], opacity=0.3, label="±3σ one-day band")
    a1.line(dates, close, width=0.8, colour=PALETTE[0], label="close")
    a2 = fig.panel(1, xscale="date", legend="upper left", legend_columns=4,
                   ylabel="% a day")
    a2.line(dates, ret * 100, width=0.5, colour=PALETTE[0], label="daily log return")
    a2.line(dates, (mu + 3 * sigma) * 100, width=0.6, colour="#666666", label="±3σ")
    a2.line(dates, (mu - 3 * sigma) * 100, width=0.6, colour="#666666")
    outside = np.abs(ret - mu) > 3 * sigma
    a2.markers(dates[outside], ret[outside] * 100, size=2.5, colour=PALETTE[1],
               label="outside ±3σ")
    bt = comparison.backtest or {}
    surprises = bt.get("surprises") or []
    if surprises:
        sd = np.array([np.datetime64(s["date"], "D") for s in surprises])
        idx = np.searchsorted(dates, sd)
        idx = idx[(idx < len(dates))]
        a2.markers(dates[idx], ret[idx] * 100, marker="x", size=4, colour=PALETTE[3],
                   label="largest out-of-sample surprises")
    if bt.get("split"):
        for ax in (a1, a2):
            ax.vline(np.datetime64(bt["split"], "D"))
    lim = (float(dates[0].astype("int64")), float(dates[-1].astype("int64")))
    span = lim[1] - lim[0]
    a1.xlim = a2.xlim = (lim[0] - 0.02 * span, lim[1] + 0.02 * span)   # shared x axis
    return fig.data_uri()


def figure_hedge(estimate) -> str:
    """Portfolio P&L at expiry with and without the hedge, by underlying move (SVG)."""
    moves = np.linspace(-0.35, 0.15, 201)
    unhedged, hedged = estimate.pnl_at(moves)
    fig = Figure(700, 400)
    ax = fig.panel(0, legend="upper left",
                   title=f"{estimate.underlying} {estimate.structure.replace('_', ' ')}, "
                         f"expiry {estimate.expiry.isoformat()}",
                   xlabel="underlying move to expiry, %", ylabel="portfolio P&L")
    ax.hline(0.0)
    ax.line(moves * 100, unhedged, label="unhedged")
    ax.line(moves * 100, hedged, label="hedged")
    sc = estimate.scenarios
    ax.markers([s["move"] * 100 for s in sc], [s["hedged"] for s in sc], size=3.5,
               colour=PALETTE[1], label="scenario table")
    return fig.data_uri()


def _table(records, columns) -> str:
    head = "".join(f'<th class="{"t" if KINDS.get(c) in ("text", "date") else ""}">'
                   f"{_html.escape(LABELS.get(c, c))}</th>" for c in columns)
    body = []
    for r in records:
        cells = []
        for c in columns:
            text = fmt(r.get(c), KINDS.get(c, "text"))
            cls = []
            if KINDS.get(c) in ("text", "date"):
                cls.append("t")
            if c.endswith("verdict") and text in ("rich", "cheap"):
                cls.append(text)
            cells.append(f'<td class="{" ".join(cls)}">{_html.escape(text)}</td>')
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><tr>{head}</tr>{''.join(body)}</table>"


def _page(title: str, body: str) -> str:
    return (f"<!doctype html><html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{_html.escape(title)}</title><style>{_CSS}</style></head>"
            f"<body>{body}</body></html>\n")


def comparison_html(comparison, *, figures: bool = True) -> str:
    c = comparison
    m = c.model
    e = _html.escape
    parts = [f"<h1>{e(c.underlying)}: implied against forecast volatility</h1>",
             f"<p>As of <b>{c.asof.isoformat()}</b> · spot {c.spot:,.2f} · rate "
             f"{100 * c.rate:.2f}% · dividend yield {100 * c.div_yield:.2f}% · {e(c.style)}"
             f" · model {e(m.name)} ({e(m.dist)} innovations, {e(m.mean)} mean), "
             f"{c.n_paths:,} simulated paths</p>",
             f"<p>{e(inputs_line(c))}</p>",
             f'<p class="caution">{e(c.caution)}</p>',
             "<h2>Per expiry</h2>", _table([r.to_dict() for r in c.expiries], EXPIRY_BRIEF),
             f"<p>Verdict rule: {e(c.verdict_rule)}.</p>",
             "<h2>Protection</h2>",
             _table([r.to_dict() for r in c.expiries], PROTECTION_BRIEF),
             f"<p>Protection rule: {e(c.protection_rule)}.</p>"]
    if figures:
        parts += ["<h2>Term structure</h2>", f'<img alt="term structure" src="{figure_term_structure(c)}">',
                  "<h2>Smiles</h2>", f'<img alt="smiles" src="{figure_smiles(c)}">']
        hist = figure_history(c)
        if hist:
            parts += ["<h2>Price history and model bands</h2>",
                      f'<img alt="price history" src="{hist}">']
    q = c.quality
    rej = ", ".join(f"{e(str(k))}: {v}" for k, v in q.get("rejected", {}).items()) or "none"
    parts.append(f"<h2>Data quality</h2><p>{q.get('rows_in', 0)} rows read, "
                 f"{q.get('rows_used', 0)} used; rejected: {rej}.</p>")
    if c.warnings:
        parts.append("<ul>" + "".join(f"<li>{e(w)}</li>" for w in c.warnings) + "</ul>")
    return _page(f"optbench compare {c.underlying} {c.asof.isoformat()}", "".join(parts))


def hedge_html(estimate) -> str:
    h = estimate
    e = _html.escape
    s = h.summary()
    rows = "".join(f'<tr><td class="t">{e(label)}</td><td>{e(fmt(s[k], kind))}</td></tr>'
                   for k, label, kind in HEDGE_FIELDS)
    parts = [f"<h1>{e(h.underlying)}: {e(h.structure.replace('_', ' '))} hedge</h1>",
             f"<p>As of <b>{h.asof.isoformat()}</b> · spot {h.spot:,.2f} · portfolio "
             f"{h.request.portfolio_value:,.0f} · ratio {h.request.exposure_ratio:g} · floor "
             f"{100 * h.request.floor:.0f}%</p>",
             f"<p>{e(inputs_line(h))}</p>",
             f'<p class="caution">{e(h.caution)}</p>',
             f"<table>{rows}</table>",
             "<h2>Legs</h2>", _table([leg.to_dict() for leg in h.legs],
                                     [f for f, _, _ in LEG_FIELDS]),
             "<h2>Portfolio P&amp;L at expiry</h2>",
             _table(list(h.scenarios), [f for f, _, _ in SCENARIO_FIELDS]),
             f'<img alt="P&amp;L at expiry" src="{figure_hedge(h)}">',
             f"<p>Roll cost: {e(h.roll_method)}.</p>"]
    if h.collar_note:
        parts.append(f"<p>Collar: {e(h.collar_note)}.</p>")
    parts.append(f"<p>Expected payoff and probability from {h.n_paths:,} paths of the fitted "
                 f"{e(str(h.model.get('name')))} model ({e(str(h.model.get('measure')))}).</p>")
    return _page(f"optbench hedge {h.underlying} {h.asof.isoformat()}", "".join(parts))
