"""The track-record view (key ``t``): how the rich / fair / cheap verdict has done on
this underlying's own past — one row per tenor and, for the tenor under the cursor,
the implied vol, the forecast with its band and the realized vol that followed.

The record comes from :func:`optbench.track.build.track` (run off the UI thread);
the cells are the report's own (:func:`optbench.report.track.tenor_cells`), nothing
is recomputed here.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import DataTable, Label, Static
from textual.worker import get_current_worker

from optbench.tui.widgets.plot import CellPlot, PlotSpec, Series
from optbench.tui.widgets.table import SortableTable

COLUMN_KEYS = ("tenor", "obs", "checked", "rich", "fair", "cheap", "hit_rich", "hit_cheap",
               "gap_rich", "gap_fair", "gap_cheap", "brier", "mz_iv", "mz_fc", "enc", "lags",
               "today_gap", "pctile", "today")


def scenario_folder(source) -> Path:
    """The scenario folder of what the workbench has open (a chain file's folder)."""
    path = Path(source.chain)
    return path if path.is_dir() else path.parent


def tenor_plot(record, tenor_days: int) -> PlotSpec:
    """Implied, forecast with its band, and realized-to-expiry, by observation date."""
    o = record.observations
    g = o[o["tenor"] == tenor_days].sort_values("date")
    x = g["date"].to_numpy().astype("datetime64[D]").astype(np.int64).astype(float)

    def col(name: str) -> np.ndarray:
        return g[name].to_numpy(float) * 100.0

    lo, hi = record.band
    return PlotSpec(
        title=(f"{record.underlying} {tenor_days}-day tenor, % a year: ATM implied, the "
               f"forecast with its band ({lo:.0%}–{hi:.0%} of parameter uncertainty) as it "
               "was each day, and the realized vol that followed to expiry"),
        series=(Series("forecast band", x, col("forecast_low"), kind="band",
                       y2=col("forecast_high"), color="grey27"),
                Series("forecast", x, col("forecast_vol"), color="bright_blue"),
                Series("ATM implied", x, col("atm_iv"), color="bright_red"),
                Series("realized to expiry", x, col("realized_vol"), color="green")),
        x_is_date=True, y_format="{:.1f}")


class TrackScreen(ModalScreen[None]):
    """The verdict's track record for the open scenario."""

    BINDINGS = [Binding("escape", "close", "Back", id="track.close")]

    def __init__(self, source, **options) -> None:
        super().__init__()
        self.source = source
        self.options = options
        self.record = None

    def compose(self) -> ComposeResult:
        with Vertical(id="track-dialog", classes="dialog"):
            yield Label(f"Track record of the verdict: {scenario_folder(self.source)}",
                        classes="dialog-title")
            yield Label("Each past day replayed with the model fitted on returns up to that "
                        "day · the cursor's tenor is plotted · s sorts · escape goes back",
                        classes="dialog-hint")
            yield Static("replaying the verdict …", id="track-status")
            yield CellPlot(id="track-plot")
            yield SortableTable(id="track-table")

    def on_mount(self) -> None:
        self.run_track()
        self.query_one("#track-table", SortableTable).focus()

    @work(thread=True, exclusive=True, group="track", exit_on_error=False)
    def run_track(self) -> None:
        from optbench.track.build import track
        worker = get_current_worker()
        folder = scenario_folder(self.source)
        try:
            record = track(folder, history=self.source.history, **self.options)
        except Exception as err:  # shown to the user; the workbench keeps running
            if not worker.is_cancelled:
                self.app.call_from_thread(self._failed, str(err))
            return
        if not worker.is_cancelled:
            self.app.call_from_thread(self._show, record)

    def _failed(self, error: str) -> None:
        self.query_one("#track-status", Static).update(f"✗ {error}")

    def _show(self, record) -> None:
        from optbench.report.track import TABLE_HEAD, tenor_cells
        self.record = record
        m = record.model
        warn = f" · {len(record.warnings)} warnings: " + "; ".join(record.warnings) \
            if record.warnings else ""
        self.query_one("#track-status", Static).update(
            f"{len(record.observations):,} observations to {record.asof} · {m['name']}-"
            f"{m['dist']} refitted every {record.refit_every} trading days · vols in %, "
            f"gaps in vol points · MZ: realized variance on implied / forecast variance "
            f"(Newey–West se){warn} · {record.caution}")
        table = self.query_one("#track-table", SortableTable)
        raw = [(t.tenor_days, t.n_obs, t.n_checked, t.counts.get("rich", 0),
                t.counts.get("fair", 0), t.counts.get("cheap", 0), t.hit_rate_rich,
                t.hit_rate_cheap, t.gap_by_verdict.get("rich", {}).get("mean"),
                t.gap_by_verdict.get("fair", {}).get("mean"),
                t.gap_by_verdict.get("cheap", {}).get("mean"), t.brier,
                (t.mz_implied.get("coef") or {}).get("implied_var"),
                (t.mz_forecast.get("coef") or {}).get("forecast_var"),
                (t.encompassing.get("coef") or {}).get("implied_var"), t.lags,
                t.today.get("iv_minus_forecast"), t.today.get("gap_percentile"),
                t.today.get("verdict")) for t in record.tenors]
        table.set_rows(list(zip(COLUMN_KEYS, TABLE_HEAD)), raw,
                       [tuple(tenor_cells(t)) for t in record.tenors],
                       keys=[str(t.tenor_days) for t in record.tenors])
        if record.tenors:
            self._plot(record.tenors[0].tenor_days)

    def _plot(self, tenor_days: int) -> None:
        self.query_one("#track-plot", CellPlot).show(tenor_plot(self.record, tenor_days))

    @on(DataTable.CellHighlighted, "#track-table")
    def _moved(self, event: DataTable.CellHighlighted) -> None:
        if self.record is None:
            return
        key = event.cell_key.row_key.value
        if key is not None:
            self._plot(int(key))

    def action_close(self) -> None:
        self.dismiss(None)
