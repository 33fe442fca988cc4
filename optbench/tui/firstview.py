"""The first view's words as plain data: the overview's paragraphs and verdict rows and
the status line's, formatted from the result objects
(:class:`~optbench.analysis.results.Comparison`,
:class:`~optbench.analysis.results.HedgeEstimate`) and nothing else.

:func:`overview_content` is the one function that turns results into what the
overview shows: the overview view draws its output
(:func:`optbench.tui.views.overview.OverviewView.draw_content`), and the first run of
``optbench open`` sends the same output to the screen process as soon as the headline
exists, before the result objects themselves (:mod:`optbench.tui.early`). The output
holds only ``str``, ``int``, ``None``, tuples, lists and dicts, so that a process
without numpy, pandas or the core unpickles it; the text is styled by span
(``(text, style)`` pairs, style None for plain).

No textual, rich or numpy here.
"""
from __future__ import annotations

from optbench.tui import fmt

#: a span of text and its style (a rich style name, or None for plain text)
Span = tuple[str, "str | None"]


def _verdict(v) -> Span:
    return fmt.VERDICT_MARKS.get(str(v), fmt.VERDICT_MARKS["n/a"])


def headline_spans(comparison, estimate) -> list[Span]:
    """'put 4700 nearest 91 days costs 0.95 % of the portfolio ...' from the results;
    the protection is the hedge planner's (its inputs are named at the end)."""
    if estimate is None:
        return [("No headline protection: the chain has no put near the planner's floor "
                 "around its expiry (see Hedge planner, key 5).", "bold")]
    req = estimate.request
    out: list[Span] = [
        (f"{estimate.structure_name.capitalize()} ({estimate.strike_legs}), "
         f"{fmt.date(estimate.expiry)} ({estimate.calendar_days}d), ", "bold"),
        ("costs ", None),
        (f"{fmt.pct_sign(estimate.cost_pct, 2)}", "bold"),
        (" of the portfolio at the ask ", None),
        (f"({fmt.money(estimate.premium_paid)} on {fmt.money(req.portfolio_value)}); ", None),
        ("the forecast vol values it at ", None),
        (fmt.money(estimate.premium_at_forecast), "bold"),
        (" and the model expects it to pay back ", None),
        (fmt.money(estimate.expected_payoff), "bold"),
        (f" — paying {fmt.money(estimate.overpay, signed=True)} over the model's "
         "expected payoff.", None)]
    if estimate.legs:
        leg = estimate.legs[0]
        out.append((f" The bought put is quoted at {fmt.pct(leg.iv_mid)}% implied vol (mid) "
                    f"against a forecast of {fmt.pct(leg.forecast_vol)}%.", None))
    out.append(("\n", None))
    row = next((r for r in comparison.expiries if r.expiry == estimate.expiry), None)
    if row is not None:
        out += [(f"At {fmt.date(row.expiry)} the market charges ", None),
                (f"{fmt.pct(row.atm_iv)}%", "bold"),
                (" ATM implied vol against a forecast of ", None),
                (f"{fmt.pct(row.forecast_vol)}%", "bold"),
                (f" (band {fmt.pct(row.forecast_low)}–{fmt.pct(row.forecast_high)}): ", None),
                _verdict(row.verdict),
                (f", {fmt.pct(row.iv_minus_forecast, signed=True)} vol points.", None)]
    out.append((f"\nThe hedge planner's inputs (key 5): portfolio "
                f"{fmt.money(req.portfolio_value)}, beta {req.beta:g}, floor {req.floor:.0%}.",
                "dim"))
    return out


#: what the overview's headline says while the headline hedge is being priced
PENDING_HEADLINE: list[Span] = [
    ("Pricing the headline protection (the hedge planner's inputs) …", None)]


def verdict_rows(comparison) -> list[tuple]:
    """One row per expiry: expiry, days, ATM IV, forecast, band, IV−fc (text), then the
    three verdicts as spans."""
    return [(fmt.date(r.expiry), str(r.calendar_days), fmt.pct(r.atm_iv),
             fmt.pct(r.forecast_vol), f"{fmt.pct(r.forecast_low)}–{fmt.pct(r.forecast_high)}",
             fmt.pct(r.iv_minus_forecast, signed=True), _verdict(r.verdict),
             _verdict(r.put25_verdict), _verdict(r.floor_put_verdict))
            for r in comparison.expiries]


def state_spans(comparison, checking: bool = False) -> list[Span]:
    """Data, model, drift and out-of-sample check in a few lines; ``checking``: the
    check is still running (the line says so until its numbers come)."""
    q = comparison.quality
    m = comparison.model
    rejected = sum((q.get("rejected") or {}).values())
    out: list[Span] = [
        ("Data  ", "bold"),
        (f"{comparison.underlying} on {fmt.date(comparison.asof)}, spot "
         f"{fmt.num(comparison.spot)}; {q.get('rows_used', 0)} of {q.get('rows_in', 0)} "
         f"quote rows used, {rejected} rejected (see Data quality). "
         f"Rate {fmt.pct(comparison.rate, 2)}%, dividend yield "
         f"{fmt.pct(comparison.div_yield, 2)}%, {comparison.style} exercise.\n", None),
        ("Model ", "bold"),
        (f"{m.name} with {m.dist} innovations on {m.n_obs} daily returns; "
         f"persistence {fmt.num(m.persistence, 3)}, half-life "
         f"{fmt.num(m.half_life_days, 0)} trading days, long-run vol "
         f"{fmt.pct(m.long_run_vol)}%. ", None),
        ("converged", "green") if m.converged else ("NOT converged", "bold red")]
    if m.fallback_reason:
        out.append((f" (fallback: {m.fallback_reason})", "yellow"))
    if comparison.drift is not None:
        out += [("\nDrift ", "bold"),
                (f"simulated prices: {comparison.drift.text}. Puts: ask against the "
                 f"band of the model-expected payoff (floor {comparison.floor:.0%} of spot).",
                 None)]
    bt = comparison.backtest
    if bt:
        out += [("\nCheck ", "bold"),
                (f"out of sample from {bt.get('split', '?')}: {bt.get('outside_band', '?')} "
                 f"of {bt.get('n_out', '?')} days outside ±{bt.get('band_k', 3)}σ, "
                 f"{fmt.num(bt.get('expected_model'), 1)} expected by the model "
                 f"({fmt.num(bt.get('expected_normal'), 1)} if normal). See Model check.",
                 None)]
    elif checking:
        out += [("\nCheck ", "bold"),
                ("checking the model out of sample … (see Model check)", "dim")]
    for w in comparison.warnings:
        out.append((f"\n! {w}", "yellow"))
    return out


def overview_content(comparison, estimate, pending: bool = False,
                     checking: bool = False) -> dict:
    """Everything the overview shows, as plain data: ``headline`` and ``state`` (spans),
    ``rows`` (:func:`verdict_rows`), ``caution``. ``pending``: the headline hedge is
    still being priced; ``checking``: the out-of-sample check is still running."""
    return {"headline": PENDING_HEADLINE if pending else headline_spans(comparison, estimate),
            "rows": verdict_rows(comparison),
            "state": state_spans(comparison, checking),
            "caution": f"⚠ {comparison.caution}"}


def ready_text(comparison) -> str:
    """'ready', or 'ready with N warnings' naming the first: the status line never
    says ready over a flagged answer without the flag."""
    n = len(comparison.warnings)
    if not n:
        return "ready"
    first = comparison.warnings[0]
    return f"ready with {n} warning{'s' if n > 1 else ''} ⚠ (overview): {first}"


def facts(c) -> str:
    """The comparison on screen in a few words (the status line leads with the state)."""
    return (f"{c.underlying} {c.asof.isoformat()} · spot {c.spot:,.2f} · "
            f"{len(c.expiries)} expiries · {c.model.name}/{c.model.dist}")


def sub_title(c) -> str:
    """The header's second line once the comparison exists."""
    return f"{c.underlying} · {c.asof.isoformat()} · spot {c.spot:,.2f}"


def ready_status(c) -> str:
    """The status line once the overview's numbers are on screen and the model check
    runs."""
    return f"{ready_text(c)} · checking the model out of sample … · {facts(c)}"


def first_view(comparison, estimate) -> dict:
    """What the screen process needs to show the overview with its numbers and the
    status "ready" (the comparison and its headline hedge, the check still running):
    plain data, built by the same functions the app uses on the result objects."""
    return {"overview": overview_content(comparison, estimate, False, True),
            "status": ready_status(comparison), "sub_title": sub_title(comparison)}


def is_plain(obj) -> bool:
    """True when ``obj`` holds only built-in plain values (what :func:`first_view`
    promises: it unpickles without numpy, pandas or optbench's core)."""
    if obj is None or type(obj) in (str, int, float, bool):
        return True
    if type(obj) in (list, tuple):
        return all(is_plain(x) for x in obj)
    if type(obj) is dict:
        return all(type(k) is str and is_plain(v) for k, v in obj.items())
    return False
