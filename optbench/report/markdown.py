"""Markdown reports of a comparison or a hedge estimate (for notes and tickets).

Numbers are shown for reading: vols and percentages in percent, vol differences in
vol points, money rounded to whole units. The decimals live in the JSON/CSV/XLSX.
"""
from __future__ import annotations

from collections.abc import Sequence

from optbench.report.fields import (EXPIRY_BRIEF, HEDGE_FIELDS, KINDS, LABELS, LEG_FIELDS,
                                    PROTECTION_BRIEF, SCENARIO_FIELDS, STRIKE_BRIEF, fmt)
from optbench.report.provenance import inputs_line


def _esc(text: str) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def md_table(records: Sequence[dict], columns: Sequence[str]) -> str:
    head = "| " + " | ".join(_esc(LABELS.get(c, c)) for c in columns) + " |"
    align = "|" + "|".join(":---" if KINDS.get(c) in ("text", "date") else "---:"
                           for c in columns) + "|"
    body = ["| " + " | ".join(_esc(fmt(r.get(c), KINDS.get(c, "text"))) for c in columns)
            + " |" for r in records]
    return "\n".join([head, align, *body])


def comparison_markdown(comparison, *, strikes_for=None) -> str:
    c = comparison
    m = c.model
    lines = [f"# {c.underlying}: implied against forecast volatility",
             "",
             f"As of **{c.asof.isoformat()}** · spot {c.spot:,.2f} · rate {100 * c.rate:.2f}% · "
             f"dividend yield {100 * c.div_yield:.2f}% · {c.style} · multiplier {c.multiplier:g}",
             "",
             inputs_line(c),
             "",
             f"Model: **{m.name}** with {m.dist} innovations, {m.mean} mean "
             f"(log-likelihood {m.loglik:,.1f}, persistence {m.persistence:.4f}, "
             f"long-run vol {100 * m.long_run_vol:.2f}%).",
             "",
             "## Per expiry",
             "",
             md_table([r.to_dict() for r in c.expiries], EXPIRY_BRIEF),
             "",
             f"Verdict rule: {c.verdict_rule}.",
             "",
             "## Protection",
             "",
             md_table([r.to_dict() for r in c.expiries], PROTECTION_BRIEF),
             "",
             f"Protection rule: {c.protection_rule}.",
             ""]
    for exp in ([] if strikes_for is None else list(strikes_for)):
        frame = c.strike_frame(exp)
        lines += [f"## Strikes, {frame['expiry'].iloc[0].date().isoformat() if len(frame) else exp}",
                  "", md_table(frame.to_dict(orient="records"), STRIKE_BRIEF), ""]
    q = c.quality
    rej = ", ".join(f"{k}: {v}" for k, v in q.get("rejected", {}).items()) or "none"
    lines += ["## Data quality", "",
              f"{q.get('rows_in', 0)} rows read, {q.get('rows_used', 0)} used; rejected: {rej}.",
              ""]
    if c.warnings:
        lines += ["## Notes", ""] + [f"- {_esc(w)}" for w in c.warnings] + [""]
    lines += [f"*{c.caution}*", ""]
    return "\n".join(lines)


def hedge_markdown(estimate) -> str:
    e = estimate
    summary = e.summary()
    lines = [f"# {e.underlying}: {e.structure.replace('_', ' ')} hedge",
             "",
             f"As of **{e.asof.isoformat()}** · spot {e.spot:,.2f} · portfolio "
             f"{e.request.portfolio_value:,.0f} · ratio {e.request.exposure_ratio:g} · "
             f"floor {100 * e.request.floor:.0f}%",
             "",
             inputs_line(e),
             "",
             "| Item | Value |", "|:---|---:|"]
    lines += [f"| {label} | {_esc(fmt(summary[k], kind))} |" for k, label, kind in HEDGE_FIELDS]
    lines += ["", "## Legs", "", md_table([leg.to_dict() for leg in e.legs],
                                          [f for f, _, _ in LEG_FIELDS]),
              "", "## P&L at expiry", "",
              md_table(list(e.scenarios), [f for f, _, _ in SCENARIO_FIELDS]), "",
              f"Roll cost: {e.roll_method}.", ""]
    if e.collar_note:
        lines += [f"Collar: {e.collar_note}.", ""]
    lines += [f"Expected payoff and probability from {e.n_paths:,} paths of the fitted "
              f"{e.model.get('name')} model ({e.model.get('measure')}).", "",
              f"*{e.caution}*", ""]
    return "\n".join(lines)
