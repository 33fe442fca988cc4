"""Rich / cheap: per expiry and per strike, sortable, verdicts with a text mark."""
from __future__ import annotations

import math

from rich.text import Text
from textual import on
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.widgets import DataTable, Static

from optbench.tui import fmt
from optbench.tui.widgets.table import SortableTable

EXPIRY_COLUMNS = (("expiry", "Expiry"), ("tenor", "Tenor"), ("n", "Quotes"),
                  ("atm", "ATM IV %"), ("fc", "Forecast %"), ("band", "Band %"),
                  ("diff", "IV − fc pts"), ("ratio", "IV / fc"), ("vrp", "Var prem"),
                  ("rr", "25Δ RR pts"), ("prob", "P(RV > IV)"), ("verdict", "Verdict"))

STRIKE_COLUMNS = (("type", "Type"), ("strike", "Strike"), ("money", "K / F"), ("bid", "Bid"),
                  ("ask", "Ask"), ("ivb", "Bid IV %"), ("ivm", "Mid IV %"), ("iva", "Ask IV %"),
                  ("fc", "Forecast %"), ("pf", "Value at fc"), ("edge", "Edge / contract"),
                  ("edgev", "Edge, vol pts"), ("delta", "Delta"), ("vega", "Vega / pt"),
                  ("line", "Line"))


def _edge_mark(points: float) -> Text:
    """Market mid above (▲) or below (▼) its value at the forecast vol, in vol points."""
    if points is None or (isinstance(points, float) and math.isnan(points)):
        return Text("–")
    mark, style = ("▲", "red") if points > 0 else ("▼", "green") if points < 0 else ("=", "")
    return Text(f"{mark} {points:+.2f}", style=style, justify="right")


def expiry_rows(comparison):
    raw, shown = [], []
    for r in comparison.expiries:
        raw.append((r.expiry.isoformat(), r.calendar_days, r.n_quotes, r.atm_iv, r.forecast_vol,
                    r.forecast_high - r.forecast_low, r.iv_minus_forecast, r.iv_forecast_ratio,
                    r.variance_premium, r.rr_25d, r.prob_realized_above_iv,
                    ("rich", "fair", "cheap", "n/a").index(r.verdict)
                    if r.verdict in ("rich", "fair", "cheap", "n/a") else 9))
        shown.append((fmt.date(r.expiry), fmt.tenor(r.calendar_days), str(r.n_quotes),
                      fmt.pct(r.atm_iv), fmt.pct(r.forecast_vol),
                      f"{fmt.pct(r.forecast_low)}–{fmt.pct(r.forecast_high)}",
                      fmt.pct(r.iv_minus_forecast, signed=True), fmt.num(r.iv_forecast_ratio),
                      fmt.num(r.variance_premium, 4, signed=True), fmt.pct(r.rr_25d, signed=True),
                      fmt.pct(r.prob_realized_above_iv, 0), fmt.verdict(r.verdict)))
    return raw, shown


def strike_rows(table):
    cols = {c: table[c].to_numpy() for c in table.columns}
    n = len(table)
    raw, shown = [], []
    for i in range(n):  # display rows only; the numbers are the core's per-strike table
        g = {c: cols[c][i] for c in cols}
        raw.append((str(g["type"]), float(g["strike"]), float(g["moneyness"]), float(g["bid"]),
                    float(g["ask"]), float(g["iv_bid"]), float(g["iv_mid"]), float(g["iv_ask"]),
                    float(g["forecast_vol"]), float(g["price_at_forecast"]),
                    float(g["edge_per_contract"]), float(g["edge_vol_points"]),
                    float(g["delta"]), float(g["vega_per_vol_point"]), int(g["line"])))
        shown.append((str(g["type"]), fmt.num(g["strike"], 2), fmt.num(g["moneyness"], 3),
                      fmt.num(g["bid"]), fmt.num(g["ask"]), fmt.pct(g["iv_bid"]),
                      fmt.pct(g["iv_mid"]), fmt.pct(g["iv_ask"]), fmt.pct(g["forecast_vol"]),
                      fmt.num(g["price_at_forecast"]), fmt.money(g["edge_per_contract"], True),
                      _edge_mark(float(g["edge_vol_points"])), fmt.num(g["delta"], 3),
                      fmt.num(g["vega_per_vol_point"], 3), str(int(g["line"]))))
    return raw, shown


class RichCheapView(Vertical):
    """Expiries on top (move the cursor to pick one), that expiry's strikes below."""

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self._comparison = None
        self.expiry: str | None = None

    def compose(self) -> ComposeResult:
        yield Static("", id="rc-rule", classes="note")
        yield SortableTable(id="rc-expiries")
        yield Static("", id="rc-strike-title", classes="section-title")
        yield SortableTable(id="rc-strikes")

    def show(self, comparison) -> None:
        self._comparison = comparison
        lo, hi = comparison.band
        self.query_one("#rc-rule", Static).update(
            f"Verdict: {comparison.verdict_rule}.  ▲ rich  = fair  ▼ cheap.  Edge ▲ = market "
            f"mid above the option's value at the forecast vol.  s sorts by the cursor's "
            f"column; Enter on an expiry shows its strikes.")
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
            f"Strikes for {iso} ({fmt.tenor(row.calendar_days)}): {len(table)} quotes, "
            f"forecast {fmt.pct(row.forecast_vol)}%, multiplier "
            f"{fmt.num(self._comparison.multiplier, 0)}")
        raw, shown = strike_rows(table)
        self.query_one("#rc-strikes", SortableTable).set_rows(
            STRIKE_COLUMNS, raw, shown, keys=[f"{r[0]}{r[1]}-{r[14]}" for r in raw])

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
