"""The smile per expiry: bid / mid / ask implied vols by strike, the fitted smile and
the forecast level."""
from __future__ import annotations

import numpy as np
from textual import on
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.widgets import Label, Select, Static

from optbench.tui import fmt
from optbench.tui.widgets.plot import CellPlot, PlotSpec, Series
from optbench.tui.views.base import Deferred
from optbench.tui.views.hedge import expiry_options

def fitted_curve(row) -> tuple[np.ndarray, np.ndarray] | None:
    """The expiry's fitted smile as the comparison computed it: (strikes, vols)."""
    curve = (row.smile or {}).get("curve")
    if not curve:
        return None
    return np.asarray(curve["strike"], float), np.asarray(curve["iv"], float)


def smile_plot(comparison, row) -> PlotSpec:
    table = comparison.strikes.get(row.expiry)
    if table is None or len(table) == 0:
        return PlotSpec(title=f"{fmt.date(row.expiry)}: no quotes used")
    # out-of-the-money side of each strike: puts below the forward, calls above
    otm = np.where(table["strike"].to_numpy() < row.forward, ~table["is_call"].to_numpy(),
                   table["is_call"].to_numpy())
    t = table[otm]
    k = t["strike"].to_numpy(float)
    series = [
        Series("bid IV", k, t["iv_bid"].to_numpy(float) * 100, kind="points", color="cyan",
               marker="˅"),
        Series("ask IV", k, t["iv_ask"].to_numpy(float) * 100, kind="points", color="red",
               marker="˄"),
        Series("mid IV", k, t["iv_mid"].to_numpy(float) * 100, kind="points", color="white",
               marker="•"),
    ]
    curve = fitted_curve(row)
    if curve is not None:
        series.insert(0, Series(f"fitted smile ({row.smile.get('method', 'svi')})", curve[0],
                                curve[1] * 100, color="yellow"))
    if curve is None:
        # points of the fitted smile the comparison reports: 90 % and 95 % of the forward
        series.append(Series("fit at 90/95% of forward", [0.90 * row.forward, 0.95 * row.forward],
                             [row.iv_90 * 100, row.iv_95 * 100], kind="points",
                             color="yellow", marker="◇"))
    series.append(Series(f"ATM {fmt.pct(row.atm_iv)}%", [row.forward],
                         [row.atm_iv * 100], kind="points", color="bright_green", marker="◎"))
    series.append(Series(f"forecast {fmt.pct(row.forecast_vol)}%", [k.min(), k.max()],
                         [row.forecast_vol * 100] * 2, color="bright_blue"))
    series.append(Series("forecast band (parameter uncertainty)", [k.min(), k.max()],
                         [row.forecast_low * 100] * 2,
                         kind="band", y2=[row.forecast_high * 100] * 2, color="grey23"))
    # draw the band first so everything sits on top of it
    series = [series[-1]] + series[:-1]
    return PlotSpec(
        title=(f"Smile {fmt.date(row.expiry)} ({row.calendar_days}d), implied vol % "
               f"by strike, out-of-the-money quotes; forward {fmt.num(row.forward)}"),
        series=tuple(series), x_format="{:.0f}",
        extra_legend=())


class SmileView(Deferred, Vertical):
    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self._comparison = None

    def compose(self) -> ComposeResult:
        with Horizontal(classes="toolbar"):
            yield Label("Expiry ", classes="toolbar-label")
            yield Select([], id="smile-expiry", allow_blank=True, prompt="expiry")
            yield Static("", id="smile-facts", classes="toolbar-facts")
        yield CellPlot(id="smile-plot")

    def draw(self, comparison) -> None:
        self._comparison = comparison
        select = self.query_one("#smile-expiry", Select)
        options = expiry_options(comparison)
        keep = select.value if isinstance(select.value, str) else None
        select.set_options(options)
        values = [v for _, v in options]
        if values:
            default = keep if keep in values else values[min(len(values) - 1,
                                                             _nearest(comparison, 91))]
            select.value = default
            self._draw(default)

    def _draw(self, iso: str) -> None:
        if self._comparison is None:
            return
        row = self._comparison.expiry_row(iso)
        self.query_one("#smile-plot", CellPlot).show(smile_plot(self._comparison, row))
        smile = row.smile or {}
        self.query_one("#smile-facts", Static).update(
            f"  ATM {fmt.pct(row.atm_iv)}%  25Δ put {fmt.pct(row.iv_25d_put)}%  25Δ call "
            f"{fmt.pct(row.iv_25d_call)}%  RR {fmt.pct(row.rr_25d, signed=True)}  fit rmse "
            f"{fmt.pct(smile.get('rmse', smile.get('rmse_iv')), 2)} pts  "
            f"{row.arbitrage_flags} arbitrage flags")

    @on(Select.Changed, "#smile-expiry")
    def _changed(self, event: Select.Changed) -> None:
        if isinstance(event.value, str):
            self._draw(event.value)

    def action_step(self, step: int) -> None:
        select = self.query_one("#smile-expiry", Select)
        if self._comparison is None or not isinstance(select.value, str):
            return
        values = [r.expiry.isoformat() for r in self._comparison.expiries]
        i = values.index(select.value) + step
        select.value = values[max(0, min(len(values) - 1, i))]


def _nearest(comparison, days: int) -> int:
    gaps = [abs(r.calendar_days - days) for r in comparison.expiries]
    return int(np.argmin(gaps)) if gaps else 0
