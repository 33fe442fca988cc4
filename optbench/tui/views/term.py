"""Term structure: implied (ATM and model-free) against the forecast, its band and
realized vol, per expiry — a plot and its table."""
from __future__ import annotations

import numpy as np
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.widgets import Static

from optbench.tui import fmt
from optbench.tui.widgets.plot import CellPlot, PlotSpec, Series
from optbench.tui.widgets.table import SortableTable
from optbench.tui.views.base import Deferred

COLUMNS = (("expiry", "Expiry"), ("days", "Days"), ("verdict", "Verdict"), ("tdays", "Tr.days"),
           ("forward", "Forward"), ("atm", "ATM IV"), ("bid", "Bid IV"),
           ("ask", "Ask IV"), ("mfiv", "MF IV"), ("fc", "Fcst"),
           ("low", "Band lo"), ("high", "Band hi"), ("rv", "Realzd"),
           ("cone", "Cone %ile"), ("diff", "IV−fc"), ("prob", "P(RV>IV)"))


def term_plot(comparison) -> PlotSpec:
    rows = comparison.expiries
    days = np.array([r.calendar_days for r in rows], float)

    def col(name: str) -> np.ndarray:
        return np.array([getattr(r, name) for r in rows], float) * 100.0

    lo, hi = comparison.band
    band = comparison.conventions.get(
        "forecast_band", "quantiles of the forecast over the model's parameter uncertainty")
    return PlotSpec(
        title=(f"{comparison.underlying} vol term structure, % a year, by calendar days to "
               f"expiry (band: {lo:.0%}–{hi:.0%} {band}). Table: vols in "
               "%, IV−fc in vol points, MF = model-free"),
        series=(
            Series("forecast band", days, col("forecast_low"), kind="band",
                   y2=col("forecast_high"), color="grey27"),
            Series("forecast", days, col("forecast_vol"), color="bright_blue"),
            Series("ATM implied", days, col("atm_iv"), color="bright_red"),
            Series("ATM implied", days, col("atm_iv"), kind="points", color="bright_red",
                   marker="●"),

            Series("model-free implied", days, col("model_free_iv"), kind="points",
                   color="magenta", marker="◆"),
            Series("realized (trailing, same length)", days, col("realized_vol"),
                   kind="points", color="green", marker="×"),
        ),
        y_format="{:.1f}", x_format="{:.0f}")


def term_rows(comparison):
    raw, shown = [], []
    for r in comparison.expiries:
        raw.append((r.expiry.isoformat(), r.calendar_days, r.verdict, r.trading_days, r.forward,
                    r.atm_iv, r.atm_iv_bid, r.atm_iv_ask, r.model_free_iv, r.forecast_vol,
                    r.forecast_low, r.forecast_high, r.realized_vol, r.cone_percentile,
                    r.iv_minus_forecast, r.prob_realized_above_iv))
        shown.append((fmt.date(r.expiry), str(r.calendar_days), fmt.verdict(r.verdict),
                      str(r.trading_days),
                      fmt.num(r.forward), fmt.pct(r.atm_iv), fmt.pct(r.atm_iv_bid),
                      fmt.pct(r.atm_iv_ask), fmt.pct(r.model_free_iv), fmt.pct(r.forecast_vol),
                      fmt.pct(r.forecast_low), fmt.pct(r.forecast_high), fmt.pct(r.realized_vol),
                      fmt.pct(r.cone_percentile, 0), fmt.pct(r.iv_minus_forecast, signed=True),
                      fmt.pct(r.prob_realized_above_iv, 0)))
    return raw, shown


class TermView(Deferred, VerticalScroll):
    def compose(self) -> ComposeResult:
        yield CellPlot(id="term-plot")
        yield Static("Table: vols in %, IV−fc in vol points, MF = model-free, Tr.days = "
                     "trading days", id="term-caption", classes="note")
        yield SortableTable(id="term-table")

    def draw(self, comparison) -> None:
        self.query_one("#term-plot", CellPlot).show(term_plot(comparison))
        raw, shown = term_rows(comparison)
        self.query_one("#term-table", SortableTable).set_rows(
            COLUMNS, raw, shown, keys=[r[0] for r in raw])
