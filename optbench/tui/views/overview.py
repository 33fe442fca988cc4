"""Overview: the headline answer, the verdict per expiry, the state of data and model."""
from __future__ import annotations

from rich import box
from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.widgets import Static

from optbench.tui import fmt
from optbench.tui.views.base import Deferred


def headline_text(comparison, estimate) -> Text:
    """'put 4700 nearest 91 days costs 0.95 % of the portfolio ...' from the results;
    the protection is the hedge planner's (its inputs are named at the end)."""
    text = Text()
    if estimate is None:
        text.append("No headline protection: the chain has no put near the planner's floor "
                    "around its expiry (see Hedge planner, key 5).", style="bold")
        return text
    req = estimate.request
    text.append(f"{estimate.structure_name.capitalize()} ({estimate.strike_legs}), "
                f"{fmt.date(estimate.expiry)} ({estimate.calendar_days}d), ", style="bold")
    text.append("costs ")
    text.append(f"{fmt.pct_sign(estimate.cost_pct, 2)}", style="bold")
    text.append(" of the portfolio at the ask ")
    text.append(f"({fmt.money(estimate.premium_paid)} on {fmt.money(req.portfolio_value)}); ")
    text.append("the forecast vol values it at ")
    text.append(fmt.money(estimate.premium_at_forecast), style="bold")
    text.append(" and the model expects it to pay back ")
    text.append(fmt.money(estimate.expected_payoff), style="bold")
    text.append(f" — paying {fmt.money(estimate.overpay, signed=True)} over the model's "
                "expected payoff.")
    if estimate.legs:
        leg = estimate.legs[0]
        text.append(f" The bought put is quoted at {fmt.pct(leg.iv_mid)}% implied vol (mid) "
                    f"against a forecast of {fmt.pct(leg.forecast_vol)}%.")
    text.append("\n")
    row = next((r for r in comparison.expiries if r.expiry == estimate.expiry), None)
    if row is not None:
        text.append(f"At {fmt.date(row.expiry)} the market charges ")
        text.append(f"{fmt.pct(row.atm_iv)}%", style="bold")
        text.append(" ATM implied vol against a forecast of ")
        text.append(f"{fmt.pct(row.forecast_vol)}%", style="bold")
        text.append(f" (band {fmt.pct(row.forecast_low)}–{fmt.pct(row.forecast_high)}): ")
        text.append_text(fmt.verdict(row.verdict))
        text.append(f", {fmt.pct(row.iv_minus_forecast, signed=True)} vol points.")
    text.append(f"\nThe hedge planner's inputs (key 5): portfolio {fmt.money(req.portfolio_value)}, "
                f"beta {req.beta:g}, floor {req.floor:.0%}.", style="dim")
    return text


def verdict_table(comparison) -> Table:
    # no vertical rules: nine columns fit an 80-column terminal
    table = Table(title="Implied against forecast, per expiry: ATM implied vol (IV), "
                        "forecast and band in %, IV−fc in vol points; verdicts for the ATM "
                        "vol and for the 25Δ and floor puts (ask against the model-expected "
                        "payoff)", title_justify="left", expand=True, header_style="bold",
                  box=box.SIMPLE_HEAD, pad_edge=False, collapse_padding=True)
    for col, just, width in (("Expiry", "left", 10), ("Days", "right", 4),
                             ("IV", "right", 4), ("Fcst", "right", 4),
                             ("Band", "right", 9), ("IV−fc", "right", 5),
                             ("ATM", "left", 7), ("25Δ put", "left", 7),
                             ("Floor", "left", 7)):
        table.add_column(col, justify=just, no_wrap=True, min_width=width)
    for r in comparison.expiries:
        table.add_row(fmt.date(r.expiry), str(r.calendar_days), fmt.pct(r.atm_iv),
                      fmt.pct(r.forecast_vol),
                      f"{fmt.pct(r.forecast_low)}–{fmt.pct(r.forecast_high)}",
                      fmt.pct(r.iv_minus_forecast, signed=True), fmt.verdict(r.verdict),
                      fmt.verdict(r.put25_verdict), fmt.verdict(r.floor_put_verdict))
    return table


def state_text(comparison, checking: bool = False) -> Text:
    """Data, model, drift and out-of-sample check in a few lines; ``checking``: the
    check is still running (the line says so until its numbers come)."""
    q = comparison.quality
    m = comparison.model
    text = Text()
    text.append("Data  ", style="bold")
    rejected = sum((q.get("rejected") or {}).values())
    text.append(f"{comparison.underlying} on {fmt.date(comparison.asof)}, spot "
                f"{fmt.num(comparison.spot)}; {q.get('rows_used', 0)} of {q.get('rows_in', 0)} "
                f"quote rows used, {rejected} rejected (see Data quality). "
                f"Rate {fmt.pct(comparison.rate, 2)}%, dividend yield "
                f"{fmt.pct(comparison.div_yield, 2)}%, {comparison.style} exercise.\n")
    text.append("Model ", style="bold")
    text.append(f"{m.name} with {m.dist} innovations on {m.n_obs} daily returns; "
                f"persistence {fmt.num(m.persistence, 3)}, half-life "
                f"{fmt.num(m.half_life_days, 0)} trading days, long-run vol "
                f"{fmt.pct(m.long_run_vol)}%. ")
    text.append("converged" if m.converged else "NOT converged",
                style="green" if m.converged else "bold red")
    if m.fallback_reason:
        text.append(f" (fallback: {m.fallback_reason})", style="yellow")
    if comparison.drift is not None:
        text.append("\nDrift ", style="bold")
        text.append(f"simulated prices: {comparison.drift.text}. Puts: ask against the "
                    f"band of the model-expected payoff (floor {comparison.floor:.0%} of spot).")
    bt = comparison.backtest
    if bt:
        text.append("\nCheck ", style="bold")
        text.append(f"out of sample from {bt.get('split', '?')}: {bt.get('outside_band', '?')} "
                    f"of {bt.get('n_out', '?')} days outside ±{bt.get('band_k', 3)}σ, "
                    f"{fmt.num(bt.get('expected_model'), 1)} expected by the model "
                    f"({fmt.num(bt.get('expected_normal'), 1)} if normal). See Model check.")
    elif checking:
        text.append("\nCheck ", style="bold")
        text.append("checking the model out of sample … (see Model check)", style="dim")
    for w in comparison.warnings:
        text.append(f"\n! {w}", style="yellow")
    return text


class OverviewView(Deferred, VerticalScroll):
    """The first screen: the answer in one paragraph, then what it rests on."""

    def compose(self) -> ComposeResult:
        yield Static("Loading the scenario…", id="ov-headline", classes="headline")
        yield Static("", id="ov-verdicts")
        yield Static("", id="ov-state")
        yield Static("", id="ov-caution", classes="caution")

    def draw(self, comparison, estimate, pending: bool = False,
             checking: bool = False) -> None:
        """``pending``: the headline hedge is still being priced; ``checking``: the
        out-of-sample check is still running."""
        self.query_one("#ov-headline", Static).update(
            Text("Pricing the headline protection (the hedge planner's inputs) …")
            if pending else headline_text(comparison, estimate))
        self.query_one("#ov-verdicts", Static).update(verdict_table(comparison))
        self.query_one("#ov-state", Static).update(state_text(comparison, checking))
        self.query_one("#ov-caution", Static).update(f"⚠ {comparison.caution}")

    def show(self, *args) -> None:
        """Draw now (the first screen: its numbers are painted with the next frame)."""
        self._pending = args
        if self._ready:
            self.draw(*args)

    def show_loading(self, message: str) -> None:
        if self._ready:
            self.query_one("#ov-headline", Static).update(message)
