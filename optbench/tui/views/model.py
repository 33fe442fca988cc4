"""The model check: parameters with standard errors, daily returns with ±k sigma
bands and the out-of-sample surprises, band counts against expected, the residuals."""
from __future__ import annotations

import numpy as np
from rich.table import Table
from textual.app import ComposeResult
from textual.containers import ScrollableContainer, Vertical, VerticalScroll
from textual.widgets import Static

from optbench.tui import fmt
from optbench.tui.widgets.plot import BarChart, CellPlot, PlotSpec, Series, to_day_number
from optbench.tui.views.base import Deferred


def params_table(model) -> Table:
    t = Table(title=f"{model.name}, {model.dist} innovations", title_justify="left",
              header_style="bold", expand=True)
    t.add_column("Parameter")
    t.add_column("Estimate", justify="right")
    t.add_column("Std error", justify="right")
    for name, value in model.params.items():
        se = (model.std_errors or {}).get(name)
        t.add_row(name, f"{value:.4g}", "–" if se is None else f"{se:.2g}")
    t.add_row("log-likelihood", fmt.num(model.loglik, 1), "")
    t.add_row("AIC", fmt.num(model.aic, 1), "")
    t.add_row("BIC", fmt.num(model.bic, 1), "")
    t.add_row("persistence", fmt.num(model.persistence, 4), "")
    t.add_row("half-life, trading d", fmt.num(model.half_life_days, 1), "")
    t.add_row("long-run vol %", fmt.pct(model.long_run_vol), "")
    t.add_row("daily returns used", f"{model.n_obs:,}", "")
    return t


def counts_table(bt: dict | None) -> Table:
    title = "Out of sample" + (f" from {bt.get('split')}" if bt else "")
    t = Table(title=title, title_justify="left", header_style="bold", expand=True)
    t.add_column("Check", ratio=3)
    t.add_column("Seen", justify="right")
    t.add_column("Expected", justify="right", ratio=2)
    t.add_column("Zone, Kupiec p", justify="right", ratio=2)
    if not bt:
        t.add_row("checking the model out of sample …", "", "", "")
        return t
    k = bt.get("band_k", 3)
    t.add_row(f"days outside ±{k:g}σ of {bt.get('n_out', '?')}", str(bt.get("outside_band", "–")),
              f"{fmt.num(bt.get('expected_model'), 1)} model", "")
    t.add_row("", "", f"{fmt.num(bt.get('expected_normal'), 1)} if normal", "")
    for v in bt.get("var", []) or []:
        zone = v.get("zone", "")
        mark = {"green": "● green", "yellow": "◐ yellow", "red": "○ red"}.get(zone, zone)
        t.add_row(f"VaR {v.get('level', 0) * 100:g}% breaches", str(v.get("exceedances", "–")),
                  fmt.num(v.get("expected"), 1) if "expected" in v else "",
                  f"{mark} {fmt.num(v.get('kupiec_p'), 2)}")
    res = bt.get("residuals") or {}
    if res:
        t.add_row("residual skew", fmt.num(res.get("skew"), 2), "", "")
        t.add_row("residual excess kurtosis", fmt.num(res.get("excess_kurtosis"), 2), "", "")
    return t


#: trading days of returns plotted (about two years: one before the check, one in it)
PLOT_DAYS = 504


def returns_plot(comparison) -> PlotSpec:
    h = comparison.history
    bt = comparison.backtest or {}
    if h is None or len(h) == 0:
        return PlotSpec(title="no price history in this comparison")
    k = float(bt.get("band_k", 3))
    h = h.tail(PLOT_DAYS)
    x = to_day_number(h["date"].to_numpy())
    ret = h["ret"].to_numpy(float) * 100
    band = h["sigma"].to_numpy(float) * 100 * k
    series = [Series(f"±{k:g}σ (model)", x, -band, kind="band", y2=band, color="grey23"),
              Series("daily log return %", x, ret, color="bright_white")]
    surprises = bt.get("surprises") or []
    if surprises:
        dates = to_day_number([s["date"] for s in surprises])
        returns = np.array([s.get("return", np.nan) for s in surprises], float) * 100
        series.append(Series("out-of-sample surprises", dates, returns, kind="points",
                             color="bright_red", marker="✖"))
    split = bt.get("split")
    extra = ((("┆", f"out of sample from {split}"),) if split else ())
    return PlotSpec(title=f"{comparison.underlying} daily log returns %, last {len(h)} days, "
                          f"±{k:g}σ band of the model's conditional vol",
                    series=tuple(series), x_is_date=True, y_format="{:.1f}",
                    extra_legend=extra)


def price_plot(comparison) -> PlotSpec:
    """Closes with the model's one-day ±3σ band (from the comparison's history) and
    the out-of-sample surprises at their closes."""
    h = comparison.history
    bt = comparison.backtest or {}
    if h is None or len(h) == 0 or "band_low" not in h:
        return PlotSpec(title="no price history in this comparison")
    h = h.tail(PLOT_DAYS)
    x = to_day_number(h["date"].to_numpy())
    series = [Series("±3σ one-day band", x, h["band_low"].to_numpy(float), kind="band",
                     y2=h["band_high"].to_numpy(float), color="grey37"),
              Series("close", x, h["close"].to_numpy(float), color="bright_white")]
    surprises = bt.get("surprises") or []
    if surprises:
        days = np.array([np.datetime64(s["date"], "D") for s in surprises])
        hit = np.isin(h["date"].to_numpy().astype("datetime64[D]"), days)
        if hit.any():
            series.append(Series("out-of-sample surprises", x[hit],
                                 h["close"].to_numpy(float)[hit], kind="points",
                                 color="bright_red", marker="✖"))
    return PlotSpec(title=f"{comparison.underlying} closes, last {len(h)} days, with the "
                          "model's one-day ±3σ band", series=tuple(series), x_is_date=True,
                    y_format="{:,.0f}")


class ModelView(Deferred, ScrollableContainer):
    """Tables on the left, charts on the right (stacked on a narrow terminal)."""

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="model-left"):
            yield Static("", id="model-params")
            yield Static("", id="model-counts")
            yield Static("", id="model-surprises")
        with Vertical(id="model-right"):
            yield CellPlot(id="model-price")
            yield CellPlot(id="model-returns")
            yield BarChart(id="model-hist")

    def draw(self, comparison) -> None:
        self.query_one("#model-params", Static).update(params_table(comparison.model))
        bt = comparison.backtest
        self.query_one("#model-counts", Static).update(counts_table(bt))
        surprises = (bt or {}).get("surprises") or []
        st = Table(title="Largest out-of-sample surprises", title_justify="left",
                   header_style="bold", expand=True)
        st.add_column("Date")
        st.add_column("z", justify="right")
        for s in surprises[:8]:
            st.add_row(str(s["date"]), f"{s['z']:+.2f}")
        self.query_one("#model-surprises", Static).update(st)
        self.query_one("#model-price", CellPlot).show(price_plot(comparison))
        self.query_one("#model-returns", CellPlot).show(returns_plot(comparison))
        hist = (bt or {}).get("histogram")
        chart = self.query_one("#model-hist", BarChart)
        if hist:
            below, above = hist.get("below", 0), hist.get("above", 0)
            outside = f"; {below} below and {above} above the range" if below or above else ""
            chart.show(hist["edges"], hist["counts"], expected=hist.get("expected_counts"),
                       title=f"Out-of-sample residuals z = (r − μ)/σ, {bt.get('n_out')} days"
                             f"{outside}", x_format="{:+.0f}")
        else:
            chart.show([], [], title="Out-of-sample residuals: checking …")
