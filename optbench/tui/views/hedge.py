"""The hedge planner: edit the portfolio, beta, floor, expiry and structure and see
the estimate, the legs, the scenario table and the caution update at once.

The numbers are :func:`optbench.hedge` on the comparison on screen, with the same
simulation settings as ``optbench hedge`` (so the two agree for the same inputs).
"""
from __future__ import annotations

from dataclasses import dataclass

from rich.table import Table
from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.containers import ScrollableContainer, VerticalScroll
from textual.message import Message
from textual.widgets import Input, Label, Select, Static
from textual.worker import get_current_worker

from optbench import inputs
from optbench.errors import InputError
from optbench.tui import fmt
from optbench.tui.prefs import PlannerState
from optbench.tui.views import hedge_portfolio as hp
from optbench.tui.views.base import Deferred

STRUCTURES = (("protective put", "put"), ("put spread", "put_spread"),
              ("collar (sell a call)", "collar"))


#: the planner's fields: widget id -> the label the user sees (messages name it)
FIELDS = {"#hedge-portfolio": "Portfolio value", "#hedge-beta": "Beta to the underlying",
          "#hedge-floor": "Floor, % of spot", "#hedge-lower": "Put spread: sold put, % of spot",
          "#hedge-call": "Collar: sold call strike"}

#: the hedge request's argument names -> the planner's labels
_FLAG_LABELS = {"--portfolio": FIELDS["#hedge-portfolio"], "--beta": FIELDS["#hedge-beta"],
                "--floor": FIELDS["#hedge-floor"], "--lower-floor": FIELDS["#hedge-lower"],
                "--call-strike": FIELDS["#hedge-call"], "--expiry": "Expiry",
                "--structure": "Structure"}


def field_message(error: str) -> str:
    """A core message that names a command-line argument, with the planner's label."""
    for flag, label in _FLAG_LABELS.items():
        if error.startswith(f"{flag}:"):
            return label + error[len(flag):]
    return error


def expiry_options(comparison) -> list[tuple[str, str]]:
    """Every listed expiry, labelled with its date and calendar days: '2027-02-19 (84d)'."""
    return [(f"{fmt.date(r.expiry)} ({r.calendar_days}d)", r.expiry.isoformat())
            for r in comparison.expiries]


def nearest_expiry(comparison, days: int) -> int:
    """Index of the expiry nearest ``days`` calendar days, as the hedge picks it."""
    import numpy as np

    from optbench.analysis.hedge import nearest_index
    if not comparison.expiries:
        return 0
    return nearest_index(np.array([r.calendar_days for r in comparison.expiries], float), days)


@dataclass(frozen=True)
class PlannerInputs:
    """The planner's form, read into the keyword arguments of :func:`optbench.hedge`."""

    portfolio_value: float
    beta: float
    floor: float
    expiry: str | None
    structure: str
    lower_floor: float | None
    call_strike: float | None
    #: the user chose the expiry (else it is the one nearest the default days)
    expiry_picked: bool = False

    def state(self, calendar_days: int) -> PlannerState:
        """What to save and what the overview's headline follows: the expiry only when
        the user picked it."""
        default = PlannerState()
        picked = self.expiry_picked and self.expiry is not None
        return PlannerState(portfolio_value=self.portfolio_value, beta=self.beta,
                            floor=self.floor, structure=self.structure,
                            lower_floor=self.lower_floor, call_strike=self.call_strike,
                            expiry=self.expiry if picked else None,
                            days=int(calendar_days) if picked else default.days)

    def kwargs(self) -> dict:
        out = {"portfolio_value": self.portfolio_value, "beta": self.beta,
               "floor": self.floor, "structure": self.structure}
        if self.expiry:
            out["expiry"] = self.expiry
        if self.lower_floor is not None:
            out["lower_floor"] = self.lower_floor
        if self.call_strike is not None:
            out["call_strike"] = self.call_strike
        return out


def summary_table(est) -> Table:
    t = Table(show_header=False, box=None, expand=True, pad_edge=False)
    t.add_column("what", style="bold", no_wrap=True)
    t.add_column("value", justify="right", no_wrap=True)
    t.add_column("note", style="dim")
    t.add_row("Structure", est.structure_name, f"{est.strike_legs}, {fmt.date(est.expiry)} "
              f"({est.calendar_days} days)")
    t.add_row("Contracts", f"{est.contracts:,}", f"× {est.multiplier:g} on spot {fmt.num(est.spot)}")
    t.add_row("Premium paid", fmt.money(est.premium_paid), "ask for bought, bid for sold legs")
    t.add_row("Premium at mid", fmt.money(est.premium_mid), "")
    t.add_row("Cost of portfolio", fmt.pct_sign(est.cost_pct, 2),
              f"{fmt.pct_sign(est.cost_pct_annual, 2)} a year")
    t.add_row("Value at forecast vol", fmt.money(est.premium_at_forecast), "the legs priced at the model's vol")
    t.add_row("Model expected payoff", fmt.money(est.expected_payoff),
              f"{est.n_paths:,} simulated paths of the fitted model")
    t.add_row("Drift of the paths", (est.drift or {}).get("rule", "–"),
              (est.drift or {}).get("text", ""))
    t.add_row("Paid over expected", fmt.money(est.overpay, signed=True), "premium paid − expected payoff")
    t.add_row("Chance it pays", fmt.pct_sign(est.prob_payoff, 0), "share of paths with a payoff")
    t.add_row("Breakeven", fmt.num(est.breakeven), f"{fmt.pct_sign(est.breakeven_move, 1)} from spot")
    t.add_row("Rolling for a year", fmt.money(est.annual_roll_cost),
              f"{fmt.pct_sign(est.annual_roll_cost_pct, 2)} of the portfolio")
    return t


def legs_table(est) -> Table:
    t = Table(expand=True, header_style="bold", title="Legs", title_justify="left")
    for c in ("Side", "Type", "Strike", "Qty", "Bid", "Ask", "Mid IV %", "Fc %", "Paid"):
        t.add_column(c, justify="left" if c in ("Side", "Type") else "right", no_wrap=True)
    for leg in est.legs:
        t.add_row(leg.side, leg.type, f"{leg.strike:g}", f"{leg.quantity:,}", fmt.num(leg.bid),
                  fmt.num(leg.ask), fmt.pct(leg.iv_mid), fmt.pct(leg.forecast_vol),
                  fmt.money(leg.premium_paid, signed=True))
    return t


def scenario_table(est) -> Table:
    t = Table(expand=True, header_style="bold", title="Portfolio P&L at expiry",
              title_justify="left")
    for c in ("Move", "Level", "Unhedged", "Hedged"):
        t.add_column(c, justify="right", no_wrap=True)
    for s in est.scenarios:
        better = s["hedged"] > s["unhedged"]
        t.add_row(fmt.pct(s["move"], 0, signed=True) + "%", fmt.num(s.get("level")), fmt.money(s["unhedged"], True),
                  Text(fmt.money(s["hedged"], True), style="green" if better else ""))
    return t


class HedgeView(Deferred, ScrollableContainer):
    """Form on the left, estimate on the right (stacked on a narrow terminal)."""

    class Ready(Message):
        """An estimate for the planner's inputs (the app saves them and the overview's
        headline follows them), with the portfolio's sections when a holdings file or
        the menu is in use."""

        def __init__(self, estimate, inputs: PlannerInputs, comparison=None,
                     portfolio=None) -> None:
            super().__init__()
            self.estimate = estimate
            self.inputs = inputs
            self.comparison = comparison
            self.portfolio = portfolio

    class Failed(Message):
        def __init__(self, error: str) -> None:
            super().__init__()
            self.error = error

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self._comparison = None
        self.estimate = None
        self._timer = None
        #: None until the form is built; then whether the user chose the expiry
        self._expiry_picked: bool | None = None

    def compose(self) -> ComposeResult:
        p = getattr(self.app, "planner", None) or PlannerState()
        self._expiry_picked = p.expiry is not None
        with VerticalScroll(id="hedge-form", can_focus=False):
            yield Label("Portfolio value")
            yield Input(f"{p.portfolio_value:,.0f}", id="hedge-portfolio", compact=True)
            yield Label("Beta to the underlying")
            yield Input(f"{p.beta:g}", id="hedge-beta", compact=True)
            yield Label("Floor, % of spot (put strike)")
            yield Input(f"{p.floor * 100:g}", id="hedge-floor", compact=True)
            yield Label("Expiry")
            yield Select([], id="hedge-expiry", allow_blank=True, prompt="expiry",
                         compact=True)
            yield Label("Structure")
            yield Select(STRUCTURES, value=p.structure, allow_blank=False,
                         id="hedge-structure", compact=True)
            yield Label("Put spread: sold put, % of spot")
            yield Input("" if p.lower_floor is None else f"{p.lower_floor * 100:g}",
                        placeholder="floor − 10", id="hedge-lower", compact=True)
            yield Label("Collar: sold call strike")
            yield Input("" if p.call_strike is None else f"{p.call_strike:g}",
                        placeholder="zero-cost call", id="hedge-call", compact=True)
            yield Label("Portfolio (beta from history)")
            yield Select(hp.SOURCES, value="typed", allow_blank=False, id="hedge-source",
                         compact=True)
            yield Input("", placeholder="holdings file (default: beside the chain)",
                        id="hedge-holdings", compact=True)
            yield Label("Protection menu")
            yield Select(hp.MENU_CHOICES, value="off", allow_blank=False, id="hedge-menu",
                         compact=True)
            yield Static("", id="hedge-error", classes="form-error")
        with VerticalScroll(id="hedge-result"):
            yield Static("Pricing …", id="hedge-summary")
            yield Static("", id="hedge-legs")
            yield Static("", id="hedge-scenarios")
            yield Static("", id="hedge-portfolio-view")
            yield Static("", id="hedge-notes", classes="note")
            yield Static("", id="hedge-caution", classes="caution")

    def draw(self, comparison) -> None:
        self._comparison = comparison
        select = self.query_one("#hedge-expiry", Select)
        keep = select.value if isinstance(select.value, str) else None
        options = expiry_options(comparison)
        values = [v for _, v in options]
        with self.prevent(Select.Changed):
            select.set_options(options)
            if keep in values:
                select.value = keep
            elif values:  # the saved expiry, else the one nearest the saved days
                p = getattr(self.app, "planner", None) or PlannerState()
                select.value = (p.expiry if p.expiry in values
                                else values[nearest_expiry(comparison, p.days)])
        self.recalculate(now=True)

    def read_form(self) -> PlannerInputs:
        def text(wid: str) -> str:
            return self.query_one(wid, Input).value

        expiry = self.query_one("#hedge-expiry", Select).value
        lower = text("#hedge-lower")
        call = text("#hedge-call")
        return PlannerInputs(
            portfolio_value=inputs.money(text("#hedge-portfolio"), FIELDS["#hedge-portfolio"]),
            beta=inputs.positive(text("#hedge-beta"), FIELDS["#hedge-beta"]),
            floor=inputs.fraction(text("#hedge-floor"), FIELDS["#hedge-floor"]),
            expiry=expiry if isinstance(expiry, str) else None,
            structure=str(self.query_one("#hedge-structure", Select).value),
            lower_floor=inputs.optional(inputs.fraction, lower, FIELDS["#hedge-lower"]),
            call_strike=inputs.optional(inputs.positive, call, FIELDS["#hedge-call"]),
            expiry_picked=bool(self._expiry_picked))

    @on(Input.Changed)
    @on(Select.Changed)
    def _edited(self, event) -> None:
        event.stop()
        if isinstance(event, Select.Changed) and event.select.id == "hedge-expiry":
            self._expiry_picked = True
        self.recalculate()

    def recalculate(self, now: bool = False) -> None:
        """Re-read the form and price again (after a short pause while typing)."""
        if self._timer is not None:
            self._timer.stop()
            self._timer = None
        if now:
            self._start()
        else:
            self._timer = self.set_timer(0.15, self._start)

    def _start(self) -> None:
        self._timer = None
        if self._comparison is None:
            return
        error = self.query_one("#hedge-error", Static)
        try:
            inputs = self.read_form()
        except InputError as err:
            error.update(f"✗ {err}")
            self.add_class("stale")
            return
        holdings = None
        if self.query_one("#hedge-source", Select).value == "holdings":
            typed = self.query_one("#hedge-holdings", Input).value.strip()
            holdings = (hp.Path(typed).expanduser() if typed
                        else hp.find_holdings(self.app.inputs.source.chain))
            if holdings is None or not holdings.is_file():
                error.update(f"✗ {typed}: no such file" if typed
                             else "✗ no holdings.csv beside the chain")
                self.add_class("stale")
                return
        error.update("")
        self.price(self._comparison, inputs, holdings,
                   self.query_one("#hedge-menu", Select).value == "on")

    @work(thread=True, exclusive=True, group="hedge")
    def price(self, comparison, inputs: PlannerInputs, holdings=None, menu=False) -> None:
        worker = get_current_worker()
        try:
            settings = self.app.inputs.settings
            ph = hp.compute(comparison, inputs.kwargs(), holdings=holdings, menu=menu,
                            n_paths=settings.hedge_paths, seed=settings.seed)
            estimate = ph.estimate
        except InputError as err:
            if not worker.is_cancelled:
                self.post_message(self.Failed(field_message(str(err))))
            return
        if not worker.is_cancelled:
            self.post_message(self.Ready(estimate, inputs, comparison, ph))

    def fill(self, p: PlannerState) -> None:
        """Put ``p`` into the form (back to defaults) and price it."""
        self._expiry_picked = p.expiry is not None
        with self.prevent(Input.Changed, Select.Changed):
            self.query_one("#hedge-portfolio", Input).value = f"{p.portfolio_value:,.0f}"
            self.query_one("#hedge-beta", Input).value = f"{p.beta:g}"
            self.query_one("#hedge-floor", Input).value = f"{p.floor * 100:g}"
            self.query_one("#hedge-structure", Select).value = p.structure
            self.query_one("#hedge-lower", Input).value = (
                "" if p.lower_floor is None else f"{p.lower_floor * 100:g}")
            self.query_one("#hedge-call", Input).value = (
                "" if p.call_strike is None else f"{p.call_strike:g}")
            if self._comparison is not None:
                values = [v for _, v in expiry_options(self._comparison)]
                if values:
                    self.query_one("#hedge-expiry", Select).value = (
                        p.expiry if p.expiry in values
                        else values[nearest_expiry(self._comparison, p.days)])
        self.recalculate(now=True)

    @on(Ready)
    def _ready(self, message: Ready) -> None:
        self.estimate = message.estimate
        est = message.estimate
        self.remove_class("stale")
        self.query_one("#hedge-error", Static).update("")
        self.query_one("#hedge-summary", Static).update(summary_table(est))
        self.query_one("#hedge-legs", Static).update(legs_table(est))
        self.query_one("#hedge-scenarios", Static).update(scenario_table(est))
        if message.portfolio is not None:
            self.query_one("#hedge-portfolio-view", Static).update(
                hp.portfolio_view(message.portfolio))
        warnings = message.portfolio.warnings if message.portfolio else est.warnings
        notes = [n for n in (est.collar_note, *warnings) if n]
        self.query_one("#hedge-notes", Static).update("\n".join(notes))
        self.query_one("#hedge-caution", Static).update(f"⚠ {est.caution}")

    @on(Failed)
    def _failed(self, message: Failed) -> None:
        self.add_class("stale")
        self.query_one("#hedge-error", Static).update(f"✗ {message.error}")
