"""Terminal tables (rich) for the command line.

The only module of the report package that imports rich; the core never does.
"""
from __future__ import annotations

import io

from optbench.report.fields import (EXPIRY_BRIEF, HEDGE_FIELDS, KINDS, LABELS, LEG_FIELDS,
                                    PROTECTION_BRIEF, SCENARIO_FIELDS, STRIKE_BRIEF, fmt)
from optbench.report.provenance import inputs_line

_VERDICT_STYLE = {"rich": "bold red", "cheap": "bold green", "fair": "", "n/a": "dim"}

#: short column headings for the terminal (two lines where needed)
SHORT = {"expiry": "Expiry", "calendar_days": "Days", "atm_iv": "ATM\nIV",
         "iv_25d_put": "25d\nput", "iv_25d_call": "25d\ncall", "rr_25d": "RR\n25d",
         "model_free_iv": "Model\nfree", "forecast_low": "Fcst\nlow",
         "forecast_vol": "Fcst", "forecast_high": "Fcst\nhigh", "realized_vol": "Real-\nized",
         "cone_percentile": "Cone\npct", "iv_minus_forecast": "IV-\nFcst",
         "variance_premium": "Var\nprem", "prob_realized_above_iv": "P(RV\n>IV)",
         "verdict": "Verdict", "strike": "Strike", "type": "C/P", "moneyness": "K/F",
         "bid": "Bid", "ask": "Ask", "iv_bid": "IV\nbid", "iv_mid": "IV\nmid",
         "iv_ask": "IV\nask", "price_at_forecast": "Value at\nfcst",
         "edge_per_contract": "Edge /\ncontract", "edge_vol_points": "Edge\nvol pts", "edge_per_vega": "Edge /\nvega",
         "side": "Side", "quantity": "Contracts", "mid": "Mid", "premium_mid": "Premium\nmid",
         "premium_paid": "Premium\npaid", "premium_at_forecast": "Value at\nfcst",
         "move": "Move", "level": "Level", "unhedged": "P&L\nunhedged",
         "hedged": "P&L\nhedged",
         "put25_strike": "25d put\nstrike", "put25_premium": "Ask", "put25_premium_mid": "Mid",
         "put25_expected_payoff": "Expected\npayoff", "put25_payoff_low": "Payoff\nlow",
         "put25_payoff_high": "Payoff\nhigh", "put25_verdict": "25d put\nverdict",
         "floor_put_strike": "Floor put\nstrike", "floor_put_premium": "Ask",
         "floor_put_premium_mid": "Mid", "floor_put_expected_payoff": "Expected\npayoff",
         "floor_put_payoff_low": "Payoff\nlow", "floor_put_payoff_high": "Payoff\nhigh",
         "floor_put_verdict": "Floor put\nverdict"}


def _render(renderables, width: int | None, color: bool = False) -> str:
    from rich.console import Console
    buf = io.StringIO()
    console = Console(file=buf, width=width or 140, force_terminal=color,
                      color_system="standard" if color else None, highlight=False)
    for r in renderables:
        console.print(r)
    return buf.getvalue()


def _table(title: str, records, columns, headings: dict | None = None):
    from rich.table import Table
    from rich.text import Text
    from rich import box
    t = Table(title=title, title_justify="left", show_lines=False, pad_edge=False,
              box=box.SIMPLE_HEAD)
    for c in columns:
        t.add_column((headings or {}).get(c) or SHORT.get(c, LABELS.get(c, c)),
                     justify="left" if KINDS.get(c) in ("text", "date") else "right",
                     no_wrap=True)
    for r in records:
        cells = []
        for c in columns:
            text = fmt(r.get(c), KINDS.get(c, "text"), percent_sign=False)
            cells.append(Text(text, style=_VERDICT_STYLE.get(text, ""))
                         if c.endswith("verdict") else text)
        t.add_row(*cells)
    return t


def comparison_table(comparison, *, strikes_for=None, width: int | None = None,
                     color: bool = False) -> str:
    """The comparison as terminal text: header, per-expiry table, rule, quality, caution."""
    c = comparison
    m = c.model
    rows = [r.to_dict() for r in c.expiries]      # one conversion for the three tables
    parts = [f"{c.underlying}  as of {c.asof.isoformat()}  spot {c.spot:,.2f}  "
             f"rate {100 * c.rate:.2f}%  div {100 * c.div_yield:.2f}%  {c.style}",
             inputs_line(c),
             f"model {m.name}/{m.dist} (mean {m.mean}), persistence {m.persistence:.4f}, "
             f"long-run vol {100 * m.long_run_vol:.2f}%, {c.n_paths:,} simulated paths",
             _table("Implied against forecast (vols and probabilities in %, differences in vol points)",
                    rows, EXPIRY_BRIEF),
             f"Verdict rule: {c.verdict_rule}.",
             *[_table(f"Protection: the {name} judged on its own (prices per unit of the "
                      "underlying)", rows,
                      [f for f in PROTECTION_BRIEF if not f.startswith(other)],
                      {"verdict": "ATM\nverdict"})
               for name, other in (("put nearest 25 delta", "floor_put_"),
                                   (f"put nearest the floor ({c.floor:.0%} of spot)",
                                    "put25_"))],
             f"Protection rule: {c.protection_rule}."]
    for exp in ([] if strikes_for is None else list(strikes_for)):
        frame = c.strike_frame(exp)
        parts.append(_table(f"Strikes, {exp} (vols in %, edges in money per contract and "
                            "in vol points)", frame.to_dict(orient="records"), STRIKE_BRIEF))
    q = c.quality
    rej = ", ".join(f"{k} {v}" for k, v in q.get("rejected", {}).items()) or "none"
    parts.append(f"Quotes: {q.get('rows_in', 0)} rows, {q.get('rows_used', 0)} used; "
                 f"rejected: {rej}")
    parts += [f"note: {w}" for w in c.warnings]
    parts.append(c.caution)
    return _render(parts, width, color)


def hedge_table(estimate, *, width: int | None = None, color: bool = False) -> str:
    e = estimate
    s = e.summary()
    from rich.table import Table
    summary = Table(title=f"{e.structure.replace('_', ' ')} on {e.underlying}, "
                          f"portfolio {e.request.portfolio_value:,.0f}",
                    title_justify="left", show_header=False)
    summary.add_column("item")
    summary.add_column("value", justify="right")
    for k, label, kind in HEDGE_FIELDS:
        summary.add_row(label, fmt(s[k], kind))
    parts = [f"{e.underlying}  as of {e.asof.isoformat()}  spot {e.spot:,.2f}  "
             f"ratio {e.request.exposure_ratio:g}  floor {100 * e.request.floor:.0f}%",
             inputs_line(e),
             summary,
             _table("Legs", [leg.to_dict() for leg in e.legs],
                    [f for f, _, _ in LEG_FIELDS if f not in ("expiry", "bid", "ask")]),
             _table("Portfolio P&L at expiry (moves in %)", list(e.scenarios),
                    [f for f, _, _ in SCENARIO_FIELDS]),
             f"Roll cost: {e.roll_method}."]
    if e.collar_note:
        parts.append(f"Collar: {e.collar_note}.")
    parts.append(f"Expected payoff and probability: {e.n_paths:,} paths of the fitted "
                 f"{e.model.get('name')} model ({e.model.get('measure')}).")
    parts += [f"note: {w}" for w in e.warnings]
    parts.append(e.caution)
    return _render(parts, width, color)
