"""The universe screen: the ranked rows of ``optbench screen`` for a folder of
scenario folders; Enter on a row opens that underlying in the full workbench.

The rows come from :func:`optbench.screening.screen.screen` (run in local worker
processes off the UI thread); nothing is recomputed here.
"""
from __future__ import annotations

from pathlib import Path

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import DataTable, Label, Static
from textual.worker import get_current_worker

from optbench.report.fields import fmt
from optbench.report.screen import VERDICT_MARK
from optbench.tui.dialogs.requests import OpenRequest
from optbench.tui.widgets.table import SortableTable

#: (row key, column label, kind for formatting)
#: the verdict and the gap come early, so a narrow terminal shows them
COLUMNS = (
    ("code", "Code", "text"), ("tenor_days", "Days", "int"), ("verdict", "Verdict", "verdict"),
    ("iv_minus_forecast", "IV−fc", "volpt"), ("atm_iv", "ATM IV", "vol"),
    ("forecast_vol", "Fcst", "vol"), ("forecast_low", "Fc low", "vol"),
    ("forecast_high", "Fc high", "vol"), ("expiry", "Expiry", "date"),
    ("protection_cost", "90% put /1M", "money"),
    ("protection_expected_payoff", "Exp. payoff", "money"),
    ("protection_overpay", "Overpay", "money"), ("error", "Problem", "text"),
)

_STYLE = {"rich": "bold red", "cheap": "bold green", "fair": ""}


def _cell(value, kind: str):
    if kind == "verdict":
        text = VERDICT_MARK.get(value, value) if value else "–"
        return Text(text, style=_STYLE.get(value, ""))
    return fmt(value, kind, percent_sign=False)


def _problem(row: dict) -> str:
    """The row's problem without the folder path the reason starts with."""
    error = row.get("error") or ""
    return error.replace(f"{row.get('folder')}/", "") if error else "–"


class UniverseScreen(ModalScreen[OpenRequest | None]):
    """Screen a universe and pick an underlying to open."""

    BINDINGS = [
        Binding("escape", "cancel", "Back", id="universe.cancel"),
        Binding("enter", "open_row", "Open underlying", id="universe.open", priority=True),
        Binding("e", "export", "Export table", id="universe.export"),
    ]

    def __init__(self, folder: Path, result=None, *, workers: int | None = None,
                 scheduler: str | None = None, **screen_options) -> None:
        super().__init__()
        self.folder = Path(folder)
        self.result = result
        self.n_workers = workers
        self.scheduler = scheduler
        self.screen_options = screen_options

    def compose(self) -> ComposeResult:
        with Vertical(id="universe-dialog", classes="dialog"):
            yield Label(f"Screen of {self.folder}", classes="dialog-title")
            yield Label("Enter opens the row's underlying · s sorts by the column · e exports "
                        "the table · escape goes back · vols in %, IV−fc in vol points",
                        classes="dialog-hint")
            yield Static("screening …", id="universe-status")
            yield SortableTable(id="universe-table")

    def on_mount(self) -> None:
        if self.result is None:
            self.run_screen()
        else:
            self._show(self.result)
        self.query_one("#universe-table", SortableTable).focus()

    @work(thread=True, exclusive=True, group="universe", exit_on_error=False)
    def run_screen(self) -> None:
        from optbench.screening.screen import screen
        worker = get_current_worker()

        def progress(done: int, total: int) -> None:
            if not worker.is_cancelled:
                self.app.call_from_thread(self._progress, done, total)

        try:
            result = screen(self.folder, workers=self.n_workers, scheduler=self.scheduler,
                            progress=progress, **self.screen_options)
        except Exception as err:  # shown to the user; the app keeps running
            if not worker.is_cancelled:
                self.app.call_from_thread(self._failed, str(err))
            return
        if not worker.is_cancelled:
            self.app.call_from_thread(self._show, result)

    def _progress(self, done: int, total: int) -> None:
        self.query_one("#universe-status", Static).update(
            f"screening … {done} of {total} underlyings")

    def _failed(self, error: str) -> None:
        self.query_one("#universe-status", Static).update(f"✗ {error}")
        self.notify(error, title="Screen failed", severity="error", timeout=10)

    def _show(self, result) -> None:
        self.result = result
        n = len({r["code"] for r in result.rows})
        failed = f"; {len(result.failures)} could not be screened" if result.failures else ""
        self.query_one("#universe-status", Static).update(
            f"{n} underlyings, ranked by {result.sort}{failed}. Protection: put at "
            f"{result.floor:.0%} of spot per {result.notional:,.0f}, paid at the ask. "
            f"{result.caution}")
        rows = list(result.rows)
        table = self.query_one("#universe-table", SortableTable)
        table.set_rows([(key, label) for key, label, _ in COLUMNS],
                       [tuple(r.get(key) for key, _, _ in COLUMNS) for r in rows],
                       [tuple(_problem(r) if key == "error" else _cell(r.get(key), kind)
                              for key, _, kind in COLUMNS) for r in rows],
                       keys=[f"{i}" for i in range(len(rows))])
        self._rows = rows

    def selected_row(self) -> dict | None:
        table = self.query_one("#universe-table", SortableTable)
        if not getattr(self, "_rows", None) or not table.row_count:
            return None
        key = table.coordinate_to_cell_key(table.cursor_coordinate).row_key.value
        return self._rows[int(key)]

    def action_open_row(self) -> None:
        row = self.selected_row()
        if row is None:
            return
        if row.get("atm_iv") is None and row.get("error"):
            self.notify(f"{row['code']}: {row['error']}", title="Cannot open",
                        severity="warning", timeout=8)
            return
        self.dismiss(OpenRequest(chain=Path(row["folder"])))

    @on(DataTable.CellSelected)
    def _clicked(self, event: DataTable.CellSelected) -> None:
        event.stop()
        self.action_open_row()

    def action_cancel(self) -> None:
        self.dismiss(None)

    # -- export: the writers of ``optbench screen`` (optbench.tui.export)
    def action_export(self) -> None:
        from optbench.tui.dialogs.export import ExportDialog
        from optbench.tui.export import UNIVERSE_TABLES
        if self.result is None:
            self.notify("Nothing to export yet: the screen has not finished.",
                        severity="warning")
            return
        self.app.push_screen(ExportDialog(UNIVERSE_TABLES, "universe",
                                          f"screen-{self.folder.name}"), self._export)

    def _export(self, request) -> None:
        if request is not None:
            self.write_export(request)

    @work(thread=True, exclusive=True, group="universe-export", exit_on_error=False)
    def write_export(self, request) -> None:
        from optbench.errors import InputError
        from optbench.tui.export import export_screen
        try:
            path = export_screen(self.result, request)
        except InputError as err:
            self.app.call_from_thread(self.notify, str(err), title="Export failed",
                                      severity="error", timeout=10)
            return
        self.last_export = path
        self.app.call_from_thread(self.notify, f"wrote {path.resolve()}", title="Exported")
