"""Rich / cheap: per expiry and per strike, sortable, verdicts with a text mark."""
from __future__ import annotations

import math

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.widgets import DataTable, Static
from textual.widgets.data_table import RowDoesNotExist

from optbench.tui import fmt
from optbench.tui.widgets.table import SortableTable
from optbench.tui.views.base import Deferred

EXPIRY_COLUMNS = (("expiry", "Expiry"), ("days", "Days"), ("verdict", "Verdict"),
                  ("atm", "ATM IV"), ("fc", "Fcst"), ("band", "Band"),
                  ("diff", "IV−fc"), ("ratio", "IV/fc"), ("vrp", "Var prem"),
                  ("rr", "25Δ RR"), ("prob", "P(RV>IV) %"), ("n", "Quotes"),
                  ("p25", "25Δ put"), ("p25e", "25Δ ask · E[payoff]"),
                  ("pfl", "Floor put"), ("pfle", "Floor ask · E[payoff]"))

STRIKE_COLUMNS = (("type", "Type"), ("strike", "Strike"), ("money", "K/F"),
                  ("edgev", "Edge vol pts"), ("edgeg", "Edge/vega"), ("edge", "Edge/contract"),
                  ("bid", "Bid"),
                  ("ask", "Ask"), ("ivb", "Bid IV"), ("ivm", "Mid IV"), ("iva", "Ask IV"),
                  ("fc", "Fcst"), ("pf", "Value at fc"), ("delta", "Delta"),
                  ("vega", "Vega/pt"), ("line", "Line"))


#: what the three edge columns measure, and why two of them differ
EDGE_NOTE = ("Edge vol pts = mid implied vol − forecast vol, exactly. Edge/vega = (mid − "
             "value at forecast) ÷ vega per vol point: the same gap to first order; the two "
             "part far from the money, where vega changes with the vol. Edge/contract = "
             "(mid − value at forecast) × multiplier, in money. ▲ market above the forecast.")


def _edge_mark(points: float) -> Text:
    """Market mid above (▲) or below (▼) its value at the forecast vol, in vol points."""
    if points is None or (isinstance(points, float) and math.isnan(points)):
        return Text("–")
    mark, style = ("▲", "red") if points > 0 else ("▼", "green") if points < 0 else ("=", "")
    return Text(f"{mark} {points:+.2f}", style=style, justify="right")


#: sort order of verdicts: dearest first
_VERDICT_ORDER = {"rich": 0, "fair": 1, "cheap": 2, "n/a": 3}


def expiry_rows(comparison):
    raw, shown = [], []
    for r in comparison.expiries:
        raw.append((r.expiry.isoformat(), r.calendar_days, _VERDICT_ORDER.get(r.verdict, 9),
                    r.atm_iv, r.forecast_vol, r.forecast_low, r.iv_minus_forecast,
                    r.iv_forecast_ratio, r.variance_premium, r.rr_25d,
                    r.prob_realized_above_iv, r.n_quotes,
                    _VERDICT_ORDER.get(r.put25_verdict, 9), r.put25_expected_payoff,
                    _VERDICT_ORDER.get(r.floor_put_verdict, 9), r.floor_put_expected_payoff))
        shown.append((fmt.date(r.expiry), str(r.calendar_days), fmt.verdict(r.verdict),
                      fmt.pct(r.atm_iv), fmt.pct(r.forecast_vol),
                      f"{fmt.pct(r.forecast_low)}–{fmt.pct(r.forecast_high)}",
                      fmt.pct(r.iv_minus_forecast, signed=True), fmt.num(r.iv_forecast_ratio),
                      fmt.num(r.variance_premium, 4, signed=True), fmt.pct(r.rr_25d, signed=True),
                      fmt.pct(r.prob_realized_above_iv, 0), str(r.n_quotes),
                      fmt.verdict(r.put25_verdict),
                      f"{fmt.num(r.put25_premium)} · {fmt.num(r.put25_expected_payoff)}",
                      fmt.verdict(r.floor_put_verdict),
                      f"{fmt.num(r.floor_put_premium)} · {fmt.num(r.floor_put_expected_payoff)}"))
    return raw, shown


def strike_rows(table):
    """Raw values of every row (for sorting) and a function giving a row's cells."""
    cols = {c: table[c].to_numpy() for c in table.columns}
    order = ("type", "strike", "moneyness", "edge_vol_points", "edge_per_vega",
             "edge_per_contract", "bid",
             "ask", "iv_bid", "iv_mid", "iv_ask", "forecast_vol", "price_at_forecast",
             "delta", "vega_per_vol_point", "line")
    numeric = [cols[c].astype(float) if c not in ("type", "line") else cols[c] for c in order]
    raw = list(zip(*[v.tolist() for v in numeric]))

    def shown(i: int) -> tuple:
        g = {c: cols[c][i] for c in order}
        return (str(g["type"]), fmt.num(g["strike"], 2), fmt.num(g["moneyness"], 3),
                _edge_mark(float(g["edge_vol_points"])), fmt.num(g["edge_per_vega"], 2, True),
                fmt.money(g["edge_per_contract"], True), fmt.num(g["bid"]),
                fmt.num(g["ask"]), fmt.pct(g["iv_bid"]), fmt.pct(g["iv_mid"]),
                fmt.pct(g["iv_ask"]), fmt.pct(g["forecast_vol"]),
                fmt.num(g["price_at_forecast"]), fmt.num(g["delta"], 3),
                fmt.num(g["vega_per_vol_point"], 3), str(int(g["line"])))
    return raw, shown


class RichCheapView(Deferred, VerticalScroll):
    """Expiries on top (move the cursor to pick one), that expiry's strikes below."""

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self._comparison = None
        self.expiry: str | None = None

    def compose(self) -> ComposeResult:
        yield Static("", id="rc-rule", classes="note")
        yield SortableTable(id="rc-expiries")
        yield Static("", id="rc-strike-title", classes="section-title")
        yield Static(EDGE_NOTE, id="rc-edge-note", classes="note")
        yield SortableTable(id="rc-strikes")

    def draw(self, comparison) -> None:
        self._comparison = comparison
        lo, hi = comparison.band
        self.query_one("#rc-rule", Static).update(
            "▲ rich / = fair / ▼ cheap: ATM implied vol above / inside / below the forecast "
            f"band ({lo:.0%}–{hi:.0%} quantiles of the forecast over the model's parameter "
            "uncertainty). Puts (25Δ, floor "
            f"{comparison.floor:.0%}): the ask above / inside / below the band of the "
            "model-expected payoff (▲ = expensive protection). Vols in %. s sorts by a "
            "column; Enter shows an expiry's strikes.")
        raw, shown = expiry_rows(comparison)
        self.query_one("#rc-expiries", SortableTable).set_rows(
            EXPIRY_COLUMNS, raw, shown, keys=[r[0] for r in raw])
        if comparison.expiries:
            keep = self.expiry if self.expiry in [r[0] for r in raw] else raw[0][0]
            self.show_strikes(keep)

    def show_strikes(self, iso: str) -> None:
        if self._comparison is None:
            return
        self.expiry = iso
        row = self._comparison.expiry_row(iso)
        table = self._comparison.strike_frame(iso)
        self.query_one("#rc-strike-title", Static).update(
            f"Strikes for {iso} ({row.calendar_days}d): {len(table)} quotes, "
            f"forecast {fmt.pct(row.forecast_vol)}%, multiplier "
            f"{fmt.num(self._comparison.multiplier, 0)}")
        raw, shown = strike_rows(table)
        self.query_one("#rc-strikes", SortableTable).set_rows(
            STRIKE_COLUMNS, raw, shown, keys=[f"{r[0]}{r[1]}-{r[-1]}" for r in raw])

    def step_expiry(self, step: int) -> None:
        """Show the strikes of the previous / next expiry (and move the cursor there)."""
        if self._comparison is None or not self._comparison.expiries:
            return
        values = [r.expiry.isoformat() for r in self._comparison.expiries]
        i = values.index(self.expiry) + step if self.expiry in values else 0
        iso = values[max(0, min(len(values) - 1, i))]
        self.show_strikes(iso)
        table = self.query_one("#rc-expiries", SortableTable)
        try:
            table.move_cursor(row=table.get_row_index(iso))
        except RowDoesNotExist:  # on another page of the table: the strikes still change
            pass

    @on(DataTable.CellHighlighted, "#rc-expiries")
    def _picked(self, event: DataTable.CellHighlighted) -> None:
        key = event.cell_key.row_key.value
        if key and key != self.expiry:
            self.show_strikes(key)

    @on(DataTable.CellSelected, "#rc-expiries")
    def _enter(self, event: DataTable.CellSelected) -> None:
        key = event.cell_key.row_key.value
        if key:
            self.show_strikes(key)
            self.query_one("#rc-strikes", SortableTable).focus()
